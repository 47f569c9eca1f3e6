"""Terrain physics against closed-form geometry, pvlib and FAO-56 / ASCE-EWRI.

* Horn (1981) slope and aspect on planes z = a x + b y, whose slope is
  atan(hypot(a, b)) and whose downslope direction is -grad z (geometry);
* incidence angle, Erbs et al. (1982) split and the isotropic tilted-surface
  model against pvlib (``aoi_projection``, ``erbs``, ``get_total_irradiance``)
  with pvlib's SPA sun positions;
* daily clear-sky shortwave on slopes against an independent 1-minute
  trapezoid of FAO-56 Annex 3 eqs. 3-15, 3-17, 3-18, 3-20 (text of the paper)
  with FAO-56 eqs. 23-25 for the sun, against FAO-56 eq. 21 in the
  no-atmosphere limit, and the equivalent-slope (tilted latitude) rule.

Tolerances are test design choices, stated beside each check.
"""

from __future__ import annotations

import math

import dask.array as da
import numpy as np
import pandas as pd
import pytest
import xarray as xr

from radledger.physics import daily_terrain as dt
from radledger.physics import terrain as tr

pvlib = pytest.importorskip("pvlib")

SIGMA = 5.670374419e-8  # W m-2 K-4, CODATA 2018 (exact in the 2019 SI)


# --- Horn (1981) slope and aspect -------------------------------------------------------


def plane(a, b, dx, dy, shape=(7, 9), z0=1234.5):
    """z = z0 + a x + b y on a north-up grid: x east = col dx, y north = -row dy."""
    rows, cols = np.mgrid[0 : shape[0], 0 : shape[1]]
    return z0 + a * (cols * dx) + b * (-rows * dy)


@pytest.mark.parametrize(
    "a, b, dx, dy",
    [
        (0.0, 0.5, 30.0, 30.0),  # falls to the south
        (-0.2, 0.0, 10.0, 10.0),  # falls to the east
        (0.3, -0.4, 25.0, 30.0),  # falls to the west and north
        (-0.7, -0.1, 90.0, 60.0),
        (1e-3, 2e-3, 5.0, 5.0),  # gentle: 0.13 deg
    ],
)
def test_horn_slope_aspect_of_tilted_planes(a, b, dx, dy):
    slope, aspect = tr.horn_1981_slope_aspect(plane(a, b, dx, dy), dx, dy)
    # Geometry: the plane's slope is atan(|grad z|); the aspect is the azimuth
    # of -grad z = (-a east, -b north), clockwise from north.
    expected_slope = math.degrees(math.atan(math.hypot(a, b)))
    expected_aspect = math.degrees(math.atan2(-a, -b)) % 360.0
    np.testing.assert_allclose(slope[1:-1, 1:-1], expected_slope, rtol=0, atol=1e-9)
    diff = (aspect[1:-1, 1:-1] - expected_aspect + 180.0) % 360.0 - 180.0
    np.testing.assert_allclose(diff, 0.0, atol=1e-9)
    # The border lacks neighbours.
    assert np.isnan(slope[0]).all() and np.isnan(slope[:, -1]).all()


def test_horn_named_directions():
    _, aspect = tr.horn_1981_slope_aspect(plane(0.0, 0.5, 30.0, 30.0), 30.0, 30.0)
    assert aspect[3, 4] == pytest.approx(180.0, abs=1e-12)  # lower to the south: faces south
    _, aspect = tr.horn_1981_slope_aspect(plane(-0.5, 0.0, 30.0, 30.0), 30.0, 30.0)
    assert aspect[3, 4] == pytest.approx(90.0, abs=1e-12)  # lower to the east: faces east


def test_horn_flat_ground_has_zero_slope_and_no_aspect():
    slope, aspect = tr.horn_1981_slope_aspect(np.full((5, 6), 812.0, dtype=np.float32), 30, 30)
    assert (slope[1:-1, 1:-1] == 0.0).all()
    assert np.isnan(aspect).all()


