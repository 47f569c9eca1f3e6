"""Elevation-aware gridding of station values.

The fixture is invented: a synthetic mountain DEM (200 x 200 pixels at 100 m,
relief about 2000 m) and a known air-temperature field made of the
standard-atmosphere lapse rate, -6.5 K/km (ICAO standard atmosphere; common
practice), plus a smooth horizontal anomaly.  35 stations sample the field;
the gridded result is compared with the known field at every pixel.

Tolerances for the spline and IDW (0.5 K and 0.8 K RMSE) are the project's
acceptance targets; the kriging bound (0.5 K) is a test design choice.
"""

from __future__ import annotations

import importlib.util
import pickle

import numpy as np
import pytest

from radledger.errors import InputError
from radledger.stations import MIN_STATIONS, fit_field, leave_one_out

# PyKrige is a runtime dependency still to be listed in pyproject.toml; until
# then a fresh install may lack it, and the kriging cases are skipped.
KRIGING = pytest.param(
    "kriging",
    marks=pytest.mark.skipif(importlib.util.find_spec("pykrige") is None,
                             reason="pykrige is not installed"),
)
METHODS = ["spline", "idw", KRIGING]

LAPSE = -6.5e-3  # K m-1, ICAO standard atmosphere (common practice)
T0 = 288.15  # K, ICAO standard-atmosphere sea-level temperature (common practice)


def _mountain(n=200, dx=100.0):
    """Invented DEM and known temperature field on a UTM-like grid."""
    x = 500_000.0 + (np.arange(n) + 0.5) * dx
    y = 5_200_000.0 - (np.arange(n) + 0.5) * dx
    X, Y = np.meshgrid(x, y)
    u = (X - X.min()) / (X.max() - X.min())
    w = (Y - Y.min()) / (Y.max() - Y.min())
    Z = (
        400.0
        + 1750.0 * np.exp(-((u - 0.55) ** 2 + (w - 0.45) ** 2) / 0.06)  # massif
        + 350.0 * np.sin(2 * np.pi * 3 * u) * np.cos(2 * np.pi * 2.5 * w)  # ridges
        + 300.0 * np.exp(-((u - 0.15) ** 2 + (w - 0.8) ** 2) / 0.01)  # a second peak
    )
    anomaly = 1.5 * np.sin(2 * np.pi * u / 1.5 + 0.3) * np.cos(2 * np.pi * w / 2.0) + 0.8 * u
    T = T0 + LAPSE * Z + anomaly
    rng = np.random.default_rng(7)
    i = rng.choice(np.arange(5, n - 5), 35, replace=False)
    j = rng.choice(np.arange(5, n - 5), 35, replace=False)
    stations = (X[i, j], Y[i, j], Z[i, j], T[i, j])
    return X, Y, Z, T, stations


MOUNTAIN = _mountain()


def _rmse(a, b):
    return float(np.sqrt(np.mean((a - b) ** 2)))


def test_fixture_is_a_mountain():
    Z = MOUNTAIN[2]
    assert 1900.0 < Z.max() - Z.min() < 2200.0


@pytest.mark.parametrize("method, bound", [("spline", 0.5), ("idw", 0.8),
                                           pytest.param("kriging", 0.5, marks=KRIGING.marks)])
def test_recovers_lapse_rate_field_and_beats_no_trend(method, bound):
    X, Y, Z, T, (sx, sy, sz, sv) = MOUNTAIN
    with_trend = _rmse(fit_field(sx, sy, sz, sv, method).predict(X, Y, Z), T)
    no_trend = _rmse(fit_field(sx, sy, sz, sv, method, trend="none").predict(X, Y, Z), T)
    xy_only = _rmse(fit_field(sx, sy, sz, sv, method, trend="xy").predict(X, Y, Z), T)
    numbers = (f"{method}: RMSE {with_trend:.3f} K with the elevation trend, "
               f"{no_trend:.3f} K without any trend, {xy_only:.3f} K with an x/y trend only")
    print(numbers)
    assert with_trend < bound, numbers
    # "far better": at least three times smaller error (test design choice)
    assert 3.0 * with_trend < no_trend, numbers
    assert 3.0 * with_trend < xy_only, numbers


