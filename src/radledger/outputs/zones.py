"""Per-polygon summaries (basins, sub-basins) of a product on the grid.

Zones are read once (:func:`read_zones`), reprojected to the grid CRS, and
burnt into an int32 label raster chunk by chunk (:func:`zone_labels`).  The
statistics (:func:`zone_statistics`) are per-chunk ``bincount`` moments merged
across chunks in float64, so memory is bounded by the chunk size.

Pixel rule: a pixel belongs to a zone when its *centre* falls inside the
polygon (GDAL rasterize with ``all_touched=False``; a centre exactly on an edge
follows GDAL's scan-line rule).  Where polygons overlap, the later zone in file
order wins.  A zone's area is the area of its pixels, so it converges to the
polygon's area as the pixels shrink.
"""

from __future__ import annotations

import csv
import math
import os
import warnings
from pathlib import Path
from typing import Sequence

import dask
import dask.array as da
import numpy as np
import shapely
from dask.base import tokenize
from pyproj import CRS
from rasterio.errors import NotGeoreferencedWarning
from rasterio.features import rasterize
from rasterio.windows import Window

from ..grid import TargetGrid
from ..io.atomic import atomic_output
from ..io.vectors import Zones
from .stats import merge_moments

__all__ = ["zone_labels", "zone_statistics", "write_zone_csv", "ZONE_COLUMNS"]

ZONE_COLUMNS = ("mean", "min", "max", "std", "count", "coverage", "area_km2")  # after the id column


# --- labels ------------------------------------------------------------------------------
class _ZoneBurner:
    """Array-like whose ``[rows, cols]`` burns the zones into that window (labels 1..n, 0 outside)."""

    def __init__(self, zones: Zones, grid: TargetGrid):
        self.geometries = zones.geometries
        self.bounds = shapely.bounds(np.asarray(zones.geometries, dtype=object))
        self.grid = grid
        self.shape = grid.shape
        self.dtype = np.dtype(np.int32)
        self.ndim = 2

    def __getitem__(self, key):
        rows, cols = key
        r0, c0 = rows.start or 0, cols.start or 0
        window = Window(c0, r0, cols.stop - c0, rows.stop - r0)
        x0, y0, x1, y1 = self.grid.window_bounds(window)
        b = self.bounds
        near = np.flatnonzero((b[:, 0] <= x1) & (b[:, 2] >= x0) & (b[:, 1] <= y1) & (b[:, 3] >= y0))
        shape = (int(window.height), int(window.width))
        if near.size == 0:
            return np.zeros(shape, dtype=np.int32)
        # later shapes overwrite earlier ones (MergeAlg.replace), so later zones win on overlaps
        return rasterize([(self.geometries[i], int(i) + 1) for i in near], out_shape=shape,
                         transform=self.grid.window_transform(window), fill=0, all_touched=False,
                         dtype="int32")


def _ignore_spurious_rasterize_warning() -> None:
    """rasterize under a threaded Dask scheduler now and then warns "Dataset has no geotransform" about its
    internal MEM raster although the labels are right (seen with rasterio 1.4; the same spurious warning is
    reported in opendatacube/odc-geo#131).  Ignore only that message from rasterio.features; installed on use
    (not at import) so it also holds where the filters were reset since (pytest does, per test)."""
    warnings.filterwarnings("ignore", message="Dataset has no geotransform", category=NotGeoreferencedWarning,
                            module="rasterio.features")


def zone_labels(zones: Zones, grid: TargetGrid) -> da.Array:
    """Lazy int32 label raster with ``grid.chunks``: 0 outside every zone, ``i`` inside the i-th zone (1-based).

    Each chunk is rasterised on its own (pixel-centre rule, later zones win).
    ``zones`` must be in the grid CRS (as :func:`read_zones` returns them).
    """
    _ignore_spurious_rasterize_warning()
    if CRS.from_user_input(zones.crs) != CRS.from_user_input(grid.crs.to_wkt()):
        zones = zones.to_crs(grid.crs.to_wkt())
    wkb = shapely.to_wkb(np.asarray(zones.geometries, dtype=object))
    name = f"zone-labels-{tokenize(zones.ids, list(wkb), grid)}"
    return da.from_array(_ZoneBurner(zones, grid), chunks=grid.chunks, name=name, lock=False, asarray=False,
                         fancy=False, meta=np.empty((0, 0), dtype=np.int32))


# --- statistics --------------------------------------------------------------------------
# rows of a per-block zone summary: the five moments rows of composite.merge_moments, then
_ZONE_PIXELS, _AREA = 5, 6