# --- incidence, Erbs split, isotropic tilted surface against pvlib ------------------------


def test_cos_incidence_matches_pvlib_aoi_projection():
    rng = np.random.default_rng(11)
    slope = rng.uniform(0, 80, 200)
    aspect = rng.uniform(0, 360, 200)
    zenith = rng.uniform(0, 120, 200)
    azimuth = rng.uniform(0, 360, 200)
    expected = pvlib.irradiance.aoi_projection(slope, aspect, zenith, azimuth)
    np.testing.assert_allclose(tr.cos_incidence(slope, aspect, zenith, azimuth), expected, atol=1e-12)
    # Flat ground: the aspect is undefined (NaN) and cos(theta) = cos(zenith).
    got = tr.cos_incidence(0.0, np.nan, zenith, azimuth)
    np.testing.assert_allclose(got, np.cos(np.radians(zenith)), atol=1e-15)


def test_erbs_matches_pvlib():
    ghi = np.linspace(-10.0, 1300.0, 41)
    zenith = np.linspace(0.0, 95.0, 39)
    doy = np.array([1, 80, 172, 266, 355])
    g, z, j = (a.ravel() for a in np.meshgrid(ghi, zenith, doy, indexing="ij"))
    extra = pvlib.irradiance.get_extra_radiation(j)
    expected = pvlib.irradiance.erbs(g, z, j)  # min_cos_zenith=0.065, max_zenith=87
    dni, dhi = tr.erbs_1982(g, z, extra)
    np.testing.assert_allclose(dni, expected["dni"], rtol=1e-6, atol=1e-9)
    np.testing.assert_allclose(dhi, expected["dhi"], rtol=1e-6, atol=1e-9)


@pytest.fixture(scope="module")
def spa_day():
    """Hourly sun positions (pvlib SPA, nrel_numpy) and a clear-sky GHI split by pvlib."""
    times = pd.date_range("2024-06-21 04:00", "2024-06-21 20:00", freq="1h", tz="Etc/GMT-1")
    times = times.append(
        pd.date_range("2024-12-21 08:30", "2024-12-21 16:30", freq="1h", tz="Etc/GMT-1")
    )
    sun = pvlib.solarposition.get_solarposition(times, 46.5, 8.0, method="nrel_numpy")
    zenith = sun["zenith"].to_numpy()
    azimuth = sun["azimuth"].to_numpy()
    ghi = pvlib.clearsky.haurwitz(sun["apparent_zenith"])["ghi"].to_numpy()
    split = pvlib.irradiance.erbs(ghi, zenith, times.day_of_year)
    return zenith, azimuth, ghi, np.asarray(split["dni"]), np.asarray(split["dhi"])


@pytest.mark.parametrize("slope", [0.0, 10.0, 30.0, 45.0])
@pytest.mark.parametrize("aspect", [0.0, 90.0, 180.0, 270.0])
def test_isotropic_tilted_plane_matches_pvlib(spa_day, slope, aspect):
    zenith, azimuth, ghi, dni, dhi = spa_day
    albedo = 0.25
    expected = pvlib.irradiance.get_total_irradiance(
        slope, aspect, zenith, azimuth, dni, ghi, dhi, albedo=albedo, model="isotropic"
    )["poa_global"]
    got = tr.incident_shortwave_isotropic(
        dni, dhi, ghi, tr.cos_incidence(slope, aspect, zenith, azimuth),
        tr.sky_view_factor_plane(slope), albedo,
    )
    # 0.1 % of the value, or 0.01 W m-2 near zero.
    np.testing.assert_allclose(got, np.asarray(expected), rtol=1e-3, atol=1e-2)


# --- longwave and snow -------------------------------------------------------------------