@pytest.mark.parametrize("method", METHODS)
def test_lapse_rate_is_recovered_from_a_linear_field_exactly(method):
    # A field that is exactly linear in elevation and position is reproduced by
    # least squares (closed form), whatever the residual method.
    X, Y, Z, _, (sx, sy, sz, _) = MOUNTAIN
    bx, by = 2.0e-5, -3.0e-5  # K m-1, invented horizontal gradients

    def truth(x, y, z):
        return T0 + LAPSE * z + bx * (x - 500_000.0) + by * (y - 5_200_000.0)

    field = fit_field(sx, sy, sz, truth(sx, sy, sz), method)
    assert field.trend.terms == ("z", "x", "y")
    assert field.trend.b_z == pytest.approx(LAPSE, rel=1e-9)
    assert field.trend.b_x == pytest.approx(bx, rel=1e-8)
    assert field.trend.b_y == pytest.approx(by, rel=1e-8)
    b0 = T0 - bx * 500_000.0 - by * 5_200_000.0
    assert field.trend.b0 == pytest.approx(b0, rel=1e-9)
    np.testing.assert_allclose(field.predict(X, Y, Z), truth(X, Y, Z), rtol=0, atol=1e-8)


@pytest.mark.parametrize("method", METHODS)
def test_exact_at_the_stations(method):
    # Thin-plate spline without smoothing, Shepard's IDW and kriging with
    # exact values are exact interpolators (Wahba 1990; Shepard 1968; Cressie 1993).
    _, _, _, _, (sx, sy, sz, sv) = MOUNTAIN
    field = fit_field(sx, sy, sz, sv, method)
    np.testing.assert_allclose(field.predict(sx, sy, sz), sv, rtol=0, atol=1e-6)


def test_idw_weights_are_inverse_squared_distance():
    # Shepard (1968) with power 2, closed form by hand: stations 1 m and 2 m
    # away get weights 1 and 1/4.
    x, y = np.array([0.0, 3.0]), np.array([0.0, 0.0])
    z, v = np.zeros(2), np.array([10.0, 20.0])
    field = fit_field(x, y, z, v, "idw", trend="none")
    assert field.predict(1.0, 0.0, 0.0) == pytest.approx((10.0 + 20.0 / 4) / 1.25, rel=1e-12)
    assert field.predict(1.5, 0.0, 0.0) == pytest.approx(15.0, rel=1e-12)  # midpoint: mean


@pytest.mark.parametrize("method", METHODS)
def test_chunked_and_pickled_prediction_equals_whole_grid(method, monkeypatch):
    X, Y, Z, _, (sx, sy, sz, sv) = MOUNTAIN
    X, Y, Z = X[:40, :60], Y[:40, :60], Z[:40, :60]
    field = fit_field(sx, sy, sz, sv, method, label="2023-07-14 air_temperature")
    whole = field.predict(X, Y, Z)
    clone = pickle.loads(pickle.dumps(field))
    chunks = np.concatenate([clone.predict(X[k:k + 10], Y[k:k + 10], Z[k:k + 10])
                             for k in range(0, 40, 10)])
    np.testing.assert_allclose(chunks, whole, rtol=0, atol=1e-9)
    flat = field.predict(X.ravel(), Y.ravel(), Z.ravel())
    np.testing.assert_allclose(flat, whole.ravel(), rtol=0, atol=1e-9)
    # the bounded-memory evaluation in small blocks gives the same values
    monkeypatch.setattr("radledger.stations.gridding._BLOCK_CELLS", 7 * sv.size)
    np.testing.assert_allclose(field.predict(X, Y, Z), whole, rtol=0, atol=1e-9)


def test_nan_dem_pixels_give_nan():
    _, _, _, _, (sx, sy, sz, sv) = MOUNTAIN
    field = fit_field(sx, sy, sz, sv, "spline")
    out = field.predict([sx[0], sx[1]], [sy[0], sy[1]], [np.nan, sz[1]])
    assert np.isnan(out[0]) and np.isfinite(out[1])


@pytest.mark.parametrize("method", METHODS)
def test_nan_stations_are_dropped_for_that_date_only(method):
    X, Y, Z, _, (sx, sy, sz, sv) = MOUNTAIN
    missing = np.array([2, 9, 20])
    v = sv.copy()
    v[missing] = np.nan
    keep = np.setdiff1d(np.arange(sv.size), missing)
    with_nan = fit_field(sx, sy, sz, v, method)
    subset = fit_field(sx[keep], sy[keep], sz[keep], sv[keep], method)
    np.testing.assert_array_equal(with_nan.station_index, keep)
    np.testing.assert_allclose(with_nan.predict(X[::20, ::20], Y[::20, ::20], Z[::20, ::20]),
                               subset.predict(X[::20, ::20], Y[::20, ::20], Z[::20, ::20]),
                               rtol=0, atol=1e-9)


