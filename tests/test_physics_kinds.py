"""Every public array function gives the same kind back and the same numbers.

Kinds: Python floats, NumPy arrays, Dask arrays (which must stay lazy: a
scheduler that refuses to compute is active while the function runs) and
xarray DataArrays (NumPy- and Dask-backed).  The reference is the NumPy
result; the float result is checked element by element against it.
"""

from __future__ import annotations

import dask
import dask.array as da
import numpy as np
import pytest
import xarray as xr

import radledger
from radledger import physics as p

SHAPE = (2, 3)
SCENE_TIME = "2026-07-14T10:30:00Z"  # one instant (the precise sun takes a scalar time)
MASKS = {"low_sun"}  # boolean results
N = SHAPE[0] * SHAPE[1]


def lin(a, b):
    return np.linspace(a, b, N).reshape(SHAPE)


def ints(a, b):
    return np.linspace(a, b, N).round().astype(np.int64).reshape(SHAPE)


# name -> (callable, positional NumPy arrays, keyword arguments kept scalar)
CASES = {
    "inverse_relative_distance": (p.inverse_relative_distance, [ints(1, 366)], {}),
    "solar_declination": (p.solar_declination, [ints(1, 366)], {}),
    "seasonal_correction": (p.seasonal_correction, [ints(1, 366)], {}),
    "hour_angle": (p.hour_angle, [lin(-3, 30), lin(-180, 180), ints(1, 366)], {}),
    "cos_zenith": (p.cos_zenith, [lin(-60, 60), lin(-0.4, 0.4), lin(-3, 3)], {}),
    "sunset_hour_angle": (p.sunset_hour_angle, [lin(-89, 89), lin(-0.4, 0.4)], {}),
    "daylight_hours": (p.daylight_hours, [lin(0, 3)], {}),
    "sunrise_sunset": (p.sunrise_sunset, [lin(-60, 60), lin(-180, 180), ints(1, 366)], {}),
    "extraterrestrial_daily": (p.extraterrestrial_daily, [lin(-60, 60), ints(1, 366)], {}),
    "extraterrestrial_period": (
        p.extraterrestrial_period,
        [lin(-60, 60), ints(1, 366), lin(-2, 1), lin(-1.5, 2)],
        {},
    ),
    "extraterrestrial_hourly": (
        p.extraterrestrial_hourly,
        [lin(-60, 60), lin(-180, 180), ints(1, 366), lin(0, 23.5)],
        {"period_hours": 0.5},
    ),
    "extraterrestrial_instant": (
        p.extraterrestrial_instant,
        [lin(-60, 60), lin(-180, 180), ints(1, 366), lin(0, 23.5)],
        {},
    ),
    "julian_day": (p.julian_day, [ints(1990, 2030), ints(1, 366), lin(0, 24)], {}),
    "michalsky_1988": (
        p.michalsky_1988,
        [ints(1990, 2030), ints(1, 366), lin(0, 24), lin(-180, 180)],
        {},
    ),
    "sun_position": (
        lambda lat, lon, z: p.sun_position(lat, lon, SCENE_TIME, elevation=z),
        [lin(-65, 70), lin(-180, 180), lin(0, 3000)],
        {},
    ),
    "extraterrestrial_instant_precise": (
        lambda lat, lon, z: p.extraterrestrial_instant_precise(lat, lon, SCENE_TIME, elevation=z),
        [lin(-65, 70), lin(-180, 180), lin(0, 3000)],
        {},
    ),
    "net_shortwave": (p.net_shortwave, [lin(0.05, 0.9), lin(0, 1000)], {}),
    "atmospheric_pressure": (p.atmospheric_pressure, [lin(0, 3000)], {}),
    "clear_sky_shortwave_fao56": (p.clear_sky_shortwave_fao56, [lin(0, 40), lin(0, 3000)], {}),
    "precipitable_water": (p.precipitable_water, [lin(0.1, 5), lin(70, 101.3)], {}),
    "clear_sky_shortwave_beam_diffuse": (
        p.clear_sky_shortwave_beam_diffuse,
        [lin(0, 1300), lin(-0.2, 1.0), lin(70, 101.3), lin(2, 60)],
        {"turbidity": 0.8},
    ),
    "surface_emission": (p.surface_emission, [lin(250, 330), lin(0.9, 1.0)], {}),
    "brutsaert_1975": (p.brutsaert_1975, [lin(250, 310), lin(0.1, 4)], {}),
    "swinbank_1963": (p.swinbank_1963, [lin(250, 310)], {}),
    "idso_jackson_1969": (p.idso_jackson_1969, [lin(250, 310)], {}),
    "idso_1981": (p.idso_1981, [lin(250, 310), lin(0.1, 5)], {}),
    "satterlund_1979": (p.satterlund_1979, [lin(250, 310), lin(0.1, 4)], {}),
    "prata_1996": (p.prata_1996, [lin(250, 310), lin(0.1, 4)], {}),
    "sky_emissivity": (p.sky_emissivity, [lin(250, 310), lin(0.1, 4)], {"model": "prata"}),
    "crawford_duchon_1999": (
        p.crawford_duchon_1999,
        [lin(0.6, 0.9), lin(0, 900), lin(-10, 1000)],
        {},
    ),
    "crawford_duchon_1999 (sun elevation)": (
        lambda eps, rs, rso, elevation, **kw: p.crawford_duchon_1999(
            eps, rs, rso, sun_elevation=elevation, **kw
        ),
        [lin(0.6, 0.9), lin(0, 900), lin(-10, 1000), lin(-20, 40)],
        {"min_sun_elevation": 12.0},
    ),
    "low_sun": (p.low_sun, [lin(-20, 40)], {"min_sun_elevation": 5.0}),
    "longwave_down": (p.longwave_down, [lin(0.6, 1.0), lin(250, 310)], {}),
    "net_longwave": (p.net_longwave, [lin(0.9, 1.0), lin(260, 330), lin(200, 450)], {}),
    "net_radiation_instant": (p.net_radiation_instant, [lin(0, 800), lin(-20, 150)], {}),
    "saturation_vapour_pressure": (p.saturation_vapour_pressure, [lin(233, 323)], {}),
    "vapour_pressure_from_dewpoint": (p.vapour_pressure_from_dewpoint, [lin(233, 303)], {}),
    "vapour_pressure_from_relative_humidity": (
        p.vapour_pressure_from_relative_humidity,
        [lin(5, 100), lin(250, 320)],
        {},
    ),
    "mean_saturation_vapour_pressure": (
        p.mean_saturation_vapour_pressure,
        [lin(280, 320), lin(260, 300)],
        {},
    ),
    "fao56_net_longwave_daily": (
        p.fao56_net_longwave_daily,
        [lin(280, 320), lin(260, 300), lin(0.2, 3), lin(0, 30), lin(0, 32)],
        {},
    ),
    "fao56_net_longwave_hourly": (
        p.fao56_net_longwave_hourly,
        [lin(280, 320), lin(0.2, 3), lin(0, 3), lin(-1, 3.5), lin(0.3, 0.8)],
        {},
    ),
    "parton_logan_1981": (
        lambda tx, tn, hour, rise, set_, tn_next, **kw: p.parton_logan_1981(
            tx, tn, hour, rise, set_, tmin_next=tn_next, **kw
        ),
        [lin(290, 310), lin(270, 290), lin(-3, 30), lin(4, 7), lin(17, 21), lin(272, 288)],
        {"a": 1.5},
    ),
    "fao56_net_radiation_daily": (
        p.fao56_net_radiation_daily,
        [lin(0, 30), lin(280, 320), lin(260, 300), lin(0.2, 3), lin(-60, 60), ints(1, 366)],
        {"elevation": 500.0, "albedo": 0.2},
    ),
    "sinusoidal_daily_bisht_2005": (
        p.sinusoidal_daily_bisht_2005,
        [lin(-50, 700), lin(1, 23), lin(5, 7), lin(17, 20)],
        {},
    ),
    "shortwave_ratio_daily_jackson_1983": (
        p.shortwave_ratio_daily_jackson_1983,
        [lin(-50, 700), lin(0, 900), lin(5, 30)],
        {},
    ),
    "sobrino_2004_ndvi": (p.sobrino_2004_ndvi, [lin(-0.2, 0.9)], {}),
    "emissivity_from_classes": (
        lambda classes: p.emissivity_from_classes(classes, p.build_lookup({10: 0.95, 40: 0.985})),
        [np.array([[10, 40, 11], [255, 0, 10]])],
        {},
    ),
    "net_radiation": (
        radledger.net_radiation,
        [lin(0.1, 0.3), lin(0, 900), lin(280, 320), lin(275, 305), lin(0.5, 3), lin(0.95, 0.99)],
        {"sky_emissivity": "idso", "clouds": "crawford-duchon", "clear_sky_shortwave": 950.0},
    ),
    "daily_net_radiation": (
        lambda rs, tx, tn, ea, lat, j: radledger.daily_net_radiation(
            rs, tx, tn, ea, latitude=lat, day_of_year=j, elevation=100.0
        ),
        [lin(0, 30), lin(280, 320), lin(260, 300), lin(0.2, 3), lin(-60, 60), ints(1, 366)],
        {},
    ),
}


