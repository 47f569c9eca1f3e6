"""The fused Numba loop equals the NumPy reference kernel, product by product and bit by bit.

Where the fused loop applies is decided in one place (model/needs.py); these
tests run both paths on the same chunk for every configuration the needs
definition sends to the fused loop, and check that the definition sends
nothing else there.  (The NumPy kernel itself is pinned to the physics by the
map-versus-point tests in test_pipeline.py and test_methods_matrix.py.)
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import itertools

import numpy as np
import pytest
from affine import Affine
from rasterio.crs import CRS
from rasterio.windows import Window

from radledger.errors import UnknownClassError
from radledger.grid import TargetGrid
from radledger.model.kernels import scene_kernel
from radledger.model.needs import FUSED_PRODUCTS, scene_needs
from radledger.model.params import SceneParams
from radledger.model.products import SCENE_QUALITY_BITS as BITS
from radledger.model.sun import sun_geometry
from radledger.physics import SKY_EMISSIVITY_MODELS

NOON = dt.datetime(2026, 7, 14, 18, 10, tzinfo=dt.timezone.utc)      # about local noon at 116 W
DUSK = dt.datetime(2026, 7, 15, 3, 30, tzinfo=dt.timezone.utc)       # sun around the horizon there
GRID = TargetGrid(CRS.from_epsg(32611), Affine(30.0, 0, 400000.0, 0, -30.0, 4300000.0), 207, 200, chunk=256)
LAYERS = ("albedo", "surface_temperature", "air_temperature", "vapour_pressure", "shortwave_down", "land_cover",
          "elevation")


def _inputs(shape=(200, 207), seed=1):
    rng = np.random.default_rng(seed)
    a = {
        "albedo": rng.uniform(0.05, 0.6, shape),
        "surface_temperature": rng.uniform(260, 330, shape),
        "air_temperature": rng.uniform(260, 315, shape),
        "vapour_pressure": rng.uniform(0.1, 3.5, shape),
        "shortwave_down": rng.uniform(0, 1100, shape),
        "land_cover": rng.choice([10.0, 30.0, 80.0], shape),
        "elevation": rng.uniform(500, 3000, shape),
    }
    a = {k: v.astype(np.float32) for k, v in a.items()}
    # missing and out-of-range pixels in every layer, and holes in the DEM
    a["albedo"][0, :10] = np.nan
    a["surface_temperature"][1, :10] = 500.0
    a["vapour_pressure"][2, :10] = -1.0
    a["land_cover"][3, :10] = np.nan
    a["shortwave_down"][4, :10] = 2000.0
    a["air_temperature"][5, :10] = np.nan
    a["elevation"][6:20, 30:60] = np.nan
    return a


def _lut(classes=(10, 30, 80)):
    lut = np.full(256, np.nan, np.float32)
    lut[list(classes)] = [0.96, 0.97, 0.99][:len(classes)]
    return lut


def _params(given, products, *, time=NOON, constant=None, unknown=None, lut=None, **methods):
    methods = {"sky_emissivity": "brutsaert", "clouds": "none", **methods}
    needs = scene_needs(given, products=products, emissivity_constant=constant is not None, **methods)
    return SceneParams(time=time, products=products, needs=needs, emissivity_lut=_lut() if lut is None else lut,
                       emissivity_constant=constant, emissivity_unknown=unknown, **methods)


def _both(arrays, p):
    """(fused, numpy) results of one chunk; the sun is given wherever the needs ask for it."""
    arrays = {k: arrays[k] for k in p.needs.layers}
    sun = sun_geometry(GRID, Window(0, 0, 207, 200), p.time) if p.needs.sun else None
    fused = scene_kernel({k: v.copy() for k, v in arrays.items()}, sun, None, p)
    numpy = scene_kernel({k: v.copy() for k, v in arrays.items()}, sun, None,
                         dataclasses.replace(p, needs=dataclasses.replace(p.needs, fused=False)))
    return fused, numpy


SUBSETS = [s for n in range(1, 5) for s in itertools.combinations(FUSED_PRODUCTS, n)]


@pytest.mark.parametrize("products", SUBSETS, ids=["+".join(s) for s in SUBSETS])
@pytest.mark.parametrize("dem", ["no DEM", "DEM with gaps"])
@pytest.mark.parametrize("time", [NOON, DUSK], ids=["noon", "dusk"])
def test_fused_equals_numpy_on_every_product_and_bit(products, dem, time):
    given = set(LAYERS) - ({"elevation"} if dem == "no DEM" else set())
    p = _params(given, products, time=time)
    assert p.needs.fused
    assert "elevation" not in p.needs.layers          # nothing the fused loop computes needs a DEM
    fused, numpy = _both(_inputs(), p)
    assert set(fused) >= set(products) and set(numpy) >= set(products)
    for name in products:
        got, exp = fused[name], numpy[name]
        if name == "quality":
            np.testing.assert_array_equal(got, exp)
        else:
            np.testing.assert_array_equal(np.isnan(got), np.isnan(exp))
            np.testing.assert_allclose(got, exp, atol=2e-3, equal_nan=True)
    if "quality" in products:
        q = fused["quality"]
        assert (q[1, :10] & BITS["out_of_range"]).all() and (q[0, :10] & BITS["input_missing"]).all()
        assert not (q[6:20, 30:60] & BITS["input_missing"]).any()    # the DEM is not read: its gaps flag nothing
        if time is DUSK:
            assert ((q & BITS["sun_down"]) | (q & BITS["low_sun"])).any()


@pytest.mark.parametrize("emissivity", ["table", "constant", "unknown default"])
def test_fused_equals_numpy_for_every_emissivity_source(emissivity):
    kw = {"table": {}, "constant": {"constant": 0.97},
          "unknown default": {"lut": _lut((10, 30)), "unknown": 0.95}}[emissivity]
    given = set(LAYERS) - ({"land_cover"} if emissivity == "constant" else set())
    p = _params(given, FUSED_PRODUCTS, **kw)
    assert p.needs.fused
    fused, numpy = _both(_inputs(), p)
    np.testing.assert_array_equal(fused["quality"], numpy["quality"])
    np.testing.assert_allclose(fused["net_radiation"], numpy["net_radiation"], atol=2e-3, equal_nan=True)
    if emissivity == "unknown default":
        is80 = _inputs()["land_cover"] == 80
        assert (fused["quality"][is80] & BITS["emissivity_default"]).all()


@pytest.mark.parametrize("model", [m for m in SKY_EMISSIVITY_MODELS if m != "brutsaert"])
def test_other_sky_models_are_not_fused(model):
    assert not _params(set(LAYERS), ("net_radiation",), sky_emissivity=model).needs.fused


@pytest.mark.parametrize("given, products, methods", [
    (set(LAYERS), ("net_radiation",), {"clouds": "crawford-duchon"}),
    (set(LAYERS), ("sky_emissivity",), {}),
    (set(LAYERS) - {"shortwave_down"}, ("net_radiation",), {}),
    (set(LAYERS) - {"vapour_pressure"} | {"dewpoint_temperature"}, ("net_radiation",), {}),
    (set(LAYERS) - {"vapour_pressure"} | {"relative_humidity"}, ("net_radiation",), {}),
    (set(LAYERS), ("net_radiation",), {"scene_to_day": "sinusoidal"}),
], ids=["clouds", "sky-emissivity-product", "modelled-shortwave", "dewpoint", "relative-humidity", "scene-to-day"])
def test_what_the_fused_loop_does_not_cover_goes_to_numpy(given, products, methods):
    assert not _params(given, products, **methods).needs.fused


def test_unknown_class_without_default_names_the_class():
    p = dataclasses.replace(_params(set(LAYERS), ("net_radiation",), lut=_lut((10, 30))),
                            land_cover_path="lc.tif", emissivity_table="table.csv")
    with pytest.raises(UnknownClassError, match=r"lc.tif: land-cover classes 80 are not in .*table.csv"):
        scene_kernel({k: _inputs()[k] for k in p.needs.layers}, None, None, p)
