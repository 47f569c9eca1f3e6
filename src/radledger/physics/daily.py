"""Daily net radiation: FAO-56 from daily weather, and scaling of instants to days.

Daily products are in MJ m-2 day-1; instantaneous inputs in W m-2.
Temperatures in kelvin, used as given (FAO-56 eq. 39 writes T_K = T + 273.16;
radledger decodes degC with 273.15 at the input edge and does not re-add).
Every function accepts Python floats, NumPy, Dask or xarray arrays and returns
the same kind.

References
----------
.. [1] Allen, R. G., Pereira, L. S., Raes, D., Smith, M. (1998). Crop
   evapotranspiration. FAO Irrigation and Drainage Paper 56, FAO, Rome.
   Eqs. 21, 37, 38, 39, 40; hourly periods pp. 74-75.
.. [2] Bisht, G., Venturini, V., Islam, S., Jiang, L. (2005). Estimation of the
   net radiation using MODIS (Moderate Resolution Imaging Spectroradiometer)
   data for clear sky days. Remote Sensing of Environment 97(1), 52-67.
   https://doi.org/10.1016/j.rse.2005.03.014
.. [3] Jackson, R. D., Hatfield, J. L., Reginato, R. J., Idso, S. B.,
   Pinter, P. J. (1983). Estimation of daily evapotranspiration from one
   time-of-day measurements. Agricultural Water Management 7(1-3), 351-362.
   https://doi.org/10.1016/0378-3774(83)90095-1
.. [4] ASCE-EWRI (2005). The ASCE standardized reference evapotranspiration
   equation. ASCE, Reston VA.  Cloudiness function f_cd with
   0.3 <= R_s/R_so <= 1.0 (eq. 18; equation number from memory).
"""

from __future__ import annotations

import numpy as np

from .constants import STEFAN_BOLTZMANN_DAILY, _clip, _where
from .shortwave import clear_sky_shortwave_fao56, net_shortwave
from .solar import extraterrestrial_daily

__all__ = [
    "RELATIVE_SHORTWAVE_LIMITS",
    "fao56_net_longwave_daily",
    "fao56_net_longwave_hourly",
    "fao56_net_radiation_components_daily",
    "fao56_net_radiation_daily",
    "sinusoidal_daily_bisht_2005",
    "shortwave_ratio_daily_jackson_1983",
]

_SECONDS_PER_HOUR = 3600.0
_MJ_PER_J = 1e-6


#: Limits of the relative shortwave R_s / R_so in the cloudiness factor of
#: FAO-56 eq. 39 [1].  FAO-56 limits the ratio to at most 1.0 and notes (p. 75)
#: that "a value of R_s/R_so = 0.3 presumes total cloud cover"; ASCE-EWRI
#: (2005) holds it within 0.3..1.0 for its cloudiness function f_cd [4].
#: Below 0.26 the factor 1.35 R_s/R_so - 0.35 would turn negative, i.e. a
#: longwave gain.
RELATIVE_SHORTWAVE_LIMITS = (0.3, 1.0)


def _cloudiness_factor(ratio):
    low, high = RELATIVE_SHORTWAVE_LIMITS
    return 1.35 * _clip(ratio, low, high) - 0.35


def fao56_net_longwave_daily(tmax, tmin, vapour_pressure, shortwave_down, clear_sky_shortwave):
    """Net outgoing longwave radiation of a day, FAO-56 eq. 39.

    ``R_nl = sigma (Tmax^4 + Tmin^4) / 2 (0.34 - 0.14 sqrt(e_a))
    (1.35 R_s / R_so - 0.35)`` with sigma = 4.903e-9 MJ K-4 m-2 day-1.
    ``R_s / R_so`` is held within 0.3..1.0 (:data:`RELATIVE_SHORTWAVE_LIMITS`):
    FAO-56 limits it to at most 1; the lower limit 0.3 is ASCE-EWRI (2005)'s
    for its cloudiness function f_cd and the value FAO-56 (p. 75) gives for
    total cloud cover.  Without it an overcast day (ratio below 0.26) would
    get a negative cloudiness factor, i.e. a longwave *gain*.  Where ``R_so``
    is zero (polar night) the ratio is taken as 1, so no division by zero
    happens.

    For hourly periods use :func:`fao56_net_longwave_hourly`.

    Parameters
    ----------
    tmax : float or array_like
        Daily maximum air temperature [K].
    tmin : float or array_like
        Daily minimum air temperature [K].
    vapour_pressure : float or array_like
        Mean daily actual vapour pressure [kPa].
    shortwave_down : float or array_like
        Incoming shortwave radiation of the day [MJ m-2 day-1].
    clear_sky_shortwave : float or array_like
        Clear-sky shortwave radiation of the day (eq. 37) [MJ m-2 day-1].

    Returns
    -------
    R_nl : float or array
        Net outgoing longwave radiation, positive = loss [MJ m-2 day-1].
    """
    sunlit = clear_sky_shortwave > 0.0
    ratio = _where(sunlit, shortwave_down / _where(sunlit, clear_sky_shortwave, 1.0), 1.0)
    tmax2 = tmax * tmax
    tmin2 = tmin * tmin
    return (
        STEFAN_BOLTZMANN_DAILY
        * 0.5
        * (tmax2 * tmax2 + tmin2 * tmin2)
        * (0.34 - 0.14 * np.sqrt(vapour_pressure))
        * _cloudiness_factor(ratio)
    )