def test_every_public_array_function_is_covered():
    not_arrays = {
        "day_of_year", "build_lookup", "missing_classes", "BEAM_DIFFUSE_COEFFICIENTS",
        "SKY_EMISSIVITY_MODELS", "CLOUD_MODELS", "fao56_net_radiation_components_daily",
        "sun_distance",   # one instant in, one number out
    }
    constants = {name for name in p.__all__ if name.isupper()}
    assert set(p.__all__) - not_arrays - constants <= {name.split(" ")[0] for name in CASES}


def _parts(result):
    return result if isinstance(result, tuple) else (result,)


def _numpy_reference(name):
    func, arrays, kwargs = CASES[name]
    with np.errstate(all="ignore"):
        return _parts(func(*arrays, **kwargs))


@pytest.mark.parametrize("name", sorted(CASES))
def test_float_inputs_give_floats(name):
    func, arrays, kwargs = CASES[name]
    reference = _numpy_reference(name)
    for i in range(N):
        scalars = [a.flat[i].item() for a in arrays]  # Python int / float
        with np.errstate(all="ignore"):
            got = _parts(func(*scalars, **kwargs))
        for part, ref in zip(got, reference):
            kind = (bool, np.bool_) if name in MASKS else float
            assert isinstance(part, kind), type(part)
            np.testing.assert_allclose(part, ref.flat[i], rtol=1e-6, equal_nan=True)