@pytest.mark.parametrize("method", METHODS)
def test_too_few_stations_raise_input_error_naming_the_label(method):
    _, _, _, _, (sx, sy, sz, sv) = MOUNTAIN
    need = MIN_STATIONS[method]
    v = np.full(sv.size, np.nan)
    v[: need - 1] = sv[: need - 1]  # one station short once the NaNs are dropped
    label = "2023-07-14 air_temperature"
    with pytest.raises(InputError, match=label) as info:
        fit_field(sx, sy, sz, v, method, label=label)
    assert "\n" not in str(info.value)
    v[need - 1] = sv[need - 1]
    fit_field(sx, sy, sz, v, method, label=label)  # exactly enough: fits
    with pytest.raises(InputError, match=label):
        leave_one_out(sx, sy, sz, v, method, label=label)


def test_trend_falls_back_with_few_or_degenerate_stations():
    _, _, _, _, (sx, sy, sz, sv) = MOUNTAIN
    assert fit_field(sx[:5], sy[:5], sz[:5], sv[:5], "idw").trend.terms == ("z", "x", "y")
    assert fit_field(sx[:4], sy[:4], sz[:4], sv[:4], "idw").trend.terms == ("z",)
    assert fit_field(sx[:2], sy[:2], sz[:2], sv[:2], "idw").trend.terms == ()
    flat = np.full(6, 1200.0)  # all stations at one elevation: no lapse rate
    assert fit_field(sx[:6], sy[:6], flat, sv[:6], "idw").trend.terms == ("x", "y")


def test_collinear_and_coincident_stations_raise_input_error():
    x = np.array([0.0, 1000.0, 2000.0, 3000.0])
    z = np.array([100.0, 300.0, 200.0, 400.0])
    v = np.array([1.0, 3.0, 2.0, 5.0])
    # all stations on one line: no plane through them for the spline
    with pytest.raises(InputError, match="day 3 rh"):
        fit_field(x, np.zeros(4), z, v, "spline", label="day 3 rh", trend="none")
    # two stations at one location
    with pytest.raises(InputError, match="day 3 rh"):
        fit_field([0.0, 0.0, 10.0], [0.0, 0.0, 10.0], [1.0, 2.0, 3.0], [1.0, 2.0, 3.0], "idw",
                  label="day 3 rh")


def test_station_without_elevation_or_with_infinite_value_raises_input_error():
    x, y = [0.0, 500.0, 900.0], [0.0, 800.0, 100.0]
    with pytest.raises(InputError, match=r"day 3 rh: .*position \[1\]"):
        fit_field(x, y, [10.0, np.nan, 30.0], [1.0, 2.0, 3.0], "idw", label="day 3 rh")
    # a station without elevation but also without a value that date is fine
    fit_field(x, y, [10.0, np.nan, 30.0], [1.0, np.nan, 3.0], "idw", label="day 3 rh")
    with pytest.raises(InputError, match="day 3 rh: .*infinite"):
        fit_field(x, y, [10.0, 20.0, 30.0], [1.0, np.inf, 3.0], "idw", label="day 3 rh")


@pytest.mark.parametrize("method", METHODS)
def test_leave_one_out_matches_a_refit_loop(method):
    _, _, _, _, (sx, sy, sz, sv) = MOUNTAIN
    v = sv.copy()
    v[4] = np.nan
    cv = leave_one_out(sx, sy, sz, v, method)
    expected = np.full(v.size, np.nan)
    for k in range(v.size):
        if np.isnan(v[k]):
            continue
        others = np.flatnonzero(~np.isnan(v) & (np.arange(v.size) != k))
        field = fit_field(sx[others], sy[others], sz[others], v[others], method)
        expected[k] = field.predict(sx[k], sy[k], sz[k])
    np.testing.assert_allclose(cv.predicted, expected, rtol=0, atol=1e-9, equal_nan=True)
    resid = expected - v
    ok = ~np.isnan(resid)
    assert cv.n == ok.sum() == v.size - 1
    # bias and RMSE against numpy
    assert cv.bias == pytest.approx(np.mean(resid[ok]), rel=1e-9)
    assert cv.rmse == pytest.approx(np.sqrt(np.mean(resid[ok] ** 2)), rel=1e-9)
    np.testing.assert_allclose(cv.residuals, resid, rtol=0, atol=1e-9, equal_nan=True)