def _block_summary(values: np.ndarray, labels: np.ndarray, area: np.ndarray, n_labels: int) -> np.ndarray:
    """(7, n_labels) float64: valid count, mean, m2, min, max, zone pixels, zone area [m2] per label."""
    lab = labels.ravel()
    v = np.asarray(values, dtype=np.float64).ravel()
    pixels = np.bincount(lab, minlength=n_labels).astype(np.float64)
    area_sum = np.bincount(lab, weights=np.broadcast_to(area, labels.shape).ravel(), minlength=n_labels)
    ok = ~np.isnan(v)
    lv, vv = lab[ok], v[ok]
    n = np.bincount(lv, minlength=n_labels).astype(np.float64)
    total = np.bincount(lv, weights=vv, minlength=n_labels)
    mean = np.divide(total, n, out=np.zeros(n_labels), where=n > 0)
    dev = vv - mean[lv]
    m2 = np.bincount(lv, weights=dev * dev, minlength=n_labels)
    lo = np.full(n_labels, np.inf)
    hi = np.full(n_labels, -np.inf)
    np.minimum.at(lo, lv, vv)
    np.maximum.at(hi, lv, vv)
    lo[n == 0] = np.nan
    hi[n == 0] = np.nan
    return np.stack([n, mean, m2, lo, hi, pixels, area_sum])


def _merge_summaries(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return np.concatenate([merge_moments(a[:5], b[:5]), a[5:] + b[5:]])


def _summarise_block(values, labels, window: Window, grid: TargetGrid, n_labels: int) -> np.ndarray:
    return _block_summary(values, labels, grid.pixel_area(window), n_labels)


def zone_statistics(values, labels, zones: Zones, grid: TargetGrid, *, compute=dask.compute) -> list[dict]:
    """Per-zone summary of a 2-D product on the grid (computes; memory bounded by the chunk size).

    Parameters
    ----------
    values : dask.array.Array or numpy.ndarray
        The product on ``grid`` [product units]; NaN = no value.
    labels : dask.array.Array
        From :func:`zone_labels` (0 outside, i for the i-th zone).
    zones : Zones
        The zones the labels were made from.
    grid : TargetGrid
        The run's grid (pixel areas come from it).
    compute : callable, optional
        Computes a Dask collection and returns a tuple of results (the run's
        engine, so the work goes where the run's does); ``dask.compute`` by default.

    Returns
    -------
    list of dict
        One row per zone in file order with keys ``zones.id_field`` (the id), ``mean``,
        ``min``, ``max``, ``std`` (population, ddof = 0) [product units], ``count``
        (valid pixels, int), ``coverage`` (valid / zone pixels [1]; 0 for a zone with
        no pixel centre on the grid) and ``area_km2`` (area of the zone's pixels [km2]).
        A zone without valid pixels has NaN mean/min/max/std and count 0.
    """
    if tuple(values.shape) != grid.shape or tuple(labels.shape) != grid.shape:
        raise ValueError(f"values {tuple(values.shape)} and labels {tuple(labels.shape)} must both have "
                         f"the grid's shape {grid.shape}")
    values = da.asarray(values).rechunk(grid.chunks)
    labels = da.asarray(labels).rechunk(grid.chunks)
    n_labels = len(zones) + 1
    blocks = [dask.delayed(_summarise_block, pure=True)(v, lab, w, grid, n_labels)
              for v, lab, w in zip(values.to_delayed().ravel(), labels.to_delayed().ravel(), grid.windows())]
    while len(blocks) > 1:  # pairwise tree: few partial summaries alive at a time
        merged = [dask.delayed(_merge_summaries, pure=True)(a, b) for a, b in zip(blocks[0::2], blocks[1::2])]
        blocks = merged + ([blocks[-1]] if len(blocks) % 2 else [])
    (summary,) = compute(blocks[0])

    rows = []
    for i, zone_id in enumerate(zones.ids, start=1):
        n, mean, m2, lo, hi, pixels, area = summary[:, i]
        valid = n > 0
        rows.append({
            zones.id_field: zone_id,
            "mean": float(mean) if valid else math.nan,
            "min": float(lo) if valid else math.nan,
            "max": float(hi) if valid else math.nan,
            "std": math.sqrt(m2 / n) if valid else math.nan,
            "count": int(n),
            "coverage": float(n / pixels) if pixels > 0 else 0.0,
            "area_km2": float(area) / 1e6,
        })
    return rows


# --- CSV -----------------------------------------------------------------------------------
def _format_number(x) -> str:
    """6 significant digits in positional notation (no exponent); NaN as an empty field."""
    if isinstance(x, (int, np.integer)):
        return str(int(x))
    x = float(x)
    if math.isnan(x):
        return ""
    return np.format_float_positional(x, precision=6, unique=True, fractional=False, trim="-")


def write_zone_csv(rows: Sequence[dict], path: str | os.PathLike, id_field: str) -> Path:
    """Write zone rows as CSV with columns ``id_field, mean, min, max, std, count, coverage, area_km2``.

    Numbers: 6 significant digits, positional notation (``512.346``, ``0.0012``);
    ``count`` as an integer; NaN (zone without valid pixels) as an empty field.
    The file is written beside ``path`` and renamed into place (atomic).
    """
    with atomic_output(path) as tmp:
        with open(tmp, "w", newline="", encoding="utf-8") as fh:
            writer = csv.writer(fh)
            writer.writerow([id_field, *ZONE_COLUMNS])
            for row in rows:
                writer.writerow([row[id_field], *(_format_number(row[c]) for c in ZONE_COLUMNS)])
    return Path(path)