@pytest.mark.parametrize("name", sorted(CASES))
def test_numpy_inputs_give_numpy(name):
    for part in _numpy_reference(name):
        assert type(part) is np.ndarray and part.shape == SHAPE


@pytest.mark.parametrize("name", sorted(CASES))
def test_dask_inputs_stay_lazy_and_agree(name, no_compute):
    func, arrays, kwargs = CASES[name]
    lazy_inputs = [da.from_array(a, chunks=(1, 2)) for a in arrays]
    with np.errstate(all="ignore"):
        got = _parts(func(*lazy_inputs, **kwargs))  # no_compute: any compute raises here
    assert all(isinstance(part, da.Array) for part in got)
    with dask.config.set(scheduler="sync"), np.errstate(all="ignore"):
        computed = dask.compute(*got)
    for part, ref in zip(computed, _numpy_reference(name)):
        np.testing.assert_allclose(part, ref, rtol=1e-6, equal_nan=True)


@pytest.mark.parametrize("backend", ["numpy", "dask"])
@pytest.mark.parametrize("name", sorted(CASES))
def test_xarray_inputs_give_xarray(name, backend, no_compute):
    func, arrays, kwargs = CASES[name]
    coords = {"y": [0.5, 1.5], "x": [10.0, 20.0, 30.0]}
    data = [xr.DataArray(a, dims=("y", "x"), coords=coords) for a in arrays]
    if backend == "dask":
        data = [d.chunk({"y": 1, "x": 2}) for d in data]
    with np.errstate(all="ignore"):
        got = _parts(func(*data, **kwargs))
    for part, ref in zip(got, _numpy_reference(name)):
        assert isinstance(part, xr.DataArray)
        assert part.dims == ("y", "x")
        np.testing.assert_array_equal(part["x"], coords["x"])
        if backend == "dask":
            assert isinstance(part.data, da.Array)
        with dask.config.set(scheduler="sync"), np.errstate(all="ignore"):
            values = part.compute().data
        np.testing.assert_allclose(values, ref, rtol=1e-6, equal_nan=True)


def test_mixed_xarray_and_numpy_broadcast_to_xarray():
    ta = xr.DataArray(lin(280, 300), dims=("y", "x"))
    ea = 1.5  # a constant
    eps = p.crawford_duchon_1999(p.brutsaert_1975(ta, ea), np.full(SHAPE, 400.0), 800.0)
    assert isinstance(eps, xr.DataArray) and eps.shape == SHAPE