def fao56_net_longwave_hourly(
    temperature, vapour_pressure, shortwave_down, clear_sky_shortwave, night_ratio=None
):
    """Net outgoing longwave radiation of an hour (or shorter period), FAO-56 eq. 39.

    FAO-56 (pp. 74-75) applies eq. 39 to hourly periods with
    ``sigma T_hr^4`` in place of the mean of ``Tmax^4`` and ``Tmin^4`` and
    sigma = 4.903e-9 / 24 = 2.043e-10 MJ K-4 m-2 hour-1:
    ``R_nl = sigma T^4 (0.34 - 0.14 sqrt(e_a)) (1.35 R_s / R_so - 0.35)``.
    The ratio is held within 0.3..1.0 as in :func:`fao56_net_longwave_daily`.

    At night (``R_so`` zero) R_s / R_so says nothing about cloud; FAO-56 sets
    it to the ratio of a period 2-3 hours before sunset, "before the sun angle
    becomes small" (the hour with ``omega_s - 0.79 <= omega <= omega_s - 0.52``),
    or, more roughly, to 0.4-0.6 in humid and sub-humid and 0.7-0.8 in arid
    and semi-arid climates (0.3 presumes total cloud cover).  The caller
    passes that value as ``night_ratio``; FAO-56 Example 19 assumes 0.8.  For
    a period shorter than an hour multiply the result by its length in hours.

    Parameters
    ----------
    temperature : float or array_like
        Mean air temperature of the hour [K].
    vapour_pressure : float or array_like
        Mean actual vapour pressure of the hour (eq. 54) [kPa].
    shortwave_down : float or array_like
        Incoming shortwave radiation of the hour [MJ m-2 hour-1].
    clear_sky_shortwave : float or array_like
        Clear-sky shortwave of the hour (eq. 37 with the hourly R_a of
        eq. 28) [MJ m-2 hour-1].
    night_ratio : float or array_like, optional
        R_s / R_so to use where ``clear_sky_shortwave`` is zero; without it
        the result is NaN there [1].

    Returns
    -------
    R_nl : float or array
        Net outgoing longwave radiation, positive = loss [MJ m-2 hour-1].
    """
    sunlit = clear_sky_shortwave > 0.0
    night = np.nan if night_ratio is None else night_ratio
    ratio = _where(sunlit, shortwave_down / _where(sunlit, clear_sky_shortwave, 1.0), night)
    t2 = temperature * temperature
    return (
        STEFAN_BOLTZMANN_DAILY
        / 24.0
        * (t2 * t2)
        * (0.34 - 0.14 * np.sqrt(vapour_pressure))
        * _cloudiness_factor(ratio)
    )


def fao56_net_radiation_components_daily(
    shortwave_down,
    tmax,
    tmin,
    vapour_pressure,
    latitude,
    day_of_year,
    elevation=0.0,
    albedo=0.23,
    *,
    extraterrestrial=None,
):
    """Every term of the FAO-56 daily net radiation (eqs. 21, 37, 38, 39, 40).

    Parameters
    ----------
    shortwave_down : float or array_like
        Incoming shortwave radiation of the day R_s [MJ m-2 day-1].
    tmax : float or array_like
        Daily maximum air temperature [K].
    tmin : float or array_like
        Daily minimum air temperature [K].
    vapour_pressure : float or array_like
        Mean daily actual vapour pressure [kPa].
    latitude : float or array_like
        Latitude, north positive [deg].
    day_of_year : int or array_like
        Day of the year J [1].
    elevation : float or array_like, optional
        Elevation above sea level, for eq. 37 [m].
    albedo : float or array_like, optional
        Surface albedo; 0.23 is the FAO-56 grass reference [1].
    extraterrestrial : float or array_like, optional
        R_a of eq. 21 for ``latitude`` and ``day_of_year`` when the caller has it
        already (then ``latitude`` is not used) [MJ m-2 day-1].

    Returns
    -------
    dict
        ``extraterrestrial`` (R_a, eq. 21), ``clear_sky_shortwave`` (R_so,
        eq. 37), ``net_shortwave`` (R_ns, eq. 38), ``net_longwave`` (R_nl,
        eq. 39, positive = loss) and ``net_radiation`` (R_n, eq. 40), all
        [MJ m-2 day-1].
    """
    ra = extraterrestrial_daily(latitude, day_of_year) if extraterrestrial is None else extraterrestrial
    rso = clear_sky_shortwave_fao56(ra, elevation)
    rns = net_shortwave(albedo, shortwave_down)
    rnl = fao56_net_longwave_daily(tmax, tmin, vapour_pressure, shortwave_down, rso)
    return {
        "extraterrestrial": ra,
        "clear_sky_shortwave": rso,
        "net_shortwave": rns,
        "net_longwave": rnl,
        "net_radiation": rns - rnl,
    }


