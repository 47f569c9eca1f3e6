"""Checks against general-purpose reference libraries and an open dataset.

* scipy.constants (CODATA) for the Stefan-Boltzmann constant;
* astropy for the sun's position, of Michalsky (1988) and of SPA (no
  downloads: IERS auto-download is off and the bundled astropy-iers-data
  tables are used);
* MetPy for saturation vapour pressure;
* scipy.integrate.quad of the top-of-atmosphere flux, written out from
  spherical geometry, for FAO-56 eq. 21;
* the ETR column (hourly extraterrestrial horizontal radiation) of a TMY3 file
  shipped in pvlib's data folder, read with pvlib.iotools.read_tmy3.

Tolerances are test design choices, stated beside each check.
"""

from __future__ import annotations

import os
import warnings

import numpy as np
import pytest

from radledger import physics as p

K = 273.15


def test_stefan_boltzmann_matches_scipy_codata():
    scipy_constants = pytest.importorskip("scipy.constants")
    # scipy.constants carries CODATA 2018 (or later; sigma is exact since 2019).
    assert p.STEFAN_BOLTZMANN == pytest.approx(scipy_constants.Stefan_Boltzmann, rel=1e-12)


def test_julian_day_matches_astropy():
    from astropy.time import Time

    years = np.array([2000, 2016, 2023, 2024])
    doys = np.array([1, 60, 200, 366])
    hours = np.array([12.0, 0.0, 6.25, 23.5])
    for y, j, h in zip(years, doys, hours):
        # tt/utc differ by seconds; compare the calendar arithmetic in UTC.
        t = Time(f"{y}-01-01T00:00:00", scale="utc", format="isot")
        expected = t.jd1 + t.jd2 + (j - 1) + h / 24.0
        assert p.julian_day(y, j, h) == pytest.approx(expected, abs=1e-9)
    # JD 2451545.0 is 2000-01-01 12:00 (the J2000.0 epoch) -- common practice.
    assert p.julian_day(2000, 1, 12.0) == 2451545.0


@pytest.fixture(scope="module")
def astropy_sun():
    """Sun zenith angles from astropy at 24 places and times (offline)."""
    from astropy.utils import iers

    iers.conf.auto_download = False
    iers.conf.auto_max_age = None
    import astropy.units as u
    from astropy.coordinates import AltAz, EarthLocation, get_sun
    from astropy.time import Time

    rng = np.random.default_rng(20260714)
    n = 24
    lat = rng.uniform(-60.0, 60.0, n)
    lon = rng.uniform(-180.0, 180.0, n)
    year = rng.integers(2015, 2026, n)  # inside the bundled IERS tables
    doy = rng.integers(1, 366, n)
    hour = rng.uniform(0.0, 24.0, n)
    start = Time([f"{y}-01-01T00:00:00" for y in year], scale="utc")
    t = start + (doy - 1) * u.day + hour * u.hour
    where = EarthLocation(lat=lat * u.deg, lon=lon * u.deg, height=0 * u.m)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        # pressure=0: no refraction, as in cos_zenith.
        altaz = get_sun(t).transform_to(AltAz(obstime=t, location=where, pressure=0 * u.hPa))
    zenith = 90.0 - altaz.alt.deg
    return {"lat": lat, "lon": lon, "year": year, "doy": doy, "hour": hour, "zenith": zenith}


def test_sun_zenith_michalsky_1988_matches_astropy(astropy_sun):
    s = astropy_sun
    declination, omega = p.michalsky_1988(s["year"], s["doy"], s["hour"], s["lon"])
    zenith = np.degrees(np.arccos(p.cos_zenith(s["lat"], declination, omega)))
    assert len(zenith) >= 20
    np.testing.assert_allclose(zenith, s["zenith"], atol=0.1)  # brief: within 0.1 deg


def test_sun_position_matches_astropy(astropy_sun):
    # An independent ephemeris (astropy, geometric: pressure 0) for SPA's
    # sun; 0.01 deg is the accuracy asked of a scene's sun (test choice).
    import datetime as dt

    s = astropy_sun
    for i in range(len(s["lat"])):
        start = dt.datetime(int(s["year"][i]), 1, 1)
        t = start + dt.timedelta(days=int(s["doy"][i]) - 1, hours=float(s["hour"][i]))
        zenith, _ = p.sun_position(s["lat"][i], s["lon"][i], t)
        assert zenith == pytest.approx(s["zenith"][i], abs=0.01)


def test_saturation_vapour_pressure_matches_metpy():
    mpcalc = pytest.importorskip("metpy.calc")
    from metpy.units import units

    t_c = np.linspace(0.0, 40.0, 81)
    ours = p.saturation_vapour_pressure(t_c + K)
    theirs = mpcalc.saturation_vapor_pressure(units.Quantity(t_c, "degC")).to("kPa").magnitude
    np.testing.assert_allclose(ours, theirs, rtol=0.005)  # brief: within 0.5 %


