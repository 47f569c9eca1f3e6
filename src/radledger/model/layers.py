"""The input layers radledger knows: internal unit, the units a user may declare, physical range.

One table, read by the config validator (which units a layer accepts), the
input decoding (what unit to convert to), the kernels (range checks) and the
unit-plausibility checks.  Internally radledger works in K, kPa, W m-2
(scenes), MJ m-2 day-1 (days), fractions 0..1 and metres.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..kinds import TimeKind

__all__ = ["Layer", "LAYERS", "PHYSICAL_RANGES", "HUMIDITY_LAYERS", "SNOW_LAYERS", "SCENE_LAYERS", "DAY_LAYERS",
           "STATIC_ONLY", "ALL_LAYERS", "layer_range", "SHORTWAVE_UNITS", "NDSI_SNOW_THRESHOLD"]


@dataclass(frozen=True)
class Layer:
    """One input layer.

    ``units``: what ``layers.NAME.units`` may say, the internal unit first.
    ``valid``: physical range after decoding (internal units); outside it a
    value is set to NaN and flagged ``out_of_range``.  Common practice,
    generous on purpose: the ranges catch wrong decoding and sensor garbage,
    not unusual weather.
    """
    name: str
    units: tuple[str, ...]
    valid: tuple[float, float] | None
    categorical: bool = False

    @property
    def internal_unit(self) -> str:
        return self.units[0]


_DEGREES = ("K", "degC")
LAYERS: dict[str, Layer] = {x.name: x for x in [
    Layer("albedo", ("1",), (0.0, 1.0)),
    Layer("surface_temperature", _DEGREES, (180.0, 373.0)),
    Layer("air_temperature", _DEGREES, (180.0, 340.0)),
    Layer("air_temperature_max", _DEGREES, (180.0, 340.0)),
    Layer("air_temperature_min", _DEGREES, (180.0, 340.0)),
    Layer("dewpoint_temperature", _DEGREES, (160.0, 320.0)),
    Layer("vapour_pressure", ("kPa", "hPa", "Pa"), (0.0, 8.0)),      # e deg at 41 degC is ~7.8 kPa
    Layer("relative_humidity", ("%", "1"), (0.0, 100.0)),
    # scenes hold W m-2, days MJ m-2 day-1 (layer_range and SHORTWAVE_UNITS say which units each takes)
    Layer("shortwave_down", ("W m-2", "MJ m-2 day-1", "W m-2 daylight"), (0.0, 1500.0)),
    Layer("land_cover", ("1",), None, categorical=True),
    Layer("elevation", ("m",), (-500.0, 9000.0)),
    # snow on the ground (optional): the snow-covered fraction of each pixel, or the Normalized
    # Difference Snow Index, read as snow where NDSI >= NDSI_SNOW_THRESHOLD (Hall et al. 1995)
    Layer("snow_cover", ("1",), (0.0, 1.0)),
    Layer("ndsi", ("1",), (-1.0, 1.0)),
]}

#: NDSI at and above which a pixel is snow-covered (Hall, Riggs & Salomonson 1995)
NDSI_SNOW_THRESHOLD = 0.4

#: daily shortwave [MJ m-2 day-1]: extraterrestrial radiation stays below 45 everywhere
DAILY_SHORTWAVE_RANGE = (0.0, 45.0)

PHYSICAL_RANGES: dict[str, tuple[float, float]] = {
    **{n: x.valid for n, x in LAYERS.items() if x.valid is not None},
    "shortwave_down_day": DAILY_SHORTWAVE_RANGE,
}

HUMIDITY_LAYERS = ("vapour_pressure", "dewpoint_temperature", "relative_humidity")
SNOW_LAYERS = ("snow_cover", "ndsi")          # the first given is used
SCENE_LAYERS = ("albedo", "surface_temperature", "air_temperature", "shortwave_down") + HUMIDITY_LAYERS \
    + SNOW_LAYERS
DAY_LAYERS = ("shortwave_down", "air_temperature_max", "air_temperature_min", "albedo") + HUMIDITY_LAYERS \
    + SNOW_LAYERS
STATIC_ONLY = ("land_cover", "elevation")
ALL_LAYERS = tuple(dict.fromkeys(SCENE_LAYERS + DAY_LAYERS + STATIC_ONLY))


#: the units shortwave may be declared in, per time kind; the first is the internal unit.  Days: a
#: daily total, a 24-hour mean (x 0.0864) or a mean over the daylight hours (x N 3600 / 1e6, with the
#: day length N of FAO-56 eq. 34 for each pixel and date).
SHORTWAVE_UNITS = {TimeKind.SCENES: ("W m-2",),
                   TimeKind.DAYS: ("MJ m-2 day-1", "W m-2", "W m-2 daylight")}


def layer_range(name: str, kind: TimeKind = TimeKind.SCENES) -> tuple[float, float] | None:
    """The physical range of ``name`` for products of ``kind`` (daily shortwave differs)."""
    if name == "shortwave_down" and kind is TimeKind.DAYS:
        return DAILY_SHORTWAVE_RANGE
    return LAYERS[name].valid