def test_terrain_longwave_reduces_to_sky_on_open_flat_ground():
    sky = np.array([250.0, 310.0, 400.0])
    # V = 1: only the sky is seen, the plain (flat-ground) form L_down = L_sky.
    np.testing.assert_array_equal(tr.longwave_down_terrain(sky, 1.0, 270.0, 0.97), sky)


def test_terrain_longwave_isothermal_black_enclosure():
    # Kirchhoff / thermal equilibrium: a black sky and black terrain at the same
    # temperature give sigma T^4 whatever the split between them.
    t = 283.0
    svf = np.linspace(0.0, 1.0, 11)
    got = tr.longwave_down_terrain(SIGMA * t**4, svf, t, 1.0)
    np.testing.assert_allclose(got, SIGMA * t**4, rtol=1e-12)


def test_snow_blend_and_ndsi_threshold_definitions():
    # Invented fixture values; the rule is the area-weighted mean.
    got = tr.snow_emissivity_blend(np.array([0.95, 0.95, 0.95]), np.array([0.0, 1.0, 0.25]))
    np.testing.assert_allclose(got, [0.95, 0.99, 0.96], rtol=1e-12)  # 0.99: common practice
    # Hall et al. (1995): snow where NDSI >= 0.4.
    ndsi = np.array([-0.3, 0.39, 0.4, 0.85, np.nan])
    np.testing.assert_array_equal(tr.snow_fraction_from_ndsi(ndsi), [0.0, 0.0, 1.0, 1.0, np.nan])


@pytest.mark.parametrize(
    "func, args",
    [
        (tr.cos_incidence, (20.0, 135.0, 40.0, 160.0)),
        (tr.erbs_1982, (600.0, 40.0, 1360.0)),
        (tr.sky_view_factor_plane, (25.0,)),
        (tr.incident_shortwave_isotropic, (700.0, 120.0, 650.0, 0.8, 0.9, 0.2)),
        (tr.longwave_down_terrain, (300.0, 0.8, 280.0, 0.97)),
        (tr.snow_emissivity_blend, (0.96, 0.3)),
        (tr.snow_fraction_from_ndsi, (0.55,)),
    ],
)
def test_pixel_functions_keep_the_array_kind(func, args):
    floats = func(*args)
    parts = floats if isinstance(floats, tuple) else (floats,)
    assert all(isinstance(p, float) for p in parts)
    lazy = func(*(da.full((2, 2), a, chunks=1) for a in args))
    for part, ref in zip(lazy if isinstance(lazy, tuple) else (lazy,), parts):
        assert isinstance(part, da.Array)
        np.testing.assert_allclose(part.compute(), ref, rtol=1e-12)
    labelled = func(*(xr.DataArray(np.full(3, a), dims="x") for a in args))
    for part in labelled if isinstance(labelled, tuple) else (labelled,):
        assert isinstance(part, xr.DataArray)


# --- daily clear-sky shortwave on slopes ---------------------------------------------------

GSC = 0.0820  # MJ m-2 min-1, FAO-56 eq. 21


def fao56_sun(day):
    """FAO-56 eq. 24 (declination) and eq. 23 (inverse relative distance)."""
    delta = 0.409 * math.sin(2 * math.pi * day / 365 - 1.39)
    dr = 1 + 0.033 * math.cos(2 * math.pi * day / 365)
    return delta, dr


