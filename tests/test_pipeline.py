"""Map versus point: the pipeline's maps equal the physics evaluated pixel by pixel.

The reference here is radledger's public physics API (itself checked against
FAO-56 and reference libraries in test_reference_*.py) applied to inputs
decoded independently with NumPy, and, for inputs on other grids, GDAL's own
whole-array warp (rasterio.warp.reproject) rather than the per-chunk path.
"""

from __future__ import annotations

import numpy as np
import pytest
import rasterio
from rasterio.enums import Resampling
from rasterio.warp import reproject

import radledger
from radledger import physics as ph
from radledger.model.products import QUALITY_NODATA, SCENE_QUALITY_BITS as QUALITY_BITS
from radledger.runner import run_config
from radledger.config import load_config

from reference_clear_sky import G_SC, appendix_d, spa_sun
from scenario import CLASSES, CRS_UTM, DELETE, make_scenario, read

STAMP = "20260714T1810"


def _eps(classes):
    lut = np.full(256, np.nan)
    for c, e in CLASSES.items():
        lut[c] = e
    return lut[classes.astype(int)]


def _expected_rn(t, ta=None, ea=None, rs=None):
    ta = t["air_temperature"] if ta is None else ta
    ea = t["vapour_pressure"] if ea is None else ea
    rs = t["shortwave_down"] if rs is None else rs
    return radledger.net_radiation(t["albedo"], rs, t["surface_temperature"], ta, ea, _eps(t["land_cover"]))


def _run(scn, **kw):
    return run_config(load_config(scn.config), **kw)


def test_same_grid_scaled_integers_hpa_degc_match_point_by_point(tmp_path):
    scn = make_scenario(tmp_path)
    _run(scn)
    got = read(tmp_path / "out" / "scenes" / f"net_radiation_{STAMP}.tif")
    exp = _expected_rn(scn.truth)
    assert got.dtype == np.float32
    # NaN exactly where an input is missing
    np.testing.assert_array_equal(np.isnan(got), np.isnan(exp))
    ok = ~np.isnan(exp)
    assert np.nanmax(np.abs(got[ok] - exp[ok])) < 0.02   # float32 arithmetic vs float64 reference


def test_components_and_sign_convention(tmp_path):
    scn = make_scenario(tmp_path, holes=False)
    _run(scn)
    out = tmp_path / "out" / "scenes"
    rn, rns, rnl = (read(out / f"{p}_{STAMP}.tif") for p in ("net_radiation", "net_shortwave", "net_longwave"))
    t = scn.truth
    np.testing.assert_allclose(rns, (1 - t["albedo"]) * t["shortwave_down"], atol=0.01)   # FAO-56 eq. 38
    np.testing.assert_allclose(rn, rns - rnl, atol=0.01)                                    # FAO-56 eq. 40
    assert (rnl > 0).mean() > 0.9   # daytime: the surface loses net longwave (common practice)


def test_coarse_geographic_weather_matches_whole_array_warp(tmp_path):
    scn = make_scenario(tmp_path, coarse_weather=True)
    _run(scn)
    got = read(tmp_path / "out" / "scenes" / f"net_radiation_{STAMP}.tif")
    c = scn.truth["coarse"]
    warped = {}
    for name in ("ta", "ea", "rs"):
        dst = np.full(scn.shape, np.nan, np.float32)
        reproject(c[name], dst, src_transform=c["transform"], src_crs=c["crs"], dst_transform=scn.transform,
                  dst_crs=CRS_UTM, resampling=Resampling.bilinear, dst_nodata=np.nan)
        warped[name] = dst.astype(float)
    exp = _expected_rn(scn.truth, ta=warped["ta"] + 273.15, ea=warped["ea"] * 0.1, rs=warped["rs"])
    np.testing.assert_array_equal(np.isnan(got), np.isnan(exp))
    ok = ~np.isnan(exp)
    assert np.max(np.abs(got[ok] - exp[ok])) < 0.1


def test_quality_flags_missing_and_out_of_range(tmp_path):
    scn = make_scenario(tmp_path)
    # a hot spot of implausible LST (400 K) inside the grid
    with rasterio.open(tmp_path / "lst.tif", "r+") as ds:
        a = ds.read(1)
        a[200:205, 10:15] = int(400 / 0.02)
        ds.write(a, 1)
    report = _run(scn)
    out = tmp_path / "out" / "scenes"
    q = read(out / f"quality_{STAMP}.tif")
    rn = read(out / f"net_radiation_{STAMP}.tif")
    assert q.dtype == np.uint8
    assert (q[200:205, 10:15] & QUALITY_BITS["out_of_range"]).all()
    assert np.isnan(rn[200:205, 10:15]).all()
    assert (q[10:30, 40:70] & QUALITY_BITS["input_missing"]).all()   # albedo hole
    assert not (q == QUALITY_NODATA).any()
    assert report.results[0].summary["quality"].out_of_range == 25
    with rasterio.open(out / f"quality_{STAMP}.tif") as ds:
        assert ds.nodata == QUALITY_NODATA
        assert "out_of_range" in ds.tags()["flag_meanings"]


