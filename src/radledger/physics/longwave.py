"""Longwave radiation: emission, clear-sky and cloudy-sky emissivity, net longwave.

Sign convention (the project's): net longwave ``R_nl`` is the net *loss*,
``R_nl = eps_s sigma T_s^4 - eps_s R_ld``, where the surface absorbs
``eps_s`` of the downwelling longwave ``R_ld`` and reflects the rest; net
radiation is ``R_n = R_ns - R_nl``, positive when the surface gains energy.

Temperatures in kelvin, vapour pressure in kPa (each published formula's own
unit, hPa for most, is converted inside), fluxes in W m-2.  Every function
accepts Python floats, NumPy, Dask or xarray arrays and returns the same kind.

References
----------
.. [1] Brutsaert, W. (1975). On a derivable formula for long-wave radiation
   from clear skies. Water Resources Research 11(5), 742-744.
   https://doi.org/10.1029/WR011i005p00742
.. [2] Swinbank, W. C. (1963). Long-wave radiation from clear skies.
   Q. J. R. Meteorol. Soc. 89(381), 339-348. https://doi.org/10.1002/qj.49708938105
.. [3] Idso, S. B., Jackson, R. D. (1969). Thermal radiation from the
   atmosphere. J. Geophys. Res. 74(23), 5397-5403.
   https://doi.org/10.1029/JC074i023p05397
.. [4] Idso, S. B. (1981). A set of equations for full spectrum and 8- to
   14-um and 10.5- to 12.5-um thermal radiation from cloudless skies. Water
   Resources Research 17(2), 295-304. https://doi.org/10.1029/WR017i002p00295
.. [5] Satterlund, D. R. (1979). An improved equation for estimating
   long-wave radiation from the atmosphere. Water Resources Research 15(6),
   1649-1650. https://doi.org/10.1029/WR015i006p01649
.. [6] Prata, A. J. (1996). A new long-wave formula for estimating downward
   clear-sky radiation at the surface. Q. J. R. Meteorol. Soc. 122(533),
   1127-1151. https://doi.org/10.1002/qj.49712253306
.. [7] Crawford, T. M., Duchon, C. E. (1999). An improved parameterization for
   estimating effective atmospheric emissivity for use in calculating daytime
   downwelling longwave radiation. J. Appl. Meteorol. 38(4), 474-480.
   https://doi.org/10.1175/1520-0450(1999)038<0474:AIPFEE>2.0.CO;2
.. [8] Flerchinger, G. N., Xaio, W., Marks, D., Sauer, T. J., Yu, Q. (2009).
   Comparison of algorithms for incoming atmospheric long-wave radiation.
   Water Resources Research 45, W03423. https://doi.org/10.1029/2008WR007394

Notes on coefficients
---------------------
The coefficients were checked against the equations of Flerchinger et al.
(2009) [8], Table 1, as reproduced (with the corrections of its known typos
in Prata's 46.5 and Satterlund's exponent) in public snow-hydrology code, and
against land-surface-model code citing Idso (1981) and Idso & Jackson (1969);
the original papers were not in front of the author, so treat them as "from
memory / secondary source" until checked against [1]-[6].
"""

from __future__ import annotations

import numpy as np

from .constants import STEFAN_BOLTZMANN, _clip, _where

__all__ = [
    "surface_emission",
    "brutsaert_1975",
    "swinbank_1963",
    "idso_jackson_1969",
    "idso_1981",
    "satterlund_1979",
    "prata_1996",
    "SKY_EMISSIVITY_MODELS",
    "sky_emissivity",
    "CLOUD_MODELS",
    "CLEARNESS_MIN_SUN_ELEVATION",
    "low_sun",
    "crawford_duchon_1999",
    "longwave_down",
    "net_longwave",
    "net_radiation_instant",
]


def _fourth_power(x):
    # x*x then squared: cheaper than x**4 and the same on every array kind.
    x2 = x * x
    return x2 * x2


def surface_emission(temperature, emissivity=1.0):
    """Longwave emission of a grey surface, Stefan-Boltzmann law.

    Parameters
    ----------
    temperature : float or array_like
        Surface (skin) temperature [K].
    emissivity : float or array_like, optional
        Broadband surface emissivity, 0..1 [1].

    Returns
    -------
    R_lu : float or array
        ``eps sigma T^4`` with sigma = 5.670374419e-8 W m-2 K-4 (CODATA 2018)
        [W m-2].
    """
    return emissivity * STEFAN_BOLTZMANN * _fourth_power(temperature)


