"""Measured against modelled net radiation: sampling the products at stations, the pairs and summary tables.

Each observation is paired with the product of its date (days) or time (scenes):

* ``modelled``: the pixel holding the station (the pixel whose area contains the station's point);
* ``modelled_3x3``: the mean of the valid pixels of the 3 x 3 block centred on it (the part of the
  block on the grid, at an edge), a check on how much the comparison depends on the exact pixel;
* ``quality``: the product's ``quality`` bits at that pixel (empty when not written or nodata).

The summary (:func:`summary_rows`) gives, per product kind and station and for all stations of a
kind, the statistics of :func:`radledger.stations.agreement` of the pixel values: ``n``, ``bias`` =
mean(modelled - observed), ``mae``, ``rmse``, ``r2`` (squared Pearson correlation), and ``slope`` and
``intercept`` of the least-squares line modelled = slope x observed + intercept.
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import rasterio
from rasterio.windows import Window

from ..grid import TargetGrid
from ..io.atomic import atomic_output
from ..io.gdalenv import gdal_env
from ..stations.agreement import Agreement, agreement

__all__ = ["Pair", "pixel_of", "sample_product", "summary_rows", "write_pairs", "write_summary",
           "PAIR_COLUMNS", "SUMMARY_COLUMNS", "ALL_STATIONS"]

PAIR_COLUMNS = ("kind", "station", "date", "time", "observed", "modelled", "modelled_3x3", "quality")
SUMMARY_COLUMNS = ("kind", "station", "n", "bias", "mae", "rmse", "r2", "slope", "intercept")
ALL_STATIONS = "all"


@dataclass(frozen=True)
class Pair:
    """One observation and the product values at its station."""
    kind: str                 # scenes | days
    station: str
    date: str                 # YYYY-MM-DD (a scene's UTC date)
    time: str                 # a scene's time, YYYY-MM-DDTHH:MM:SSZ; "" for days
    observed: float
    modelled: float           # the pixel holding the station (NaN where the product is NaN)
    modelled_3x3: float       # mean of the valid pixels of the 3 x 3 block (NaN when none)
    quality: int | None       # quality bits at the pixel; None when not written or nodata

    @property
    def sort_key(self) -> tuple:
        return (self.kind, self.station, self.time or self.date)


def pixel_of(grid: TargetGrid, x: float, y: float) -> tuple[int, int] | None:
    """(row, col) of the pixel of ``grid`` whose area holds the point ``x, y`` (grid CRS); None off the grid."""
    t = grid.transform
    col = math.floor((x - t.c) / t.a)
    row = math.floor((y - t.f) / t.e)
    if 0 <= row < grid.height and 0 <= col < grid.width:
        return row, col
    return None


def sample_product(path: str | Path, pixels: list[tuple[int, int]], *, quality: str | Path | None = None
                   ) -> list[tuple[float, float, int | None]]:
    """(pixel, 3 x 3 mean, quality) of a product at each (row, col) in ``pixels``.

    Reads a 3 x 3 window per point (clipped to the raster), so the cost is per station, not per map.
    """
    out = []
    with gdal_env(), rasterio.open(path) as ds:
        qs = rasterio.open(quality) if quality is not None and Path(quality).exists() else None
        try:
            for row, col in pixels:
                r0, c0 = max(0, row - 1), max(0, col - 1)
                win = Window(c0, r0, min(ds.width, col + 2) - c0, min(ds.height, row + 2) - r0)
                block = ds.read(1, window=win).astype(np.float64)
                if ds.nodata is not None and not math.isnan(ds.nodata):
                    block[block == ds.nodata] = np.nan
                centre = float(block[row - r0, col - c0])
                valid = block[np.isfinite(block)]
                mean = float(valid.mean()) if valid.size else math.nan
                q = None
                if qs is not None:
                    value = int(qs.read(1, window=Window(col, row, 1, 1))[0, 0])
                    q = None if qs.nodata is not None and value == qs.nodata else value
                out.append((centre, mean, q))
        finally:
            if qs is not None:
                qs.close()
    return out


def summary_rows(pairs: list[Pair]) -> list[tuple[str, str, Agreement]]:
    """(kind, station, statistics) per kind and station, then ``all`` stations of that kind."""
    rows = []
    for kind in sorted({p.kind for p in pairs}):
        of_kind = [p for p in pairs if p.kind == kind]
        for station in sorted({p.station for p in of_kind}):
            mine = [p for p in of_kind if p.station == station]
            rows.append((kind, station, _agreement(mine)))
        rows.append((kind, ALL_STATIONS, _agreement(of_kind)))
    return rows


def _agreement(pairs: list[Pair]) -> Agreement:
    return agreement(np.array([p.observed for p in pairs], dtype=float),
                     np.array([p.modelled for p in pairs], dtype=float))


def _text(v) -> str:
    if v is None:
        return ""
    if isinstance(v, float):
        return "" if math.isnan(v) else repr(v)
    return str(v)


def _write(path: Path, header, rows) -> Path:
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    with atomic_output(path) as tmp, open(tmp, "w", newline="", encoding="utf-8") as handle:
        w = csv.writer(handle)
        w.writerow(header)
        for r in rows:
            w.writerow([_text(v) for v in r])
    return path


def write_pairs(pairs: list[Pair], path: str | Path) -> Path:
    """``pairs.csv``: one row per observation paired with a product (see :data:`PAIR_COLUMNS`)."""
    return _write(path, PAIR_COLUMNS, [(p.kind, p.station, p.date, p.time, p.observed, p.modelled, p.modelled_3x3,
                                        p.quality) for p in sorted(pairs, key=lambda p: p.sort_key)])


def write_summary(rows: list[tuple[str, str, Agreement]], path: str | Path) -> Path:
    """``summary.csv``: one row per kind and station plus ``all`` per kind (see :data:`SUMMARY_COLUMNS`)."""
    return _write(path, SUMMARY_COLUMNS, [(kind, station, s.n, s.bias, s.mae, s.rmse, s.r2, s.slope, s.intercept)
                                          for kind, station, s in rows])
