"""Sun geometry and extraterrestrial (top-of-atmosphere) radiation.

Conventions: latitude and longitude in degrees (south and west negative),
declination and hour angle in radians, times in UTC decimal hours.  Every
function accepts Python floats, NumPy, Dask or xarray arrays and returns the
same kind (broadcasting as NumPy does).

The FAO-56 functions follow Allen et al. (1998) [1] exactly.  Their
declination (eq. 24) and seasonal correction (eq. 32) are approximations: at
an instant the sun's zenith angle from them is off by up to about 1.5 deg
(measured against NREL's SPA in the test suite), which is what FAO-56 and
ASCE-EWRI (2005) [2] accept for daily and hourly totals.  For the sun's
position at one instant (a satellite scene) use
:func:`radledger.physics.ephemeris.sun_position` instead.

References
----------
.. [1] Allen, R. G., Pereira, L. S., Raes, D., Smith, M. (1998). Crop
   evapotranspiration. FAO Irrigation and Drainage Paper 56, FAO, Rome.
   Chapter 3, eqs. 21-34.
.. [2] ASCE-EWRI (2005). The ASCE standardized reference evapotranspiration
   equation. Report of the Task Committee on Standardization of Reference
   Evapotranspiration, ASCE, Reston VA.  Eq. 48 (hourly Ra) and eq. 62
   (sun elevation), numbers as cited by the open-source RefET package.
"""

from __future__ import annotations

import datetime as _dt

import numpy as np

from .constants import SOLAR_CONSTANT, SOLAR_CONSTANT_W, _clip

__all__ = [
    "day_of_year",
    "inverse_relative_distance",
    "solar_declination",
    "seasonal_correction",
    "hour_angle",
    "cos_zenith",
    "sunset_hour_angle",
    "daylight_hours",
    "sunrise_sunset",
    "extraterrestrial_daily",
    "extraterrestrial_period",
    "extraterrestrial_hourly",
    "extraterrestrial_instant",
]

_TWO_PI = 2.0 * np.pi


def day_of_year(value) -> int:
    """Day of the year, 1 (1 January) to 365 or 366 (31 December).

    Parameters
    ----------
    value : datetime.date, datetime.datetime, numpy.datetime64, str or int
        The date.  Strings are ISO 8601 (``"2026-07-14"``,
        ``"2026-07-14T18:10:00Z"``).  A timezone-aware datetime (or a string
        with an offset) is first converted to UTC, because scene times are
        UTC; a naive one is taken as it stands.  An int is returned unchanged
        after a range check.

    Returns
    -------
    int
        Day of the year J (FAO-56 Annex 2, Table 2.5) [1].
    """
    if isinstance(value, (bool, np.bool_)):
        raise TypeError("day_of_year needs a date, datetime, datetime64, ISO string or int")
    if isinstance(value, (int, np.integer)):
        if not 1 <= int(value) <= 366:
            raise ValueError(f"day of year {value} is outside 1..366")
        return int(value)
    if isinstance(value, np.datetime64):
        # datetime64 carries no zone: it is read as UTC.
        days = value.astype("datetime64[D]")
        year_start = days.astype("datetime64[Y]").astype("datetime64[D]")
        return int((days - year_start).astype(int)) + 1
    if isinstance(value, str):
        value = _parse_iso(value)
    if isinstance(value, _dt.datetime):
        if value.tzinfo is not None and value.utcoffset() is not None:
            value = value.astimezone(_dt.timezone.utc)
        return value.timetuple().tm_yday
    if isinstance(value, _dt.date):
        return value.timetuple().tm_yday
    raise TypeError(
        "day_of_year needs a date, datetime, datetime64, ISO string or int, "
        f"not {type(value).__name__}"
    )


def _parse_iso(value: str) -> _dt.datetime:
    """An ISO 8601 date or date-time string (``Z`` accepted for UTC)."""
    text = value.strip()
    if text.endswith(("Z", "z")):
        text = text[:-1] + "+00:00"
    try:
        return _dt.datetime.fromisoformat(text)
    except ValueError:
        raise ValueError(
            f"cannot read {value!r} as an ISO 8601 date such as 2026-07-14 "
            "or 2026-07-14T18:10:00Z"
        ) from None


