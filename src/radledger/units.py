"""Unit names and the one conversion at the input edge.

Internally radledger works in K, kPa, W m-2 (scenes), MJ m-2 day-1 (days),
fractions 0..1 and metres.  ``K = degC + 273.15`` (the definition of the Celsius
scale); the FAO-56 formulas are then applied to kelvin values as given.
"""

from __future__ import annotations

from .errors import ConfigError

__all__ = ["UNIT_ALIASES", "canonical_unit", "to_internal"]

# spelling variants a user may write -> canonical name
UNIT_ALIASES: dict[str, str] = {
    "k": "K", "kelvin": "K",
    "degc": "degC", "c": "degC", "°c": "degC", "deg c": "degC", "celsius": "degC", "deg_c": "degC",
    "kpa": "kPa", "hpa": "hPa", "mbar": "hPa", "mb": "hPa", "pa": "Pa",
    "w m-2": "W m-2", "w/m2": "W m-2", "w m^-2": "W m-2", "w/m^2": "W m-2", "w m**-2": "W m-2",
    "mj m-2 day-1": "MJ m-2 day-1", "mj/m2/day": "MJ m-2 day-1", "mj m-2 d-1": "MJ m-2 day-1",
    "mj/m2/d": "MJ m-2 day-1",
    # a mean over the daylight hours (daily shortwave of some gridded products)
    "w m-2 daylight": "W m-2 daylight", "w/m2 daylight": "W m-2 daylight",
    "%": "%", "percent": "%",
    "1": "1", "fraction": "1", "": "1",
    "m": "m", "metre": "m", "meter": "m", "metres": "m", "meters": "m",
}

# (factor, offset): internal = value * factor + offset
_TO_INTERNAL = {
    "K": (1.0, 0.0), "degC": (1.0, 273.15),
    "kPa": (1.0, 0.0), "hPa": (0.1, 0.0), "Pa": (0.001, 0.0),
    "%": (1.0, 0.0), "1": (1.0, 0.0), "m": (1.0, 0.0),
}


def canonical_unit(text: str) -> str:
    """The canonical spelling of a unit, or the text unchanged when unknown."""
    return UNIT_ALIASES.get(" ".join(str(text).strip().lower().split()), str(text).strip())


def to_internal(unit: str, *, target: str | None = None) -> tuple[float, float]:
    """``(factor, offset)`` so that ``internal = stored_physical * factor + offset``.

    ``target`` picks the internal unit where a layer has two legitimate ones
    (shortwave: W m-2 for scenes, MJ m-2 day-1 for days; humidity: % vs 1).
    """
    if unit in ("W m-2", "MJ m-2 day-1"):
        target = target or unit
        if unit == target:
            return (1.0, 0.0)
        return (0.0864, 0.0) if target == "MJ m-2 day-1" else (1 / 0.0864, 0.0)
    if unit == "1" and target == "%":
        return (100.0, 0.0)
    try:
        return _TO_INTERNAL[unit]
    except KeyError:
        raise ConfigError(f"unknown unit {unit!r}") from None