def brutsaert_1975(air_temperature, vapour_pressure):
    """Clear-sky emissivity of Brutsaert (1975) [1].

    ``eps = 1.24 (e / T) ** (1/7)`` with e in hPa and T in K (Brutsaert's
    eq. 11), i.e. ``1.24 * 10 ** (1/7) (e_kPa / T) ** (1/7) = 1.7230...``
    times ``(e_kPa / T) ** (1/7)``; the rounded 1.72 is deliberately not used.

    Parameters
    ----------
    air_temperature : float or array_like
        Screen-level air temperature [K].
    vapour_pressure : float or array_like
        Screen-level actual vapour pressure [kPa].

    Returns
    -------
    eps_clear : float or array
        Clear-sky effective emissivity of the atmosphere [1].
    """
    return 1.24 * (10.0 * vapour_pressure / air_temperature) ** (1.0 / 7.0)


def swinbank_1963(air_temperature):
    """Clear-sky emissivity of Swinbank (1963) [2].

    Swinbank fitted the downwelling flux ``R_ld = 5.31e-13 T^6`` W m-2
    (Flerchinger et al. 2009 [8], Table 1; secondary source); the emissivity
    is that flux over ``sigma T^4``, i.e. ``5.31e-13 T^2 / sigma``
    (= 9.364e-6 T^2).  The shorter ``9.2e-6 T^2`` also quoted in the
    literature gives about 2 % less (from memory).

    Parameters
    ----------
    air_temperature : float or array_like
        Screen-level air temperature [K].

    Returns
    -------
    eps_clear : float or array
        Clear-sky effective emissivity of the atmosphere [1].
    """
    return 5.31e-13 * air_temperature * air_temperature / STEFAN_BOLTZMANN


def idso_jackson_1969(air_temperature):
    """Clear-sky emissivity of Idso & Jackson (1969) [3].

    ``eps = 1 - 0.261 exp(-7.77e-4 (273 - T)^2)`` with T in K (273 as in the
    paper's own formula; secondary source, see module notes).

    Parameters
    ----------
    air_temperature : float or array_like
        Screen-level air temperature [K].

    Returns
    -------
    eps_clear : float or array
        Clear-sky effective emissivity of the atmosphere [1].
    """
    dt = 273.0 - air_temperature
    return 1.0 - 0.261 * np.exp(-7.77e-4 * dt * dt)


def idso_1981(air_temperature, vapour_pressure):
    """Clear-sky emissivity of Idso (1981) [4], full spectrum.

    ``eps = 0.70 + 5.95e-5 e exp(1500 / T)`` with e in hPa and T in K
    (secondary source, see module notes).

    The fit exceeds 1 near saturation above about 25 degC (e.g. 1.10 at
    33 degC and 5 kPa), where an emissivity above one is unphysical; the
    result is therefore capped at 1.  The coefficients are left as published.

    Parameters
    ----------
    air_temperature : float or array_like
        Screen-level air temperature [K].
    vapour_pressure : float or array_like
        Screen-level actual vapour pressure [kPa].

    Returns
    -------
    eps_clear : float or array
        Clear-sky effective emissivity of the atmosphere, at most 1 [1].
    """
    eps = 0.70 + 5.95e-5 * (10.0 * vapour_pressure) * np.exp(1500.0 / air_temperature)
    return np.minimum(eps, 1.0)


def satterlund_1979(air_temperature, vapour_pressure):
    """Clear-sky emissivity of Satterlund (1979) [5].

    ``eps = 1.08 [1 - exp(-e ** (T / 2016))]`` with e in hPa and T in K
    (secondary source, see module notes).

    Parameters
    ----------
    air_temperature : float or array_like
        Screen-level air temperature [K].
    vapour_pressure : float or array_like
        Screen-level actual vapour pressure [kPa].

    Returns
    -------
    eps_clear : float or array
        Clear-sky effective emissivity of the atmosphere [1].
    """
    return 1.08 * (1.0 - np.exp(-((10.0 * vapour_pressure) ** (air_temperature / 2016.0))))


