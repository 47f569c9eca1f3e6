"""The fused Numba loop equals the NumPy reference kernel (which the map-vs-point tests pin to the physics)."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from radledger.model.fused import fused_applies
from radledger.model.params import SceneParams
from radledger.model.kernels import scene_kernel
from radledger.model.products import QUALITY_BITS

TIME = dt.datetime(2026, 7, 14, 18, 10, tzinfo=dt.timezone.utc)


def _inputs(n=200, seed=1):
    rng = np.random.default_rng(seed)
    shape = (n, n + 7)
    a = {
        "albedo": rng.uniform(0.05, 0.6, shape),
        "surface_temperature": rng.uniform(260, 330, shape),
        "air_temperature": rng.uniform(260, 315, shape),
        "vapour_pressure": rng.uniform(0.1, 3.5, shape),
        "shortwave_down": rng.uniform(0, 1100, shape),
        "land_cover": rng.choice([10.0, 30.0, 80.0], shape),
    }
    a = {k: v.astype(np.float32) for k, v in a.items()}
    # missing and out-of-range pixels
    a["albedo"][0, :10] = np.nan
    a["surface_temperature"][1, :10] = 500.0
    a["vapour_pressure"][2, :10] = -1.0
    a["land_cover"][3, :10] = np.nan
    return a


@pytest.mark.parametrize("products", [("net_radiation",), ("net_radiation", "net_shortwave", "net_longwave", "quality")])
def test_fused_equals_numpy_kernel(products, monkeypatch):
    lut = np.full(256, np.nan, np.float32)
    lut[[10, 30, 80]] = [0.96, 0.97, 0.99]
    p = SceneParams(time=TIME, products=products, emissivity_lut=lut)
    arrays = _inputs()
    assert fused_applies(p, arrays)
    fused = scene_kernel({k: v.copy() for k, v in arrays.items()}, None, None, p)
    import radledger.model.kernels as K
    monkeypatch.setattr(K, "fused_applies", lambda *a: False)     # force the NumPy reference path
    ref = scene_kernel({k: v.copy() for k, v in arrays.items()}, None, None, p)
    for name in products:
        got, exp = fused[name], ref[name]
        if name == "quality":
            np.testing.assert_array_equal(got, exp)
            assert (got[1, :10] & QUALITY_BITS["out_of_range"]).all()
            assert (got[0, :10] & QUALITY_BITS["input_missing"]).all()
        else:
            np.testing.assert_array_equal(np.isnan(got), np.isnan(exp))
            np.testing.assert_allclose(got, exp, atol=2e-3, equal_nan=True)


def test_other_methods_do_not_take_the_fused_path():
    arrays = _inputs(8)
    assert not fused_applies(SceneParams(time=TIME, products=("net_radiation",), sky_emissivity="prata"), arrays)
    assert not fused_applies(SceneParams(time=TIME, products=("net_radiation",), clouds="crawford-duchon"), arrays)
    assert not fused_applies(SceneParams(time=TIME, products=("sky_emissivity",)), arrays)
    no_sw = {k: v for k, v in arrays.items() if k != "shortwave_down"}
    assert not fused_applies(SceneParams(time=TIME, products=("net_radiation",)), no_sw)


def test_unknown_class_takes_the_default_and_is_flagged():
    lut = np.full(256, np.nan, np.float32)
    lut[[10, 30]] = [0.96, 0.97]                       # 80 is missing from this table
    arrays = _inputs(16)
    p = SceneParams(time=TIME, products=("net_radiation", "quality"), emissivity_lut=lut,
                    emissivity_unknown=0.95)
    out = scene_kernel(arrays, None, None, p)
    is80 = arrays["land_cover"] == 80
    assert (out["quality"][is80] & QUALITY_BITS["emissivity_default"]).all()
    assert not (out["quality"][~is80 & ~np.isnan(arrays["land_cover"])] & QUALITY_BITS["emissivity_default"]).any()


def test_unknown_class_without_default_names_the_class():
    from radledger.errors import UnknownClassError
    lut = np.full(256, np.nan, np.float32)
    lut[[10, 30]] = [0.96, 0.97]
    p = SceneParams(time=TIME, products=("net_radiation",), emissivity_lut=lut, land_cover_path="lc.tif",
                    emissivity_table="table.csv")
    with pytest.raises(UnknownClassError, match=r"lc.tif: land-cover classes 80 are not in .*table.csv"):
        scene_kernel(_inputs(16), None, None, p)
