"""Pure, array-agnostic physics of surface net radiation.

Every function takes Python floats, NumPy, Dask or xarray arrays (Dask stays
lazy) and returns the same kind; none does I/O.  Units: temperatures [K],
vapour pressure [kPa], angles of latitude/longitude [deg], declination and
hour angle [rad], instantaneous fluxes [W m-2], daily totals [MJ m-2 day-1].
Sign convention: positive = energy gained by the surface; net longwave is
reported as a loss (``R_n = R_ns - R_nl``).
"""

from __future__ import annotations

from .constants import (
    SOLAR_CONSTANT,
    SOLAR_CONSTANT_W,
    STEFAN_BOLTZMANN,
    STEFAN_BOLTZMANN_DAILY,
    W_TO_MJ_DAY,
    ZERO_CELSIUS,
)
from .daily import (
    RELATIVE_SHORTWAVE_LIMITS,
    fao56_net_longwave_daily,
    fao56_net_longwave_hourly,
    fao56_net_radiation_components_daily,
    fao56_net_radiation_daily,
    shortwave_ratio_daily_jackson_1983,
    sinusoidal_daily_bisht_2005,
)
from .ephemeris import (
    sun_distance,
    DELTA_T,
    extraterrestrial_instant_precise,
    julian_day,
    michalsky_1988,
    sun_position,
)
from .diurnal import PARTON_LOGAN_1981_PARAMETERS, parton_logan_1981
from .emissivity import (
    build_lookup,
    emissivity_from_classes,
    missing_classes,
    sobrino_2004_ndvi,
)
from .humidity import (
    mean_saturation_vapour_pressure,
    saturation_vapour_pressure,
    vapour_pressure_from_dewpoint,
    vapour_pressure_from_relative_humidity,
)
from .longwave import (
    CLEARNESS_MIN_SUN_ELEVATION,
    CLOUD_MODELS,
    SKY_EMISSIVITY_MODELS,
    brutsaert_1975,
    crawford_duchon_1999,
    idso_1981,
    idso_jackson_1969,
    longwave_down,
    low_sun,
    net_longwave,
    net_radiation_instant,
    prata_1996,
    satterlund_1979,
    sky_emissivity,
    surface_emission,
    swinbank_1963,
)
from .shortwave import (
    BEAM_DIFFUSE_COEFFICIENTS,
    atmospheric_pressure,
    clear_sky_shortwave_beam_diffuse,
    clear_sky_shortwave_fao56,
    net_shortwave,
    precipitable_water,
)
from .solar import (
    cos_zenith,
    day_of_year,
    daylight_hours,
    extraterrestrial_daily,
    extraterrestrial_hourly,
    extraterrestrial_instant,
    extraterrestrial_period,
    hour_angle,
    inverse_relative_distance,
    seasonal_correction,
    solar_declination,
    sunrise_sunset,
    sunset_hour_angle,
)

__all__ = [
    # constants
    "STEFAN_BOLTZMANN",
    "STEFAN_BOLTZMANN_DAILY",
    "SOLAR_CONSTANT",
    "SOLAR_CONSTANT_W",
    "W_TO_MJ_DAY",
    "ZERO_CELSIUS",
    # solar
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
    # precise sun at an instant
    "DELTA_T",
    "julian_day",
    "michalsky_1988",
    "sun_position",
    "extraterrestrial_instant_precise",
    "sun_distance",
    # shortwave
    "net_shortwave",
    "atmospheric_pressure",
    "clear_sky_shortwave_fao56",
    "precipitable_water",
    "clear_sky_shortwave_beam_diffuse",
    "BEAM_DIFFUSE_COEFFICIENTS",
    # longwave
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
    # humidity
    "saturation_vapour_pressure",
    "vapour_pressure_from_dewpoint",
    "vapour_pressure_from_relative_humidity",
    "mean_saturation_vapour_pressure",
    # daily
    "RELATIVE_SHORTWAVE_LIMITS",
    "fao56_net_longwave_daily",
    "fao56_net_longwave_hourly",
    "fao56_net_radiation_components_daily",
    "fao56_net_radiation_daily",
    "sinusoidal_daily_bisht_2005",
    "shortwave_ratio_daily_jackson_1983",
    # diurnal air temperature
    "PARTON_LOGAN_1981_PARAMETERS",
    "parton_logan_1981",
    # emissivity
    "build_lookup",
    "emissivity_from_classes",
    "missing_classes",
    "sobrino_2004_ndvi",
]
