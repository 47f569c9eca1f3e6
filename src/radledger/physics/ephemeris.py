"""The sun's position at one instant, for satellite scenes.

FAO-56's day-scale formulas (see :mod:`radledger.physics.solar`) place the sun
up to about a degree off at an instant.  :func:`sun_position` gives the
geometric (unrefracted) topocentric zenith and azimuth angles of NREL's Solar
Position Algorithm (SPA) [1], stated there to be good to 0.0003 deg for the
years -2000 to 6000.  The work is split in two:

* everything that depends only on the instant (the Earth's heliocentric
  position from the VSOP87 series, nutation, aberration, apparent sidereal
  time, the sun's geocentric right ascension and declination, the Earth-Sun
  distance) is computed once by ``pvlib.spa`` [2], a maintained
  implementation of [1];
* the per-pixel part (local hour angle, parallax, topocentric zenith and
  azimuth; the last steps of [1]) is a dozen NumPy ufunc calls written out
  here, so latitude and longitude may be floats, NumPy, Dask or xarray arrays
  and come back as the same kind, and millions of pixels cost about as much
  as the same number of sines and cosines.

:func:`michalsky_1988` (the Astronomical Almanac's shorter algorithm [3]) is
kept for callers that need arrays of instants; against SPA it is good to
about 0.01-0.02 deg of zenith over 1990-2040.

References
----------
.. [1] Reda, I., Andreas, A. (2004). Solar position algorithm for solar
   radiation applications. Solar Energy 76(5), 577-589.
   https://doi.org/10.1016/j.solener.2003.12.003 (corrigendum: Solar Energy
   81(6), 838, 2007).
.. [2] Holmgren, W. F., Hansen, C. W., Mikofski, M. A. (2018). pvlib python:
   a python package for modeling solar energy systems. Journal of Open Source
   Software 3(29), 884. https://doi.org/10.21105/joss.00884
.. [3] Michalsky, J. J. (1988). The Astronomical Almanac's algorithm for
   approximate solar position (1950-2050). Solar Energy 40(3), 227-235.
   https://doi.org/10.1016/0038-092X(88)90045-X
"""

from __future__ import annotations

import datetime as _dt
import functools
import os

import numpy as np

from .constants import SOLAR_CONSTANT_W
from .solar import _parse_iso, _wrap_angle

__all__ = [
    "DELTA_T",
    "julian_day",
    "michalsky_1988",
    "sun_position",
    "extraterrestrial_instant_precise",
    "sun_distance",
]

#: Terrestrial Time minus Universal Time used by default [s]; 67 s is
#: pvlib's default for SPA.  An error of 10 s moves the sun by about
#: 1e-4 deg, far below the algorithm's stated accuracy.
DELTA_T = 67.0

# Equatorial horizontal parallax of the sun at 1 AU, 8.794 arcsec [1].
_PARALLAX_1AU_DEG = 8.794 / 3600.0
# Earth's polar/equatorial radius ratio and equatorial radius [m] as used by
# SPA for the observer's geocentric position [1].
_POLAR_RATIO = 0.99664719
_EQUATORIAL_RADIUS = 6378140.0


def _unix_seconds(time) -> float:
    """Seconds since 1970-01-01T00:00:00 UTC of one instant."""
    if isinstance(time, np.datetime64):
        # datetime64 carries no zone: it is read as UTC.
        return float((time - np.datetime64(0, "s")) / np.timedelta64(1, "us")) * 1e-6
    if isinstance(time, str):
        if len(time.strip()) <= 10:  # "2026-07-14" or "20260714"
            raise ValueError(f"{time!r} is a day, not an instant: give the time of day as well")
        time = _parse_iso(time)
    if isinstance(time, _dt.datetime):
        if time.tzinfo is None or time.utcoffset() is None:
            time = time.replace(tzinfo=_dt.timezone.utc)  # naive = UTC, as scene times are
        return time.timestamp()
    raise TypeError(
        "the instant must be a datetime, numpy.datetime64 or ISO 8601 date-time string, "
        f"not {type(time).__name__}"
    )