def _sample(shape, n=40, seed=3):
    rng = np.random.default_rng(seed)
    return rng.integers(0, shape[0], n), rng.integers(0, shape[1], n)


def test_modelled_clear_sky_shortwave_when_absent(tmp_path):
    # the scene default: App. D beam + diffuse on the SPA sun, checked against reference_clear_sky (pvlib SPA
    # and the ASCE-EWRI 2005 App. D equations written out independently)
    scn = make_scenario(tmp_path, holes=False, with_shortwave=False)
    _run(scn)
    out = tmp_path / "out" / "scenes"
    rns = read(out / f"net_shortwave_{STAMP}.tif")
    q = read(out / f"quality_{STAMP}.tif")
    assert (q & QUALITY_BITS["modelled_shortwave"]).all()
    rows, cols = _sample(scn.shape)
    lon, lat = _lonlat(scn)
    cosz, r = spa_sun(lat[rows, cols], lon[rows, cols], "2026-07-14T18:10:00Z")
    t = scn.truth
    rso = appendix_d(cosz, r, t["elevation"][rows, cols], t["vapour_pressure"][rows, cols])
    got = rns[rows, cols] / (1 - t["albedo"][rows, cols])
    np.testing.assert_allclose(got, rso, rtol=0.005)


def test_modelled_clear_sky_shortwave_by_eq37_on_request(tmp_path):
    # methods.clear_sky_shortwave: fao56 keeps FAO-56 eq. 37, (0.75 + 2e-5 z) Ra, with Ra from the SPA sun
    scn = make_scenario(tmp_path, holes=False, with_shortwave=False)
    scn.write_config(**{"methods.clear_sky_shortwave": "fao56"})
    _run(scn)
    rns = read(tmp_path / "out" / "scenes" / f"net_shortwave_{STAMP}.tif")
    rows, cols = _sample(scn.shape)
    lon, lat = _lonlat(scn)
    cosz, r = spa_sun(lat[rows, cols], lon[rows, cols], "2026-07-14T18:10:00Z")
    z = scn.truth["elevation"][rows, cols]
    rso = (0.75 + 2e-5 * z) * G_SC / r ** 2 * cosz
    np.testing.assert_allclose(rns[rows, cols] / (1 - scn.truth["albedo"][rows, cols]), rso, rtol=0.005)


def _lonlat(scn):
    from pyproj import Transformer
    h, w = scn.shape
    t = scn.transform
    xs = t.c + t.a * (np.arange(w) + 0.5)
    ys = t.f + t.e * (np.arange(h) + 0.5)
    x, y = np.meshgrid(xs, ys)
    return Transformer.from_crs(CRS_UTM, "EPSG:4326", always_xy=True).transform(x, y)


def test_crawford_duchon_raises_sky_emissivity_under_cloud(tmp_path):
    scn = make_scenario(tmp_path, holes=False)
    with rasterio.open(tmp_path / "rs.tif", "r+") as ds:
        a = ds.read(1)
        a[:, :100] *= 0.4     # a cloud band over the western third
        ds.write(a, 1)
    scn.write_config(**{"methods.clouds": "crawford-duchon",
                        "output.products": ["net_radiation", "sky_emissivity", "quality"]})
    _run(scn)
    out = tmp_path / "out" / "scenes"
    eps = read(out / f"sky_emissivity_{STAMP}.tif")
    q = read(out / f"quality_{STAMP}.tif")
    rows, cols = _sample(scn.shape)
    lon, lat = _lonlat(scn)
    t = scn.truth
    cosz, r = spa_sun(lat[rows, cols], lon[rows, cols], "2026-07-14T18:10:00Z")
    rso = appendix_d(cosz, r, t["elevation"][rows, cols], t["vapour_pressure"][rows, cols])
    with rasterio.open(tmp_path / "rs.tif") as ds:
        rs = ds.read(1).astype(float)[rows, cols]
    # Brutsaert (1975) with e in hPa, and Crawford & Duchon (1999): eps = c + (1 - c) eps_clear, c = 1 - Rs/Rso
    clear = 1.24 * (10 * t["vapour_pressure"][rows, cols] / t["air_temperature"][rows, cols]) ** (1 / 7)
    c = np.clip(1 - rs / rso, 0, 1)
    np.testing.assert_allclose(eps[rows, cols], c + (1 - c) * clear, atol=2e-4)
    assert (q[:, :100] & QUALITY_BITS["cloud_corrected"]).all()


def test_rerun_skips_current_products_and_overwrite_recomputes(tmp_path):
    scn = make_scenario(tmp_path)
    first = _run(scn)
    assert len(first.written) == 4
    path = tmp_path / "out" / "scenes" / f"net_radiation_{STAMP}.tif"
    mtime = path.stat().st_mtime_ns
    second = _run(scn)
    assert second.written == [] and len(second.skipped) == 4
    assert path.stat().st_mtime_ns == mtime
    third = _run(scn, overwrite=True)
    assert len(third.written) == 4


def test_changed_input_recomputes(tmp_path):
    scn = make_scenario(tmp_path)
    _run(scn)
    scn.write_config(**{"methods.sky_emissivity": "prata"})
    again = _run(scn)
    assert len(again.written) == 4