def reference_daily(lat, day, slope, aspect, pressure, water, svf, albedo, horizon=None):
    """1-minute trapezoid of FAO-56 Annex 3 eqs. 3-15, 3-18, 3-20 (FAO coefficients).

    The sun's azimuth from cos(az) = (sin(beta) sin(phi) - sin(delta)) /
    (cos(beta) cos(phi)), measured from south, sign of the hour angle
    (Duffie & Beckman 2013, eq. 1.6.6, from memory), converted to clockwise
    from north; incidence from pvlib's aoi_projection.  ``horizon``: a
    constant horizon elevation in every direction [deg].
    """
    phi = math.radians(lat)
    delta, dr = fao56_sun(day)
    omega_s = math.acos(-math.tan(phi) * math.tan(delta))  # FAO-56 eq. 25
    n = math.ceil(2 * omega_s / math.radians(0.25))  # 0.25 deg of hour angle = 1 minute
    omega = np.linspace(-omega_s, omega_s, n + 1)
    sin_b = np.sin(phi) * np.sin(delta) + np.cos(phi) * np.cos(delta) * np.cos(omega)  # 3-15
    up = sin_b > 0
    sb = np.where(up, sin_b, 1.0)
    kb = 0.98 * np.exp(-0.00146 * pressure / sb - 0.091 * (water / sb) ** 0.25)  # 3-18, K_t = 1
    kd = np.where(kb >= 0.15, 0.35 - 0.33 * kb, 0.18 + 0.82 * kb)  # 3-20
    kb, kd = np.where(up, kb, 0.0), np.where(up, kd, 0.0)
    beta = np.arcsin(np.clip(sin_b, -1, 1))
    cos_az_south = (np.sin(beta) * np.sin(phi) - np.sin(delta)) / (np.cos(beta) * np.cos(phi))
    az_south = np.sign(omega) * np.arccos(np.clip(cos_az_south, -1, 1))
    zenith = 90 - np.degrees(beta)
    cos_i = pvlib.irradiance.aoi_projection(slope, aspect, zenith, np.degrees(az_south) + 180.0)
    lit = np.ones_like(omega) if horizon is None else (np.degrees(beta) > horizon)
    minutes = omega * 1440 / (2 * math.pi)
    flat = GSC * dr * (kb + kd) * np.where(up, sin_b, 0.0)
    beam_slope = GSC * dr * kb * np.maximum(cos_i, 0) * lit
    diff_flat = GSC * dr * kd * np.where(up, sin_b, 0.0)
    on_flat = np.trapezoid(flat, minutes)
    on_slope = np.trapezoid(beam_slope + svf * diff_flat, minutes) + albedo * (1 - svf) * on_flat
    return on_slope, on_flat


# (latitude, day, slope, aspect, pressure kPa, W mm, V, albedo, constant horizon deg)
DAILY_PIXELS = [
    (45.0, 355, 30.0, 180.0, 95.0, 8.0, 0.93, 0.2, None),
    (45.0, 355, 30.0, 0.0, 95.0, 8.0, 0.93, 0.2, None),
    (-30.0, 172, 20.0, 45.0, 100.0, 20.0, 0.97, 0.15, None),
    (60.0, 172, 35.0, 270.0, 80.0, 10.0, 0.9, 0.3, None),
    (10.0, 80, 15.0, 135.0, 90.0, 35.0, 0.8, 0.3, None),
    (47.0, 120, 25.0, 200.0, 85.0, 12.0, 0.85, 0.25, 15.0),
]


def test_daily_slope_flat_against_independent_trapezoid():
    for lat, day, s, a, pres, w, v, alb, hor in DAILY_PIXELS:
        horizons = None if hor is None else np.full((8, 1), hor)
        got_slope, got_flat = dt.clear_sky_daily_slope_flat(
            np.array([lat]), day, np.array([s]), np.array([a]), pres, w, v, alb,
            horizons, None if hor is None else np.arange(0, 360, 45.0),
            coefficients="fao56",
        )
        ref_slope, ref_flat = reference_daily(lat, day, s, a, pres, w, v, alb, hor)
        # 0.5 %: two quadratures (5-minute midpoint vs 1-minute trapezoid).
        assert got_flat[0] == pytest.approx(ref_flat, rel=5e-3)
        assert got_slope[0] == pytest.approx(ref_slope, rel=5e-3)


