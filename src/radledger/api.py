"""The Python API: net radiation for notebooks and other tools.

Thin wrappers over :mod:`radledger.physics` that pick methods by name, as the
run config does.  Inputs may be floats, NumPy, Dask or xarray arrays
(broadcasting as NumPy does) and come back as the same kind; Dask stays lazy.
"""

from __future__ import annotations

from .physics.daily import fao56_net_radiation_daily
from .physics.longwave import (
    CLOUD_MODELS,
    SKY_EMISSIVITY_MODELS,
    crawford_duchon_1999,
    longwave_down,
    net_longwave,
    sky_emissivity as _sky_emissivity,
)
from .physics.shortwave import net_shortwave

__all__ = ["net_radiation", "daily_net_radiation"]


def net_radiation(
    albedo,
    shortwave_down,
    surface_temperature,
    air_temperature,
    vapour_pressure,
    surface_emissivity,
    *,
    sky_emissivity="brutsaert",
    clouds="none",
    clear_sky_shortwave=None,
):
    """Instantaneous surface net radiation.

    ``R_n = (1 - albedo) R_s - eps_s (sigma T_s^4 - eps_sky sigma T_a^4)``,
    positive when the surface gains energy.

    Parameters
    ----------
    albedo : float or array_like
        Surface albedo, 0..1 [1].
    shortwave_down : float or array_like
        Incoming shortwave radiation [W m-2].
    surface_temperature : float or array_like
        Land surface (skin) temperature [K].
    air_temperature : float or array_like
        Screen-level air temperature [K].
    vapour_pressure : float or array_like
        Screen-level actual vapour pressure [kPa].
    surface_emissivity : float or array_like
        Broadband surface emissivity [1].
    sky_emissivity : str, optional
        Clear-sky emissivity model, one of
        ``radledger.physics.SKY_EMISSIVITY_MODELS``: "brutsaert" (default),
        "swinbank", "idso-jackson", "idso", "satterlund", "prata".
    clouds : str, optional
        "none" (clear sky, default) or "crawford-duchon" (cloud fraction from
        ``1 - R_s / R_so``; needs ``clear_sky_shortwave``; NaN where that is
        zero, i.e. at night).
    clear_sky_shortwave : float or array_like, optional
        Clear-sky incoming shortwave for the same time and place [W m-2].

    Returns
    -------
    R_n : float or array
        Net radiation [W m-2].

    Raises
    ------
    ValueError
        For an unknown model name (listing the valid ones), or
        ``clouds="crawford-duchon"`` without ``clear_sky_shortwave``.
    """
    if sky_emissivity not in SKY_EMISSIVITY_MODELS:
        raise ValueError(
            f"unknown sky_emissivity {sky_emissivity!r}; use one of: "
            f"{', '.join(SKY_EMISSIVITY_MODELS)}"
        )
    if clouds not in CLOUD_MODELS:
        raise ValueError(f"unknown clouds {clouds!r}; use one of: {', '.join(CLOUD_MODELS)}")
    if clouds == "crawford-duchon" and clear_sky_shortwave is None:
        raise ValueError(
            'clouds="crawford-duchon" needs clear_sky_shortwave (W m-2) for the same '
            'time and place; pass it, or use clouds="none"'
        )
    eps_sky = _sky_emissivity(air_temperature, vapour_pressure, sky_emissivity)
    if clouds == "crawford-duchon":
        eps_sky = crawford_duchon_1999(eps_sky, shortwave_down, clear_sky_shortwave)
    r_ld = longwave_down(eps_sky, air_temperature)
    r_nl = net_longwave(surface_emissivity, surface_temperature, r_ld)
    return net_shortwave(albedo, shortwave_down) - r_nl


def daily_net_radiation(
    shortwave_down,
    air_temperature_max,
    air_temperature_min,
    vapour_pressure,
    *,
    latitude,
    day_of_year,
    elevation=0.0,
    albedo=0.23,
):
    """Daily net radiation by FAO-56 (eqs. 21, 37, 38, 39, 40).

    Parameters
    ----------
    shortwave_down : float or array_like
        Incoming shortwave radiation of the day [MJ m-2 day-1].
    air_temperature_max : float or array_like
        Daily maximum air temperature [K].
    air_temperature_min : float or array_like
        Daily minimum air temperature [K].
    vapour_pressure : float or array_like
        Mean daily actual vapour pressure [kPa].
    latitude : float or array_like
        Latitude, north positive [deg].
    day_of_year : int or array_like
        Day of the year, 1..366 [1].
    elevation : float or array_like, optional
        Elevation above sea level [m].
    albedo : float or array_like, optional
        Surface albedo; 0.23 is the FAO-56 grass reference [1].

    Returns
    -------
    R_n : float or array
        Daily net radiation [MJ m-2 day-1].
    """
    return fao56_net_radiation_daily(
        shortwave_down,
        air_temperature_max,
        air_temperature_min,
        vapour_pressure,
        latitude,
        day_of_year,
        elevation=elevation,
        albedo=albedo,
    )