def test_other_sky_models_match_point_by_point(tmp_path):
    scn = make_scenario(tmp_path, holes=False)
    for model in ph.SKY_EMISSIVITY_MODELS:
        scn.write_config(**{"methods.sky_emissivity": model, "output.products": ["net_radiation"]})
        _run(scn)
        got = read(tmp_path / "out" / "scenes" / f"net_radiation_{STAMP}.tif")
        t = scn.truth
        exp = radledger.net_radiation(t["albedo"], t["shortwave_down"], t["surface_temperature"],
                                      t["air_temperature"], t["vapour_pressure"], _eps(t["land_cover"]),
                                      sky_emissivity=model)
        assert np.nanmax(np.abs(got - exp)) < 0.02, model


def test_dewpoint_instead_of_vapour_pressure(tmp_path):
    from scenario import write_tif
    scn = make_scenario(tmp_path, holes=False)
    td = np.full(scn.shape, 8.0, np.float32)       # degC
    write_tif(tmp_path / "td.tif", td, transform=scn.transform)
    scn.write_config(**{"scenes.0.vapour_pressure": DELETE, "scenes.0.dewpoint_temperature": "td.tif",
                        "layers.dewpoint_temperature": {"units": "degC"}, "output.products": ["net_radiation"]})
    _run(scn)
    got = read(tmp_path / "out" / "scenes" / f"net_radiation_{STAMP}.tif")
    ea = ph.vapour_pressure_from_dewpoint(np.full(scn.shape, 281.15))   # FAO-56 eq. 14
    exp = _expected_rn(scn.truth, ea=ea)
    assert np.nanmax(np.abs(got - exp)) < 0.02


def test_static_layer_shared_by_scenes(tmp_path):
    scn = make_scenario(tmp_path, holes=False)
    scn.write_config(**{"scenes.0.air_temperature": DELETE, "static.air_temperature": "ta.tif"})
    import yaml
    cfg = yaml.safe_load(scn.config.read_text())
    second = dict(cfg["scenes"][0], time="2026-07-15T18:10:00Z")
    cfg["scenes"] = [cfg["scenes"][0], second]
    scn.config.write_text(yaml.safe_dump(cfg))
    report = _run(scn)
    assert len(report.written) == 8


def test_night_scene_flags_sun_down_and_keeps_negative_net_radiation(tmp_path):
    # 08:00 UTC is about midnight local solar time at 119 W
    scn = make_scenario(tmp_path, holes=False, time="2026-07-14T08:00:00Z")
    from scenario import write_tif
    write_tif(tmp_path / "rs.tif", np.zeros(scn.shape, np.float32), transform=scn.transform)
    _run(scn)
    out = tmp_path / "out" / "scenes"
    q = read(out / "quality_20260714T0800.tif")
    rn = read(out / "net_radiation_20260714T0800.tif")
    assert (q & QUALITY_BITS["sun_down"]).all()
    # at night net radiation is the (negative) net longwave: typically -30 to -100 W m-2 (common practice)
    assert np.nanmax(rn) < 0
    with rasterio.open(out / "quality_20260714T0800.tif") as ds:
        assert ds.tags()["time"] == "2026-07-14T08:00:00Z"


def test_daytime_scene_has_no_sun_down_flags(tmp_path):
    scn = make_scenario(tmp_path, holes=False)
    _run(scn)
    q = read(tmp_path / "out" / "scenes" / f"quality_{STAMP}.tif")
    assert not (q & QUALITY_BITS["sun_down"]).any()


def _albers(lat_1):
    return (f"+proj=aea +lat_0=23 +lon_0=-116 +lat_1={lat_1} +lat_2=45.5 +x_0=0 +y_0=0 +datum=WGS84 "
            f"+units=m +no_defs")


@pytest.mark.parametrize("change", ["half-pixel shift", "albers standard parallel"])
def test_a_changed_grid_is_never_taken_for_the_old_one(tmp_path, change):
    scn = make_scenario(tmp_path, shape=(60, 80), chunk=64)
    # a 10 m grid in a custom Albers CRS over the scenario (inputs warped per chunk)
    grid = {"crs": _albers(29.5), "resolution": 10.0, "bounds": [-30000.0, 1490000.0, -29200.0, 1490600.0],
            "chunk": 64}
    from pyproj import Transformer
    x, y = Transformer.from_crs(CRS_UTM, _albers(29.5), always_xy=True).transform(300000 + 1200, 4280000 - 900)
    grid["bounds"] = [round(x) - 300.0, round(y) - 200.0, round(x) + 300.0, round(y) + 200.0]
    scn.write_config(**{"grid": grid})
    first = _run(scn)
    assert first.written
    if change == "half-pixel shift":
        b = grid["bounds"]
        grid = {**grid, "bounds": [b[0] + 5.0, b[1], b[2] + 5.0, b[3]]}
    else:
        grid = {**grid, "crs": _albers(29.6)}
    scn.write_config(**{"grid": grid})
    second = _run(scn)
    assert second.written and not second.skipped      # every product recomputed on the new grid