@pytest.mark.parametrize("latitude", [-60.0, -35.0, -20.0, 0.0, 13.7, 45.7, 60.0])
@pytest.mark.parametrize("doy", [1, 81, 172, 246, 355])
def test_daily_ra_equals_integral_of_instantaneous_flux(latitude, doy):
    # FAO-56 eq. 21 is the day's integral of the top-of-atmosphere flux on a
    # horizontal plane, G_sc d_r max(cos(theta_z), 0), with
    # cos(theta_z) = sin(phi) sin(delta) + cos(phi) cos(delta) cos(omega)
    # (spherical geometry) and the hour angle omega turning 2 pi per 1440 min.
    # Written out here with FAO-56's printed eq. 23 (d_r) and eq. 24 (delta)
    # and integrated by scipy.integrate.quad.
    integrate = pytest.importorskip("scipy.integrate")
    g_sc = 0.0820  # MJ m-2 min-1, FAO-56 eq. 21
    d_r = 1.0 + 0.033 * np.cos(2.0 * np.pi * doy / 365.0)  # FAO-56 eq. 23
    delta = 0.409 * np.sin(2.0 * np.pi * doy / 365.0 - 1.39)  # FAO-56 eq. 24
    phi = np.radians(latitude)

    def flux(omega):  # MJ m-2 min-1
        mu = np.sin(phi) * np.sin(delta) + np.cos(phi) * np.cos(delta) * np.cos(omega)
        return g_sc * d_r * max(mu, 0.0)

    # Tell quad where the integrand has its kinks (sunrise and sunset, where
    # cos(theta_z) = 0); without them it can step over a kink unnoticed.
    kink = -np.tan(phi) * np.tan(delta)
    points = [-np.arccos(kink), np.arccos(kink)] if abs(kink) < 1.0 else None
    minutes_per_radian = 1440.0 / (2.0 * np.pi)
    integral, _ = integrate.quad(flux, -np.pi, np.pi, points=points, limit=200,
                                 epsabs=1e-12, epsrel=1e-12)
    expected = integral * minutes_per_radian  # MJ m-2 day-1
    assert p.extraterrestrial_daily(latitude, doy) == pytest.approx(expected, rel=1e-6)


def test_extraterrestrial_hourly_sums_to_daily():
    # Twenty-four hourly eq. 28 totals make the eq. 21 day (same closed form,
    # different clamping path).
    hours = np.arange(24) + 0.5
    total = p.extraterrestrial_hourly(45.0, 0.0, 172, hours).sum()
    assert total == pytest.approx(p.extraterrestrial_daily(45.0, 172), rel=1e-9)


@pytest.fixture(scope="module")
def tmy3():
    pvlib = pytest.importorskip("pvlib")
    import pandas as pd

    path = os.path.join(os.path.dirname(pvlib.__file__), "data", "723170TYA.CSV")
    if not os.path.exists(path):
        pytest.skip("pvlib no longer ships 723170TYA.CSV")
    try:
        data, meta = pvlib.iotools.read_tmy3(path, map_variables=False)
    except TypeError:  # older pvlib without map_variables
        data, meta = pvlib.iotools.read_tmy3(path)
    column = "ETR (W/m^2)" if "ETR (W/m^2)" in data.columns else "ETR"
    etr = data[column].to_numpy(dtype=float)  # Wh m-2 in the hour ending at the stamp
    # TMY3 stamps are the END of the hour in local standard time; the index
    # carries the file's fixed UTC offset (meta["TZ"], -5 h for this site).
    mid = data.index - pd.Timedelta(minutes=30)
    local_hour = (mid.hour + mid.minute / 60.0).to_numpy()
    return {
        "etr": etr,
        "doy": mid.day_of_year.to_numpy(),
        "utc_mid": local_hour - float(meta["TZ"]),
        "lat": float(meta["latitude"]),  # Greensboro, NC: 36.1 N
        "lon": float(meta["longitude"]),  # 79.9 W
    }


def test_hourly_extraterrestrial_matches_tmy3_etr(tmy3):
    ra = p.extraterrestrial_hourly(tmy3["lat"], tmy3["lon"], tmy3["doy"], tmy3["utc_mid"], 1.0)
    ours = ra * 1e6 / 3600.0  # MJ m-2 per hour -> mean W m-2 (= Wh m-2 per hour)
    etr = tmy3["etr"]
    assert len(etr) == 8760
    assert ours.sum() == pytest.approx(etr.sum(), rel=0.01)  # brief: annual total within 1 %
    high = etr > 200.0
    median_error = np.median(np.abs(ours[high] / etr[high] - 1.0))
    assert median_error < 0.02  # brief: median hourly error within about 2 %
