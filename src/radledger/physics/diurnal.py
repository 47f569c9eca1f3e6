"""Air temperature at an instant from the day's extremes (diurnal temperature models).

A satellite overpass needs the air temperature at its own time, while many
weather products give only the day's maximum and minimum.  Parton & Logan
(1981) [1] describe the day with a truncated sine from the minimum (shortly
after or before sunrise) to sunset, and the night with an exponential decay
from the sunset temperature towards the next minimum.

Every function accepts Python floats, NumPy, Dask or xarray arrays and
returns the same kind.

References
----------
.. [1] Parton, W. J., Logan, J. A. (1981). A model for diurnal variation in
   soil and air temperature. Agricultural Meteorology 23, 205-216.
   https://doi.org/10.1016/0002-1571(81)90105-9
"""

from __future__ import annotations

import numpy as np

from .constants import _where

__all__ = ["PARTON_LOGAN_1981_PARAMETERS", "parton_logan_1981"]

#: Parameters of Parton & Logan (1981) [1], Table 1, fitted to hourly data of
#: a shortgrass prairie site in Colorado: ``a`` shifts the time of the maximum
#: (the daytime sine spans the day length plus 2a) [hour], ``b`` is the
#: night-time decay coefficient [1], ``c`` the lag of the minimum after
#: sunrise [hour].  Values as quoted by secondary sources (the TrenchR
#: documentation and model code citing "Table 1"); the paper itself was not
#: read.  "air-150cm" (screen-level air) is the default of
#: :func:`parton_logan_1981`.
PARTON_LOGAN_1981_PARAMETERS = {
    "air-150cm": {"a": 1.86, "b": 2.20, "c": -0.17},
    "air-10cm": {"a": 1.52, "b": 2.00, "c": -0.18},
    "soil-surface": {"a": 0.50, "b": 1.81, "c": 0.49},
    "soil-10cm": {"a": 0.45, "b": 2.28, "c": 1.83},
}

_AIR = PARTON_LOGAN_1981_PARAMETERS["air-150cm"]


def parton_logan_1981(
    tmax, tmin, hour, sunrise, sunset, *, tmin_next=None, a=_AIR["a"], b=_AIR["b"], c=_AIR["c"]
):
    """Air temperature at an instant from the day's Tmax and Tmin, Parton & Logan (1981).

    Day, from the minimum at ``sunrise + c`` to sunset::

        T = Tmin + (Tmax - Tmin) sin(pi m / (Y + 2 a))

    with ``m`` the hours since the minimum and ``Y`` the day length
    (sunset - sunrise); the sine peaks, at Tmax, at solar noon + a + c, 1.69 h
    after solar noon with the 150-cm air parameters (days shorter than
    2 (a + c) end before the peak).  Night, from sunset to the next minimum::

        T = Tn + (T_set - Tn) exp(-b n / Z)

    with ``T_set`` the day curve at sunset, ``n`` the hours since sunset and
    ``Z = 24 - Y + c`` the hours from sunset to the next minimum.  As
    published, the night curve ends ``(T_set - Tn) exp(-b)`` above ``Tn``
    (11 % of the night's fall for b = 2.2), so the model steps down at the
    next minimum.

    What the caller supplies: the times ``hour``, ``sunrise`` and ``sunset``
    in one clock (e.g. UTC decimal hours from
    :func:`radledger.physics.solar.sunrise_sunset`; times are compared modulo
    24 h).  A night time is read as the night *after* this day's sunset.  So
    for an evening overpass pass the day's Tmax, Tmin and the next day's
    minimum as ``tmin_next``; for an overpass between midnight and sunrise
    pass the *previous* day's Tmax and Tmin and this day's Tmin as
    ``tmin_next``.  Without ``tmin_next`` the night falls towards ``tmin``
    (the day taken to repeat itself), the usual simplification.

    Parameters
    ----------
    tmax : float or array_like
        Maximum air temperature of the day [K].
    tmin : float or array_like
        Minimum air temperature of the day, reached at ``sunrise + c`` [K].
    hour : float or array_like
        Time of the estimate, same clock as ``sunrise`` and ``sunset``
        [hour].
    sunrise : float or array_like
        Time of sunrise [hour].
    sunset : float or array_like
        Time of sunset, after ``sunrise`` (it may exceed 24) [hour].
    tmin_next : float or array_like, optional
        Minimum that the night after this day falls towards; defaults to
        ``tmin`` [K].
    a : float, optional
        Shift of the maximum, the sine spanning Y + 2a; 1.86 for 150-cm air
        [hour].
    b : float, optional
        Night-time decay coefficient; 2.20 for 150-cm air [1].
    c : float, optional
        Lag of the minimum after sunrise; -0.17 for 150-cm air [hour].

    Returns
    -------
    T : float or array
        Air temperature at ``hour`` [K]; NaN in polar day or night (no
        sunrise and sunset, i.e. day length not strictly between 0 and 24 h,
        or a minimum not before sunset).
    """
    day_length = sunset - sunrise
    rise_to_set = day_length - c  # hours from the minimum to sunset
    night_length = 24.0 - rise_to_set  # Z: sunset to the next minimum
    valid = (day_length > 0.0) & (day_length < 24.0) & (rise_to_set > 0.0) & (night_length > 0.0)
    phase = np.mod(hour - (sunrise + c), 24.0)  # hours since the minimum
    span = day_length + 2.0 * a
    amplitude = tmax - tmin
    daytime = tmin + amplitude * np.sin(np.pi * phase / span)
    at_sunset = tmin + amplitude * np.sin(np.pi * rise_to_set / span)
    floor = tmin if tmin_next is None else tmin_next
    since_sunset = phase - rise_to_set
    z = _where(valid, night_length, 1.0)
    night = floor + (at_sunset - floor) * np.exp(-b * since_sunset / z)
    return _where(valid, _where(phase <= rise_to_set, daytime, night), np.nan)