def inverse_relative_distance(day_of_year):
    """Inverse relative Earth-Sun distance, FAO-56 eq. 23.

    Parameters
    ----------
    day_of_year : int or array_like
        Day of the year J, 1..366 [1].

    Returns
    -------
    d_r : float or array
        ``1 + 0.033 cos(2 pi J / 365)`` [1].
    """
    return 1.0 + 0.033 * np.cos(_TWO_PI * day_of_year / 365.0)


def solar_declination(day_of_year):
    """Solar declination, FAO-56 eq. 24.

    Parameters
    ----------
    day_of_year : int or array_like
        Day of the year J, 1..366 [1].

    Returns
    -------
    delta : float or array
        ``0.409 sin(2 pi J / 365 - 1.39)`` [rad].
    """
    return 0.409 * np.sin(_TWO_PI * day_of_year / 365.0 - 1.39)


def seasonal_correction(day_of_year):
    """Seasonal correction for solar time (equation of time), FAO-56 eqs. 32-33.

    Parameters
    ----------
    day_of_year : int or array_like
        Day of the year J, 1..366 [1].

    Returns
    -------
    S_c : float or array
        ``0.1645 sin(2b) - 0.1255 cos(b) - 0.025 sin(b)`` with
        ``b = 2 pi (J - 81) / 364`` [hour].
    """
    b = _TWO_PI * (day_of_year - 81.0) / 364.0
    return 0.1645 * np.sin(2.0 * b) - 0.1255 * np.cos(b) - 0.025 * np.sin(b)


def _wrap_angle(angle):
    # Into [-pi, pi): np.mod is a ufunc, so every array kind keeps its type.
    return np.mod(angle + np.pi, _TWO_PI) - np.pi


def hour_angle(utc_hour, longitude, day_of_year):
    """Solar time (hour) angle, FAO-56 eq. 31 written for UTC.

    FAO-56 writes ``omega = pi/12 [(t + 0.06667 (Lz - Lm) + Sc) - 12]`` with
    the clock time ``t`` of a zone centred on ``Lz`` and longitudes in degrees
    west.  With the time given in UTC (``Lz = 0``) and the longitude in degrees
    east (``Lm = -longitude``) this is
    ``omega = pi/12 (utc_hour + longitude/15 + Sc - 12)``.  FAO's 0.06667 is
    1/15 rounded; the exact 1/15 (4 minutes per degree) is used here.

    Parameters
    ----------
    utc_hour : float or array_like
        Time in UTC decimal hours; may be negative or exceed 24 [hour].
    longitude : float or array_like
        Longitude, east positive [deg].
    day_of_year : int or array_like
        Day of the year J, for the seasonal correction (eq. 32) [1].

    Returns
    -------
    omega : float or array
        Hour angle, zero at solar noon, negative in the morning, wrapped to
        ``[-pi, pi)`` [rad].
    """
    solar_time = utc_hour + longitude / 15.0 + seasonal_correction(day_of_year)
    return _wrap_angle(np.pi / 12.0 * (solar_time - 12.0))


def cos_zenith(latitude, declination, hour_angle):
    """Cosine of the solar zenith angle (sine of the sun's elevation).

    ``sin(phi) sin(delta) + cos(phi) cos(delta) cos(omega)``, the integrand of
    FAO-56 eq. 28 and ASCE-EWRI (2005) eq. 62 / FAO-56 Annex 3 eq. 3-15.
    Negative when the sun is below the horizon (no refraction).

    Parameters
    ----------
    latitude : float or array_like
        Latitude, north positive [deg].
    declination : float or array_like
        Solar declination [rad].
    hour_angle : float or array_like
        Hour angle [rad].

    Returns
    -------
    cos_theta : float or array
        Cosine of the solar zenith angle [1].
    """
    phi = np.radians(latitude)
    return np.sin(phi) * np.sin(declination) + np.cos(phi) * np.cos(declination) * np.cos(
        hour_angle
    )


