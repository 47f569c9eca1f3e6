"""Whole-layer plausibility: do the decoded values fit the declared units?

A decimated sample (overviews where the file has them) is decoded and its
median compared with what each unit implies.  This catches the common slips
(degC declared K, hPa or Pa declared kPa, a missing albedo scale) before any
product is written.  The bounds are common practice, deliberately wide.
"""

from __future__ import annotations

import numpy as np

from .errors import UnitError
from .inputs import LayerSource

__all__ = ["check_sample"]


def _median(a: np.ndarray) -> float | None:
    a = a[np.isfinite(a)]
    return float(np.median(a)) if a.size else None


def check_sample(src: LayerSource, *, kind: str = "scenes") -> None:
    """Raise :class:`UnitError` when ``src``'s values do not fit its declared units."""
    layer = src.layer
    if layer in ("land_cover",):
        return
    med = _median(src.read_sample())
    if med is None:
        return   # all nodata in the sample: products will be NaN and flagged, not an error
    where = f"{src.path}: layer {layer}"
    if layer in ("surface_temperature", "air_temperature", "air_temperature_max", "air_temperature_min",
                 "dewpoint_temperature"):
        if med < 150:
            raise UnitError(f"{where}: median {med:.4g} K after decoding is far too cold; the values look "
                            f"like degC - set layers.{_key(layer)}.units: degC (declared {src.units or 'K'})")
        if med > 400:
            raise UnitError(f"{where}: median {med:.4g} K after decoding is implausible; check "
                            f"layers.{_key(layer)}.units/scale/offset (declared {src.units or 'K'})")
    elif layer == "vapour_pressure":
        if med > 10:
            guess = "hPa" if med < 200 else "Pa"
            raise UnitError(f"{where}: median {med:.4g} kPa after decoding exceeds any saturation vapour "
                            f"pressure on Earth; the values look like {guess} - set "
                            f"layers.vapour_pressure.units: {guess} (declared {src.units or 'kPa'})")
        if med < 0:
            raise UnitError(f"{where}: median {med:.4g} kPa is negative; check scale/offset/nodata")
    elif layer == "albedo":
        if med > 1 or med < 0:
            raise UnitError(f"{where}: median {med:.4g} after decoding lies outside 0..1; set "
                            f"layers.albedo.scale (e.g. 0.001 or 0.0001 for scaled integers) and offset")
    elif layer == "shortwave_down":
        if med < 0:
            raise UnitError(f"{where}: median {med:.4g} is negative; shortwave cannot be negative - check "
                            f"layers.shortwave_down scale/offset/nodata")
        if kind == "days" and med > 45:
            raise UnitError(f"{where}: median {med:.4g} MJ m-2 day-1 exceeds extraterrestrial radiation; "
                            f"day shortwave must be a daily total in MJ m-2 day-1 (W m-2 x 0.0864)")
        if kind == "scenes" and med > 1500:
            raise UnitError(f"{where}: median {med:.4g} W m-2 exceeds the solar constant; check "
                            f"layers.shortwave_down scale/offset")
    elif layer == "relative_humidity":
        if med > 100.5 or med < 0:
            raise UnitError(f"{where}: median {med:.4g} % lies outside 0..100; check scale/units "
                            f"(units: '%' or '1' for a fraction)")
    elif layer == "elevation":
        if med < -500 or med > 9000:
            raise UnitError(f"{where}: median {med:.4g} m is not an elevation on Earth; give metres")


def _key(layer: str) -> str:
    return "air_temperature" if layer.startswith("air_temperature_") else layer
