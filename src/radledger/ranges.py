"""Physical ranges of decoded inputs: outside them a value is implausible, set to NaN and flagged."""

from __future__ import annotations

__all__ = ["PHYSICAL_RANGES"]

# Physical ranges after decoding (internal units).  Values outside are set to
# NaN and flagged `out_of_range`.  Common practice, generous on purpose: they
# catch wrong decoding and sensor garbage, not unusual weather.
PHYSICAL_RANGES: dict[str, tuple[float, float]] = {
    "albedo": (0.0, 1.0),                         # [1]
    "surface_temperature": (180.0, 373.0),        # [K]
    "air_temperature": (180.0, 340.0),            # [K]
    "air_temperature_max": (180.0, 340.0),
    "air_temperature_min": (180.0, 340.0),
    "dewpoint_temperature": (160.0, 320.0),
    "vapour_pressure": (0.0, 8.0),                # [kPa] (e deg at 41 degC is ~7.8 kPa)
    "relative_humidity": (0.0, 100.0),            # [%]
    "shortwave_down": (0.0, 1500.0),              # [W m-2] scenes
    "shortwave_down_day": (0.0, 45.0),            # [MJ m-2 day-1] days (Ra < 45 everywhere)
    "elevation": (-500.0, 9000.0),                # [m]
}