def sunset_hour_angle(latitude, declination):
    """Sunset hour angle, FAO-56 eq. 25.

    The argument of the arccos is clipped to [-1, 1] so that polar night
    (``omega_s = 0``) and polar day (``omega_s = pi``) come out defined.

    Parameters
    ----------
    latitude : float or array_like
        Latitude, north positive [deg].
    declination : float or array_like
        Solar declination [rad].

    Returns
    -------
    omega_s : float or array
        ``arccos(-tan(phi) tan(delta))`` [rad].
    """
    phi = np.radians(latitude)
    return np.arccos(_clip(-np.tan(phi) * np.tan(declination), -1.0, 1.0))


def daylight_hours(sunset_hour_angle):
    """Daylight hours (maximum possible sunshine duration), FAO-56 eq. 34.

    Parameters
    ----------
    sunset_hour_angle : float or array_like
        Sunset hour angle (eq. 25) [rad].

    Returns
    -------
    N : float or array
        ``24 omega_s / pi`` [hour].
    """
    return 24.0 / np.pi * sunset_hour_angle


def sunrise_sunset(latitude, longitude, day_of_year):
    """Sunrise and sunset times in UTC, from FAO-56 eqs. 24, 25, 31 and 32.

    Solar noon is where eq. 31 gives ``omega = 0``; sunrise and sunset lie
    ``omega_s`` either side of it (12/pi hours per radian).  Refraction and
    the sun's radius are ignored, as in eq. 25.

    Parameters
    ----------
    latitude : float or array_like
        Latitude, north positive [deg].
    longitude : float or array_like
        Longitude, east positive [deg].
    day_of_year : int or array_like
        Day of the year J [1].

    Returns
    -------
    sunrise, sunset : tuple of float or array
        UTC decimal hours [hour].  Solar noon is placed in [0, 24); sunrise
        may then be negative (the previous UTC day) or sunset exceed 24 (the
        next UTC day).  In polar night both equal solar noon.
    """
    noon = np.mod(12.0 - longitude / 15.0 - seasonal_correction(day_of_year), 24.0)
    half_day = 12.0 / np.pi * sunset_hour_angle(latitude, solar_declination(day_of_year))
    return noon - half_day, noon + half_day


def extraterrestrial_daily(latitude, day_of_year):
    """Extraterrestrial radiation for a whole day, FAO-56 eq. 21.

    Parameters
    ----------
    latitude : float or array_like
        Latitude, north positive [deg].
    day_of_year : int or array_like
        Day of the year J [1].

    Returns
    -------
    R_a : float or array
        ``24 (60) / pi G_sc d_r [omega_s sin(phi) sin(delta) +
        cos(phi) cos(delta) sin(omega_s)]`` with G_sc = 0.0820 MJ m-2 min-1
        [MJ m-2 day-1].
    """
    phi = np.radians(latitude)
    delta = solar_declination(day_of_year)
    omega_s = sunset_hour_angle(latitude, delta)
    return (
        24.0
        * 60.0
        / np.pi
        * SOLAR_CONSTANT
        * inverse_relative_distance(day_of_year)
        * (
            omega_s * np.sin(phi) * np.sin(delta)
            + np.cos(phi) * np.cos(delta) * np.sin(omega_s)
        )
    )