@functools.lru_cache(maxsize=1)
def _pvlib_spa():
    """pvlib's ``spa`` module, loaded on its own.

    ``pvlib.spa`` needs only NumPy, but importing it through the package runs ``pvlib/__init__``,
    which imports pandas and the rest of pvlib (~85 MB and ~0.7 s in every run that needs the sun).
    The same file is loaded here as a module of its own; a ``pvlib.spa`` already imported is used.
    """
    import importlib.util
    import sys

    if "pvlib.spa" in sys.modules:
        return sys.modules["pvlib.spa"]
    package = importlib.util.find_spec("pvlib")
    if package is None or not package.submodule_search_locations:  # pragma: no cover - a dependency
        raise ImportError("the precise sun position needs pvlib: pip install pvlib")
    path = os.path.join(list(package.submodule_search_locations)[0], "spa.py")
    spec = importlib.util.spec_from_file_location("radledger_pvlib_spa", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@functools.lru_cache(maxsize=64)
def _geocentric_sun(unix_seconds: float, delta_t: float) -> tuple[float, float, float, float]:
    """Apparent sidereal time, right ascension, declination [deg] and distance [AU]."""
    spa = _pvlib_spa()
    t = np.array([unix_seconds], dtype=np.float64)
    # The site arguments are ignored by the sst/esd shortcuts; numthreads=1
    # keeps pvlib from starting threads for one instant.
    v, alpha, delta = spa.solar_position(t, 0.0, 0.0, 0.0, 1013.25, 12.0, delta_t, 0.5667,
                                         numthreads=1, sst=True)
    (radius,) = spa.solar_position(t, 0.0, 0.0, 0.0, 1013.25, 12.0, delta_t, 0.5667,
                                   numthreads=1, esd=True)
    return float(v[0]), float(alpha[0]), float(delta[0]), float(radius[0])


def _topocentric(latitude, longitude, time, elevation, delta_t):
    """sin(elevation angle), and the topocentric hour angle and declination [rad]."""
    v, alpha, delta, radius = _geocentric_sun(_unix_seconds(time), float(delta_t))
    sin_xi = np.sin(np.radians(_PARALLAX_1AU_DEG / radius))
    sin_delta = np.sin(np.radians(delta))
    cos_delta = np.cos(np.radians(delta))
    phi = np.radians(latitude)
    sin_phi = np.sin(phi)
    cos_phi = np.cos(phi)
    # Observer's geocentric position (SPA's u, x, y terms).
    u = np.arctan(_POLAR_RATIO * np.tan(phi))
    height = elevation / _EQUATORIAL_RADIUS
    x = np.cos(u) + height * cos_phi
    y = _POLAR_RATIO * np.sin(u) + height * sin_phi
    # Geocentric local hour angle, then the parallax in right ascension.
    hour = np.radians(v - alpha + longitude)
    denominator = cos_delta - x * sin_xi * np.cos(hour)
    d_alpha = np.arctan2(-x * sin_xi * np.sin(hour), denominator)
    declination = np.arctan2((sin_delta - y * sin_xi) * np.cos(d_alpha), denominator)
    hour_topo = hour - d_alpha
    sin_elevation = sin_phi * np.sin(declination) + cos_phi * np.cos(declination) * np.cos(
        hour_topo
    )
    return sin_elevation, hour_topo, declination, radius


def sun_position(latitude, longitude, time, *, elevation=0.0, delta_t=DELTA_T):
    """Zenith and azimuth angles of the sun at one instant, NREL SPA (Reda & Andreas 2004).

    Geometric topocentric angles: parallax is included, atmospheric
    refraction is not (as FAO-56 and ASCE-EWRI 2005 use the sun angle).  The
    instant-only part of SPA [1] comes from ``pvlib.spa`` [2] (evaluated once
    per instant and cached); the per-pixel topocentric part is computed here.

    Parameters
    ----------
    latitude : float or array_like
        Latitude, north positive [deg].
    longitude : float or array_like
        Longitude, east positive [deg].
    time : datetime.datetime, numpy.datetime64 or str
        The instant (one scalar).  A naive datetime or a datetime64 is taken
        as UTC; an aware datetime or an ISO 8601 string with an offset is
        converted to UTC ("2026-07-14T10:30:00Z").
    elevation : float or array_like, optional
        Height of the site above the ellipsoid, for the parallax; 1000 m
        changes the zenith angle by less than 1e-6 deg [m].
    delta_t : float, optional
        Terrestrial Time minus UT1, see :data:`DELTA_T` [s].

    Returns
    -------
    zenith, azimuth : tuple of float or array
        Zenith angle, 0 at the zenith and above 90 with the sun below the
        horizon [deg]; azimuth clockwise from north, 0..360 [deg].
    """
    sin_e, hour, declination, _ = _topocentric(latitude, longitude, time, elevation, delta_t)
    zenith = 90.0 - np.degrees(np.arcsin(np.minimum(np.maximum(sin_e, -1.0), 1.0)))
    phi = np.radians(latitude)
    # Astronomers' azimuth (westward from south), turned to clockwise from north.
    gamma = np.arctan2(np.sin(hour), np.cos(hour) * np.sin(phi) - np.tan(declination) * np.cos(phi))
    azimuth = np.mod(np.degrees(gamma) + 180.0, 360.0)
    return zenith, azimuth


def extraterrestrial_instant_precise(
    latitude, longitude, time, *, elevation=0.0, solar_constant=SOLAR_CONSTANT_W, delta_t=DELTA_T
):
    """Instantaneous extraterrestrial irradiance on a horizontal surface, SPA sun.

    ``G_sc / r^2 max(cos(theta_z), 0)`` with the zenith angle theta_z of
    :func:`sun_position` and the Earth-Sun distance r [AU] of SPA [1]
    (instead of FAO-56 eqs. 23, 24 and 31 as in
    :func:`radledger.physics.solar.extraterrestrial_instant`).

    Parameters
    ----------
    latitude : float or array_like
        Latitude, north positive [deg].
    longitude : float or array_like
        Longitude, east positive [deg].
    time : datetime.datetime, numpy.datetime64 or str
        The instant, as for :func:`sun_position`.
    elevation : float or array_like, optional
        Height of the site, for the parallax [m].
    solar_constant : float, optional
        Total solar irradiance at 1 AU; the default is FAO-56's
        0.0820 MJ m-2 min-1 = 1366.7 W m-2, which ASCE-EWRI (2005) also uses,
        so that clear-sky models calibrated with it stay consistent [W m-2].
    delta_t : float, optional
        Terrestrial Time minus UT1, see :data:`DELTA_T` [s].

    Returns
    -------
    G_0 : float or array
        Extraterrestrial irradiance on a horizontal plane, 0 with the sun
        below the horizon [W m-2].
    """
    sin_e, _, _, radius = _topocentric(latitude, longitude, time, elevation, delta_t)
    return solar_constant / (radius * radius) * np.maximum(sin_e, 0.0)


def sun_distance(time, *, delta_t=DELTA_T) -> float:
    """Earth-Sun distance at one instant, NREL SPA (Reda & Andreas 2004) [1].

    Parameters
    ----------
    time : datetime.datetime, numpy.datetime64 or str
        The instant, as for :func:`sun_position`.
    delta_t : float, optional
        Terrestrial Time minus UT1, see :data:`DELTA_T` [s].

    Returns
    -------
    r : float
        Distance in astronomical units [AU]; the extraterrestrial irradiance
        normal to the beam is ``G_sc / r^2``.
    """
    return _geocentric_sun(_unix_seconds(time), float(delta_t))[3]


def julian_day(year, day_of_year, utc_hour):
    """Julian date (UTC) of a year, day of year and hour (Gregorian calendar).

    Parameters
    ----------
    year : int or array_like
        Calendar year [1].
    day_of_year : int or array_like
        Day of the year, 1 = 1 January [1].
    utc_hour : float or array_like
        UTC decimal hours [hour].

    Returns
    -------
    jd : float or array
        Julian date; 2451545.0 is 2000-01-01 12:00 [day].
    """
    y = year - 1
    # Days from 0001-01-01 (JD 1721425.5 at 0 h, proleptic Gregorian) to
    # 1 January of `year`, by the Gregorian leap-year rule.
    leap_days = np.floor_divide(y, 4) - np.floor_divide(y, 100) + np.floor_divide(y, 400)
    days_before = 365 * y + leap_days
    return 1721425.5 + days_before + (day_of_year - 1) + utc_hour / 24.0


def michalsky_1988(year, day_of_year, utc_hour, longitude):
    """Solar declination and hour angle by the Astronomical Almanac's algorithm.

    Low-precision solar coordinates of the Astronomical Almanac as set out by
    Michalsky (1988) [3], stated there to be good to 0.01 deg for 1950-2050;
    against SPA the zenith angle is off by up to about 0.012 deg over
    1990-2040.  Unlike :func:`sun_position` it takes arrays of instants.
    The coefficients below are from memory of that paper; the test suite
    checks the resulting zenith angle against astropy.

    Parameters
    ----------
    year : int or array_like
        Calendar year [1].
    day_of_year : int or array_like
        Day of the year, 1 = 1 January [1].
    utc_hour : float or array_like
        UTC decimal hours [hour].
    longitude : float or array_like
        Longitude, east positive [deg].

    Returns
    -------
    declination, hour_angle : tuple of float or array
        Solar declination [rad] and local hour angle wrapped to [-pi, pi)
        [rad], ready for :func:`radledger.physics.solar.cos_zenith`.
    """
    n = julian_day(year, day_of_year, utc_hour) - 2451545.0
    mean_longitude = np.radians(np.mod(280.460 + 0.9856474 * n, 360.0))
    mean_anomaly = np.radians(np.mod(357.528 + 0.9856003 * n, 360.0))
    ecliptic_longitude = (
        mean_longitude
        + np.radians(1.915) * np.sin(mean_anomaly)
        + np.radians(0.020) * np.sin(2.0 * mean_anomaly)
    )
    obliquity = np.radians(23.439 - 0.0000004 * n)
    right_ascension = np.arctan2(
        np.cos(obliquity) * np.sin(ecliptic_longitude), np.cos(ecliptic_longitude)
    )
    declination = np.arcsin(np.sin(obliquity) * np.sin(ecliptic_longitude))
    # Greenwich mean sidereal time in hours; n already holds the hour's fraction.
    gmst = np.mod(6.697375 + 0.0657098242 * n + utc_hour, 24.0)
    local_hour_angle = np.radians(gmst * 15.0 + longitude) - right_ascension
    return declination, _wrap_angle(local_hour_angle)