def prata_1996(air_temperature, vapour_pressure):
    """Clear-sky emissivity of Prata (1996) [6].

    ``eps = 1 - (1 + w) exp(-(1.2 + 3 w) ** 0.5)`` with the precipitable
    water ``w = 46.5 e / T`` in cm, e in hPa and T in K (secondary source,
    see module notes).  Always between 0.66 and 1.

    Parameters
    ----------
    air_temperature : float or array_like
        Screen-level air temperature [K].
    vapour_pressure : float or array_like
        Screen-level actual vapour pressure [kPa].

    Returns
    -------
    eps_clear : float or array
        Clear-sky effective emissivity of the atmosphere [1].
    """
    w = 46.5 * (10.0 * vapour_pressure) / air_temperature
    return 1.0 - (1.0 + w) * np.exp(-np.sqrt(1.2 + 3.0 * w))


#: Names accepted by :func:`sky_emissivity` (and the run config's
#: ``methods.sky_emissivity``).
SKY_EMISSIVITY_MODELS = ("brutsaert", "swinbank", "idso-jackson", "idso", "satterlund", "prata")

_SKY_MODELS = {
    "brutsaert": lambda t, e: brutsaert_1975(t, e),
    "swinbank": lambda t, e: swinbank_1963(t),
    "idso-jackson": lambda t, e: idso_jackson_1969(t),
    "idso": lambda t, e: idso_1981(t, e),
    "satterlund": lambda t, e: satterlund_1979(t, e),
    "prata": lambda t, e: prata_1996(t, e),
}


def _check_sky_model(model) -> None:
    if model not in _SKY_MODELS:
        raise ValueError(
            f"unknown sky emissivity model {model!r}; "
            f"use one of: {', '.join(SKY_EMISSIVITY_MODELS)}"
        )


def sky_emissivity(air_temperature, vapour_pressure, model="brutsaert"):
    """Clear-sky emissivity of the atmosphere by a named published model.

    Parameters
    ----------
    air_temperature : float or array_like
        Screen-level air temperature [K].
    vapour_pressure : float or array_like
        Screen-level actual vapour pressure [kPa]; ignored by the
        temperature-only models ("swinbank", "idso-jackson").
    model : str, optional
        One of :data:`SKY_EMISSIVITY_MODELS`.

    Returns
    -------
    eps_clear : float or array
        Clear-sky effective emissivity [1].

    Raises
    ------
    ValueError
        If ``model`` is not one of the names, listing the valid ones.
    """
    _check_sky_model(model)
    return _SKY_MODELS[model](air_temperature, vapour_pressure)


#: Names accepted for the cloud correction (``methods.clouds``).
CLOUD_MODELS = ("none", "crawford-duchon")

#: Sun elevation below which the solar clearness R_s / R_so is not used for
#: clouds [deg].  At a low sun the measured shortwave is small, dominated by
#: diffuse light, terrain and sensor cosine errors, and the clear-sky model
#: is least reliable, so the ratio says little about cloud; 10 deg is common
#: practice.  ASCE-EWRI (2005) uses the ratio only while the sun is above
#: 0.3 rad (about 17 deg) for its hourly cloudiness function and FAO-56
#: (p. 75) takes it from a period 2-3 hours before sunset, "before the sun
#: angle becomes small" (ASCE-EWRI threshold from memory).
CLEARNESS_MIN_SUN_ELEVATION = 10.0


def low_sun(sun_elevation, min_sun_elevation=CLEARNESS_MIN_SUN_ELEVATION):
    """Where the sun is too low for a cloud fraction from R_s / R_so.

    The pixels :func:`crawford_duchon_1999` leaves at clear-sky emissivity
    when given ``sun_elevation``, for a quality flag.

    Parameters
    ----------
    sun_elevation : float or array_like
        Sun elevation angle above the horizon, 90 minus the zenith angle
        (negative at night) [deg].
    min_sun_elevation : float or array_like, optional
        The cut-off, see :data:`CLEARNESS_MIN_SUN_ELEVATION` [deg].

    Returns
    -------
    mask : bool or boolean array
        True where ``sun_elevation < min_sun_elevation`` (night included);
        False where it is NaN [1].
    """
    return sun_elevation < min_sun_elevation


