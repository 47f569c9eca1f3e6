"""Gridded weather from stations: one chunk of a fitted field, the grid's tags, the cross-validation table.

A fitted field (:class:`radledger.stations.FittedField`) is small and picklable: each chunk task
evaluates it on the chunk's pixel centres with the chunk's DEM window and writes the block, so a
grid of any size is made in bounded memory, on threads or on a cluster.
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..io.atomic import atomic_output

__all__ = ["predict_chunk", "gridding_tags", "CrossValidationRow", "write_cross_validation",
           "CROSS_VALIDATION_COLUMNS", "WEATHER_NAMES"]

#: long name and CF standard name of each weather layer gridded from stations (CF standard-name table)
WEATHER_NAMES = {
    "air_temperature": ("air temperature", "air_temperature"),
    "air_temperature_max": ("daily maximum air temperature", "air_temperature"),
    "air_temperature_min": ("daily minimum air temperature", "air_temperature"),
    "dewpoint_temperature": ("dew-point temperature", "dew_point_temperature"),
    "vapour_pressure": ("vapour pressure", "water_vapor_partial_pressure_in_air"),
    "relative_humidity": ("relative humidity", "relative_humidity"),
    "shortwave_down": ("incoming shortwave radiation", "surface_downwelling_shortwave_flux_in_air"),
}
CROSS_VALIDATION_COLUMNS = ("variable", "date", "time", "method", "units", "n", "bias", "rmse")


def predict_chunk(field, dem, grid, window, sink) -> int:
    """Evaluate ``field`` on one chunk ``window`` of ``grid`` and write it into ``sink``; valid pixels.

    ``dem``: the elevation source (``read_layers`` gives its decoded window [m]).
    """
    z = dem.read_layers(grid, window)["elevation"]
    x, y = grid.pixel_centres(window)
    values = field.predict(x, y, z).astype(np.float32)
    r0, c0 = int(window.row_off), int(window.col_off)
    sink[slice(r0, r0 + int(window.height)), slice(c0, c0 + int(window.width))] = values
    return int(np.isfinite(values).sum())


def gridding_tags(field, cv, *, stations: list[str]) -> dict[str, str]:
    """What a gridded weather product says about its making: method, stations used, trend, cross-validation."""
    t = field.trend
    return {
        "gridding_method": field.method,
        "gridding_options": ", ".join(f"{k}={v}" for k, v in sorted(field.options.items())),
        "stations_used": ",".join(str(s) for s in stations),
        "stations_count": str(len(stations)),
        "trend": "v = b0 + b_z z + b_x x + b_y y (z: elevation [m]; x, y: grid CRS [m])",
        "trend_terms": " ".join(t.terms) or "constant",
        "trend_b0": repr(t.b0), "trend_b_z": repr(t.b_z), "trend_b_x": repr(t.b_x), "trend_b_y": repr(t.b_y),
        "cv_n": str(cv.n), "cv_bias": repr(cv.bias), "cv_rmse": repr(cv.rmse),
    }


@dataclass(frozen=True)
class CrossValidationRow:
    """Leave-one-out bias and RMSE of one variable on one date (or scene time)."""
    variable: str
    date: str
    time: str
    method: str
    units: str
    n: int
    bias: float
    rmse: float


def _number(v: float) -> str:
    return "" if v is None or (isinstance(v, float) and math.isnan(v)) else repr(float(v))


def write_cross_validation(rows: list[CrossValidationRow], path: str | Path) -> Path:
    """``cross_validation.csv``: one row per variable and date, whole or not at all."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    with atomic_output(path) as tmp, open(tmp, "w", newline="", encoding="utf-8") as handle:
        w = csv.writer(handle)
        w.writerow(CROSS_VALIDATION_COLUMNS)
        for r in rows:
            w.writerow([r.variable, r.date, r.time, r.method, r.units, r.n, _number(r.bias), _number(r.rmse)])
    return path