def fao56_net_radiation_daily(
    shortwave_down,
    tmax,
    tmin,
    vapour_pressure,
    latitude,
    day_of_year,
    elevation=0.0,
    albedo=0.23,
):
    """Daily net radiation by FAO-56 (eqs. 21, 37, 38, 39, 40).

    Parameters
    ----------
    shortwave_down : float or array_like
        Incoming shortwave radiation of the day R_s [MJ m-2 day-1].
    tmax : float or array_like
        Daily maximum air temperature [K].
    tmin : float or array_like
        Daily minimum air temperature [K].
    vapour_pressure : float or array_like
        Mean daily actual vapour pressure [kPa].
    latitude : float or array_like
        Latitude, north positive [deg].
    day_of_year : int or array_like
        Day of the year J [1].
    elevation : float or array_like, optional
        Elevation above sea level, for eq. 37 [m].
    albedo : float or array_like, optional
        Surface albedo; 0.23 is the FAO-56 grass reference [1].

    Returns
    -------
    R_n : float or array
        ``(1 - albedo) R_s - R_nl``, positive = gain [MJ m-2 day-1].
    """
    return fao56_net_radiation_components_daily(
        shortwave_down, tmax, tmin, vapour_pressure, latitude, day_of_year, elevation, albedo
    )["net_radiation"]


def sinusoidal_daily_bisht_2005(instant_net_radiation, utc_hour, sunrise, sunset):
    """Daytime net radiation total from one instant, sinusoidal model of Bisht et al. (2005).

    Net radiation is taken to follow ``R_n(t) = R_n,max sin(pi (t - t_rise) / N)``
    between sunrise and sunset (``N = t_set - t_rise``), so one instantaneous
    value fixes ``R_n,max`` and the daytime integral is ``2 N R_n,max / pi``
    (hours converted to seconds, J to MJ).

    The result is the **daytime** total (sunrise to sunset), not a 24-hour
    total: the night-time (usually negative) part is not included.

    Parameters
    ----------
    instant_net_radiation : float or array_like
        Net radiation at the overpass time [W m-2].
    utc_hour : float or array_like
        Overpass time, UTC decimal hours [hour].
    sunrise : float or array_like
        Sunrise, UTC decimal hours (see ``solar.sunrise_sunset``) [hour].
    sunset : float or array_like
        Sunset, UTC decimal hours [hour].

    Returns
    -------
    R_n,day : float or array
        Daytime net radiation total [MJ m-2 day-1]; NaN where the overpass is
        not strictly between sunrise and sunset (times compared modulo 24 h,
        so UTC day boundaries do not matter) or the day has no daylight.
    """
    day_length = sunset - sunrise
    phase = np.mod(utc_hour - sunrise, 24.0)
    inside = (day_length > 0.0) & (phase > 0.0) & (phase < day_length)
    shape = np.sin(np.pi * phase / _where(day_length > 0.0, day_length, 1.0))
    peak = instant_net_radiation / _where(inside, shape, 1.0)
    total = 2.0 * day_length * _SECONDS_PER_HOUR * peak / np.pi * _MJ_PER_J
    return _where(inside, total, np.nan)


def shortwave_ratio_daily_jackson_1983(instant_net_radiation, instant_shortwave, daily_shortwave):
    """Daily net radiation by shortwave-ratio scaling, after Jackson et al. (1983).

    ``R_n,day = R_n,inst R_s,day / R_s,inst``: the instant's ratio of net
    radiation to incoming shortwave is assumed to hold for the whole day.
    When ``daily_shortwave`` is a 24-hour total (as daily products of
    radledger are), the result is a 24-hour total; it carries the night-time
    longwave loss only through that assumed constant ratio.

    Parameters
    ----------
    instant_net_radiation : float or array_like
        Net radiation at the overpass time [W m-2].
    instant_shortwave : float or array_like
        Incoming shortwave at the overpass time [W m-2].
    daily_shortwave : float or array_like
        Incoming shortwave total of the day [MJ m-2 day-1].

    Returns
    -------
    R_n,day : float or array
        Daily net radiation, same period as ``daily_shortwave``
        [MJ m-2 day-1]; NaN where ``instant_shortwave <= 0``.
    """
    sunlit = instant_shortwave > 0.0
    ratio = daily_shortwave / _where(sunlit, instant_shortwave, 1.0)
    return _where(sunlit, instant_net_radiation * ratio, np.nan)