def test_daily_flat_without_atmosphere_is_fao56_eq_21():
    # P = 0, W = 0 in eq. 3-18 gives K_B = 0.98 and, by eq. 3-20 (FAO
    # coefficients), K_D = 0.35 - 0.33 * 0.98; so the day's total is
    # (K_B + K_D) R_a with R_a from FAO-56 eq. 21.
    for lat, day in [(45.0, 355), (-20.0, 30), (0.0, 172), (60.0, 172)]:
        phi = math.radians(lat)
        delta, dr = fao56_sun(day)
        ws = math.acos(-math.tan(phi) * math.tan(delta))
        ra = 24 * 60 / math.pi * GSC * dr * (
            ws * math.sin(phi) * math.sin(delta) + math.cos(phi) * math.cos(delta) * math.sin(ws)
        )
        _, flat = dt.clear_sky_daily_slope_flat(lat, day, 0.0, np.nan, 0.0, 0.0,
                                                coefficients="fao56")
        assert flat == pytest.approx((0.98 + 0.35 - 0.33 * 0.98) * ra, rel=1e-4)


def test_december_45n_south_slope_doubles_north_slope_quarters():
    ratio = dt.clear_sky_slope_ratio_daily(
        45.0, 355, np.array([30.0, 0.0, 30.0, 30.0, 30.0]),
        np.array([180.0, np.nan, 0.0, 90.0, 270.0]), 95.0, 8.0,
    )
    south, flat, north, east, west = ratio
    # Literature values (from memory): about 2 for a 30 deg south slope and
    # about 0.25 for a north slope at 45 N in December.
    assert south > 1.5 and south < 2.5
    assert flat == 1.0
    assert north < 0.5 and north > 0.1
    # The solar day is symmetric about noon: east and west slopes agree.
    assert east == pytest.approx(west, rel=1e-9)


def test_flat_ground_ratio_is_exactly_one():
    ratio = dt.clear_sky_slope_ratio_daily(
        np.array([[-50.0, -10.0], [30.0, 66.0]]), 200, 0.0, np.nan,
        np.array([[101.0, 90.0], [75.0, 60.0]]), 14.0, 1.0, 0.3,
    )
    assert (ratio == 1.0).all()


@pytest.mark.parametrize(
    "lat, day, s, aspect",
    [
        (45.0, 172, 25.0, 180.0),  # NH summer: the plane's own horizon sets the day
        (45.0, 355, 25.0, 180.0),  # NH winter: the horizontal horizon sets it
        (-40.0, 355, 20.0, 0.0),  # SH summer, slope facing the equator (north)
    ],
)
def test_equator_facing_slope_is_flat_ground_at_shifted_latitude(lat, day, s, aspect):
    # A plane tilted by s toward the equator at latitude phi is parallel to
    # flat ground at latitude phi -+ s (Duffie & Beckman 2013, section 2.19,
    # from memory).  It sees the sun while it is above both its own plane and
    # the local horizontal, i.e. |omega| <= min(omega_s(phi), omega_s(phi')):
    # whenever omega_s(phi') <= omega_s(phi) (summer half-year) the day's
    # beam equals eq. 21 at phi'; otherwise eq. 21's integral is cut at
    # omega_s(phi).  Without atmosphere (P = W = 0) K_B = 0.98; V = 0 and no
    # albedo leave the beam alone.
    equivalent = lat - s if lat > 0 else lat + s
    delta, dr = fao56_sun(day)
    phi, phi_eq = math.radians(lat), math.radians(equivalent)
    limit = min(
        math.acos(-math.tan(phi) * math.tan(delta)),
        math.acos(-math.tan(phi_eq) * math.tan(delta)),
    )
    beam = 0.98 * 24 * 60 / math.pi * GSC * dr * (
        limit * math.sin(phi_eq) * math.sin(delta)
        + math.cos(phi_eq) * math.cos(delta) * math.sin(limit)
    )
    on_slope, _ = dt.clear_sky_daily_slope_flat(lat, day, s, aspect, 0.0, 0.0, 0.0, 0.0)
    assert on_slope == pytest.approx(beam, rel=2e-4)