def crawford_duchon_1999(
    clear_sky_emissivity,
    shortwave_down,
    clear_sky_shortwave,
    *,
    sun_elevation=None,
    min_sun_elevation=CLEARNESS_MIN_SUN_ELEVATION,
):
    """All-sky emissivity from the solar clearness, Crawford & Duchon (1999) [7].

    ``eps = c + (1 - c) eps_clear`` with the cloud fraction
    ``c = 1 - R_s / R_so`` limited to [0, 1] (the paper's eq. 20 with
    s = R_s / R_so).  Daytime only: where the clear-sky shortwave is zero or
    missing (night) the cloud fraction is unknown and the result is NaN; the
    caller decides what to use there.

    With ``sun_elevation`` given, the correction is skipped where the sun is
    below ``min_sun_elevation`` (night included): the result there is
    ``eps_clear``, not NaN.  A low sun makes ``R_s / R_so`` meaningless (see
    :data:`CLEARNESS_MIN_SUN_ELEVATION`); flag those pixels with
    :func:`low_sun`.  Without ``sun_elevation`` no cut-off is applied.

    Parameters
    ----------
    clear_sky_emissivity : float or array_like
        Clear-sky emissivity of the atmosphere [1].
    shortwave_down : float or array_like
        Measured or modelled incoming shortwave [W m-2].
    clear_sky_shortwave : float or array_like
        Clear-sky incoming shortwave for the same time and place, same units
        as ``shortwave_down`` [W m-2].
    sun_elevation : float or array_like, optional
        Sun elevation angle for the same time and place, 90 minus the zenith
        angle (e.g. from :func:`radledger.physics.ephemeris.sun_position`)
        [deg].
    min_sun_elevation : float or array_like, optional
        Cut-off for ``sun_elevation``; 10 deg is common practice [deg].

    Returns
    -------
    eps_all : float or array
        All-sky effective emissivity, between ``eps_clear`` and 1 [1]; NaN
        where ``clear_sky_shortwave <= 0`` unless the cut-off applies there.
    """
    daytime = clear_sky_shortwave > 0.0
    ratio = shortwave_down / _where(daytime, clear_sky_shortwave, 1.0)
    cloud = _clip(1.0 - ratio, 0.0, 1.0)
    eps = _where(daytime, cloud + (1.0 - cloud) * clear_sky_emissivity, np.nan)
    if sun_elevation is None:
        return eps
    return _where(low_sun(sun_elevation, min_sun_elevation), clear_sky_emissivity, eps)


def longwave_down(sky_emissivity, air_temperature):
    """Downwelling longwave radiation from the sky.

    Parameters
    ----------
    sky_emissivity : float or array_like
        Effective emissivity of the atmosphere [1].
    air_temperature : float or array_like
        Screen-level air temperature [K].

    Returns
    -------
    R_ld : float or array
        ``eps_sky sigma T_a^4`` [W m-2].
    """
    return sky_emissivity * STEFAN_BOLTZMANN * _fourth_power(air_temperature)


def net_longwave(surface_emissivity, surface_temperature, longwave_down):
    """Net longwave loss of the surface.

    Parameters
    ----------
    surface_emissivity : float or array_like
        Broadband surface emissivity [1].
    surface_temperature : float or array_like
        Surface (skin) temperature [K].
    longwave_down : float or array_like
        Downwelling longwave radiation [W m-2].

    Returns
    -------
    R_nl : float or array
        ``eps_s sigma T_s^4 - eps_s R_ld``; positive when the surface loses
        longwave energy [W m-2].
    """
    return surface_emissivity * (
        STEFAN_BOLTZMANN * _fourth_power(surface_temperature) - longwave_down
    )


def net_radiation_instant(net_shortwave, net_longwave):
    """Net radiation from its shortwave gain and longwave loss (FAO-56 eq. 40).

    Parameters
    ----------
    net_shortwave : float or array_like
        Net shortwave gain R_ns [W m-2].
    net_longwave : float or array_like
        Net longwave loss R_nl [W m-2].

    Returns
    -------
    R_n : float or array
        ``R_ns - R_nl``; positive when the surface gains energy [W m-2].
    """
    return net_shortwave - net_longwave