def extraterrestrial_period(latitude, day_of_year, hour_angle_start, hour_angle_end):
    """Extraterrestrial radiation between two hour angles, FAO-56 eq. 28.

    The ends are clamped to ``[-omega_s, omega_s]`` (and the start to at most
    the end) so that a period that begins before sunrise or ends after sunset
    counts only its sunlit part, and a night period gives zero; this is the
    logic FAO-56 states below eq. 31 (ASCE-EWRI 2005 spells out the same
    limits for its hourly Ra; from memory).  Both angles should lie in the
    same solar day (``-pi..pi``).

    Parameters
    ----------
    latitude : float or array_like
        Latitude, north positive [deg].
    day_of_year : int or array_like
        Day of the year J [1].
    hour_angle_start : float or array_like
        Hour angle at the start of the period, omega_1 (eq. 29) [rad].
    hour_angle_end : float or array_like
        Hour angle at the end of the period, omega_2 (eq. 30) [rad].

    Returns
    -------
    R_a : float or array
        ``12 (60) / pi G_sc d_r [(omega_2 - omega_1) sin(phi) sin(delta) +
        cos(phi) cos(delta) (sin(omega_2) - sin(omega_1))]``
        [MJ m-2 per period].
    """
    phi = np.radians(latitude)
    delta = solar_declination(day_of_year)
    omega_s = sunset_hour_angle(latitude, delta)
    omega_2 = _clip(hour_angle_end, -omega_s, omega_s)
    omega_1 = np.minimum(_clip(hour_angle_start, -omega_s, omega_s), omega_2)
    return (
        12.0
        * 60.0
        / np.pi
        * SOLAR_CONSTANT
        * inverse_relative_distance(day_of_year)
        * (
            (omega_2 - omega_1) * np.sin(phi) * np.sin(delta)
            + np.cos(phi) * np.cos(delta) * (np.sin(omega_2) - np.sin(omega_1))
        )
    )


def extraterrestrial_hourly(latitude, longitude, day_of_year, utc_hour_mid, period_hours=1.0):
    """Extraterrestrial radiation for an hour or shorter period, FAO-56 eqs. 28-31.

    Parameters
    ----------
    latitude : float or array_like
        Latitude, north positive [deg].
    longitude : float or array_like
        Longitude, east positive [deg].
    day_of_year : int or array_like
        Day of the year J [1].
    utc_hour_mid : float or array_like
        UTC time at the middle of the period, e.g. 14.5 for 14:00-15:00 UTC
        [hour].
    period_hours : float or array_like, optional
        Length of the period t_1, 1 for hourly, 0.5 for 30 minutes [hour].

    Returns
    -------
    R_a : float or array
        Extraterrestrial radiation received in the period [MJ m-2 per period].

    Notes
    -----
    A period straddling local solar midnight is split by the [-pi, pi) wrap
    and its part beyond midnight is lost; this matters only in polar day,
    outside the latitude range FAO-56 recommends eq. 21 for (|lat| <= 55-60).
    """
    omega = hour_angle(utc_hour_mid, longitude, day_of_year)
    half = np.pi * period_hours / 24.0
    return extraterrestrial_period(latitude, day_of_year, omega - half, omega + half)


def extraterrestrial_instant(latitude, longitude, day_of_year, utc_hour):
    """Instantaneous extraterrestrial irradiance on a horizontal surface.

    ``G_sc d_r max(cos(theta_z), 0)`` with the FAO-56 solar constant in W m-2
    (0.0820 MJ m-2 min-1 = 1366.7 W m-2), d_r from eq. 23 and the sun angle
    from eqs. 24 and 31.  Its integral over a day is eq. 21.  For a scene's
    instant use :func:`radledger.physics.ephemeris.extraterrestrial_instant_precise`
    (the sun from NREL's SPA; FAO-56's sun angle is up to about 1.5 deg off).

    Parameters
    ----------
    latitude : float or array_like
        Latitude, north positive [deg].
    longitude : float or array_like
        Longitude, east positive [deg].
    day_of_year : int or array_like
        Day of the year J [1].
    utc_hour : float or array_like
        Time in UTC decimal hours [hour].

    Returns
    -------
    G_0 : float or array
        Extraterrestrial irradiance on a horizontal plane [W m-2].
    """
    delta = solar_declination(day_of_year)
    omega = hour_angle(utc_hour, longitude, day_of_year)
    mu = cos_zenith(latitude, delta, omega)
    return SOLAR_CONSTANT_W * inverse_relative_distance(day_of_year) * np.maximum(mu, 0.0)
