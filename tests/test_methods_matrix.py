"""Every sky model, every humidity form, with and without a DEM: the whole map equals an independent
evaluation of the published formulas at every pixel (and nothing crashes for want of a DEM).

The expected values are written here from the papers' equations (Stefan-Boltzmann with the CODATA 2018
constant from scipy; FAO-56 eqs. 11, 14 and 19 for humidity; the sky-emissivity formulas as published),
not with radledger's physics functions.
"""

from __future__ import annotations

import numpy as np
import pytest
import rasterio
import yaml
from scipy.constants import Stefan_Boltzmann as SIGMA

from radledger.config import load_config
from radledger.model.products import SCENE_QUALITY_BITS as BITS
from radledger.runner import run_config

from scenario import CLASSES, make_scenario, read, write_tif

STAMP = "20260714T1810"


def _esat(t_c):
    """FAO-56 eq. 11 [kPa], T in degC."""
    return 0.6108 * np.exp(17.27 * t_c / (t_c + 237.3))


def _sky(model, ta, ea):
    """Clear-sky emissivity, ta [K], ea [kPa], from each paper's formula (coefficients from memory of the
    papers, as the README quotes them; e in hPa as the papers write it)."""
    e_hpa = 10 * ea
    return {
        "brutsaert": 1.24 * (e_hpa / ta) ** (1 / 7),                       # Brutsaert (1975), e in hPa
        "swinbank": 5.31e-13 * ta ** 6 / (SIGMA * ta ** 4),                 # Swinbank (1963) flux form
        "idso-jackson": 1 - 0.261 * np.exp(-7.77e-4 * (273 - ta) ** 2),     # Idso & Jackson (1969), 273 as published
        "idso": np.minimum(0.70 + 5.95e-5 * e_hpa * np.exp(1500 / ta), 1.0),  # Idso (1981), capped at 1
        "satterlund": 1.08 * (1 - np.exp(-e_hpa ** (ta / 2016))),          # Satterlund (1979)
        "prata": 1 - (1 + 46.5 * e_hpa / ta) * np.exp(-np.sqrt(1.2 + 3 * 46.5 * e_hpa / ta)),  # Prata (1996)
    }[model]


def _expected(t, eps_sky):
    eps_s = np.vectorize(CLASSES.get)(t["land_cover"].astype(int)).astype(float)
    rld = eps_sky * SIGMA * t["air_temperature"] ** 4
    rnl = eps_s * (SIGMA * t["surface_temperature"] ** 4 - rld)
    return (1 - t["albedo"]) * t["shortwave_down"] - rnl


def _scenario(tmp_path, humidity: str, dem: bool):
    scn = make_scenario(tmp_path, shape=(70, 90), chunk=64)
    t = scn.truth
    cfg = yaml.safe_load(scn.config.read_text())
    scene = cfg["scenes"][0]
    ta_c = t["air_temperature"] - 273.15
    if humidity == "dewpoint_temperature":
        ea = t["vapour_pressure"]
        # invert FAO-56 eq. 14 for the fixture's dew point [degC]
        x = np.log(ea / 0.6108)
        td = (237.3 * x / (17.27 - x)).astype(np.float32)
        write_tif(tmp_path / "td.tif", td, transform=scn.transform)
        scene.pop("vapour_pressure")
        scene["dewpoint_temperature"] = "td.tif"
        cfg["layers"]["dewpoint_temperature"] = {"units": "degC"}
        t["vapour_pressure"] = _esat(td.astype(float))                       # FAO-56 eq. 14
    elif humidity == "relative_humidity":
        rh = (100 * t["vapour_pressure"] / _esat(ta_c)).astype(np.float32)
        write_tif(tmp_path / "rh.tif", rh, transform=scn.transform)
        scene.pop("vapour_pressure")
        scene["relative_humidity"] = "rh.tif"
        t["vapour_pressure"] = rh.astype(float) / 100 * _esat(ta_c)          # FAO-56 eq. 19 at one instant
    if not dem:
        cfg["static"].pop("elevation")
    scn.config.write_text(yaml.safe_dump(cfg))
    return scn


@pytest.mark.parametrize("humidity", ["vapour_pressure", "dewpoint_temperature", "relative_humidity"])
@pytest.mark.parametrize("dem", [False, True], ids=["no-DEM", "DEM"])
def test_humidity_forms_match_point_by_point(tmp_path, humidity, dem):
    scn = _scenario(tmp_path, humidity, dem)
    run_config(load_config(scn.config))
    got = read(tmp_path / "out" / "scenes" / f"net_radiation_{STAMP}.tif")
    t = scn.truth
    exp = _expected(t, _sky("brutsaert", t["air_temperature"], t["vapour_pressure"]))
    np.testing.assert_array_equal(np.isnan(got), np.isnan(exp))
    assert np.nanmax(np.abs(got - exp)) < 0.1
    q = read(tmp_path / "out" / "scenes" / f"quality_{STAMP}.tif")
    assert not (q[~np.isnan(exp)] & (BITS["input_missing"] | BITS["out_of_range"])).any()


@pytest.mark.parametrize("model", ["brutsaert", "swinbank", "idso-jackson", "idso", "satterlund", "prata"])
def test_every_sky_model_runs_without_a_dem_and_matches_point_by_point(tmp_path, model):
    scn = _scenario(tmp_path, "vapour_pressure", dem=False)
    scn.write_config(**{"methods.sky_emissivity": model,
                        "output.products": ["net_radiation", "sky_emissivity", "quality"]})
    run_config(load_config(scn.config))
    out = tmp_path / "out" / "scenes"
    t = scn.truth
    sky = _sky(model, t["air_temperature"], t["vapour_pressure"])
    np.testing.assert_allclose(read(out / f"sky_emissivity_{STAMP}.tif"), sky, atol=2e-5)
    exp = _expected(t, sky)
    got = read(out / f"net_radiation_{STAMP}.tif")
    np.testing.assert_array_equal(np.isnan(got), np.isnan(exp))
    assert np.nanmax(np.abs(got - exp)) < 0.1


def test_dem_gaps_flag_only_where_the_dem_is_used(tmp_path):
    scn = make_scenario(tmp_path, shape=(70, 90), chunk=64)
    with rasterio.open(tmp_path / "dem.tif", "r+") as ds:
        z = ds.read(1)
        z[20:30, 20:40] = np.nan
        ds.write(z, 1)
    run_config(load_config(scn.config))                 # shortwave given: the DEM is not used
    q = read(tmp_path / "out" / "scenes" / f"quality_{STAMP}.tif")
    assert not (q[20:30, 20:40] & BITS["input_missing"]).any()
    scn.write_config(**{"methods.clouds": "crawford-duchon", "output.directory": "out2"})
    run_config(load_config(scn.config))                 # the cloud correction needs the clear sky: DEM used
    q = read(tmp_path / "out2" / "scenes" / f"quality_{STAMP}.tif")
    assert (q[20:30, 20:40] & BITS["input_missing"]).all()
    assert np.isnan(read(tmp_path / "out2" / "scenes" / f"net_radiation_{STAMP}.tif")[20:30, 20:40]).all()
