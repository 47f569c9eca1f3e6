"""Air humidity: saturation and actual vapour pressure (FAO-56 chapter 3).

Temperatures are in kelvin at every function; the FAO-56 formulas, written in
degC, are applied to ``T_C = T_K - 273.15``.  Vapour pressure is in kPa.
Every function accepts Python floats, NumPy, Dask or xarray arrays and returns
the same kind.

References
----------
.. [1] Allen, R. G., Pereira, L. S., Raes, D., Smith, M. (1998). Crop
   evapotranspiration. FAO Irrigation and Drainage Paper 56, FAO, Rome.
   Eqs. 11, 12, 14, 19 and 54.
"""

from __future__ import annotations

import numpy as np

from .constants import ZERO_CELSIUS

__all__ = [
    "saturation_vapour_pressure",
    "vapour_pressure_from_dewpoint",
    "vapour_pressure_from_relative_humidity",
    "mean_saturation_vapour_pressure",
]


def saturation_vapour_pressure(temperature):
    """Saturation vapour pressure over water, FAO-56 eq. 11 (Tetens form).

    Parameters
    ----------
    temperature : float or array_like
        Air temperature [K].

    Returns
    -------
    e_sat : float or array
        ``0.6108 exp(17.27 T / (T + 237.3))`` with T in degC [kPa].
    """
    t_c = temperature - ZERO_CELSIUS
    return 0.6108 * np.exp(17.27 * t_c / (t_c + 237.3))


def vapour_pressure_from_dewpoint(dewpoint_temperature):
    """Actual vapour pressure from the dew point, FAO-56 eq. 14.

    Parameters
    ----------
    dewpoint_temperature : float or array_like
        Dew-point temperature [K].

    Returns
    -------
    e_a : float or array
        Saturation vapour pressure at the dew point [kPa].
    """
    return saturation_vapour_pressure(dewpoint_temperature)


def vapour_pressure_from_relative_humidity(relative_humidity, air_temperature):
    """Actual vapour pressure from relative humidity at one temperature.

    ``e_a = RH / 100 e_sat(T)``: FAO-56 eq. 54 (hourly), and eq. 19 with a
    single temperature in place of the mean of e_sat(Tmax) and e_sat(Tmin).

    Parameters
    ----------
    relative_humidity : float or array_like
        Relative humidity [percent], 0..100.
    air_temperature : float or array_like
        Air temperature at which RH was measured [K].

    Returns
    -------
    e_a : float or array
        Actual vapour pressure [kPa].
    """
    return relative_humidity / 100.0 * saturation_vapour_pressure(air_temperature)


def mean_saturation_vapour_pressure(tmax, tmin):
    """Mean saturation vapour pressure of a day, FAO-56 eq. 12.

    Parameters
    ----------
    tmax : float or array_like
        Daily maximum air temperature [K].
    tmin : float or array_like
        Daily minimum air temperature [K].

    Returns
    -------
    e_s : float or array
        ``(e_sat(Tmax) + e_sat(Tmin)) / 2`` [kPa].
    """
    return 0.5 * (saturation_vapour_pressure(tmax) + saturation_vapour_pressure(tmin))
