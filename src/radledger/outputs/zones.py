"""Per-polygon summaries (basins, sub-basins) of a product on the grid.

Zones are read once (:func:`read_zones`) and reprojected to the grid CRS.  The
statistics are per-chunk moments merged across chunks in float64, so memory is
bounded by the chunk size.  Two ways to weigh the pixels (``zones.weighting``):

* ``centre`` (:func:`zone_statistics`): a pixel belongs to a zone when its *centre*
  falls inside the polygon (labels burnt chunk by chunk by GDAL rasterize with
  ``all_touched=False``, :func:`zone_labels`; a centre exactly on an edge follows
  GDAL's scan-line rule).  Where polygons overlap, the later zone in file order wins.
* ``coverage`` (:func:`zone_statistics_coverage`): every pixel the polygon touches
  counts with the fraction of it inside the polygon (times its area), from the
  exact fractions of :mod:`radledger.outputs.zonal_exact`; overlapping zones are
  each measured whole.

Under both rules ``area_km2`` is the polygon's own area (:func:`zone_areas`), also
where the polygon runs past the grid, and ``coverage`` is the valid fraction of that
whole area: the parts off the grid count as not valid (:func:`zones_off_the_grid`
lists such zones, for a warning).
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
from .zonal_exact import ZoneMoments, coverage_fractions, fold_window, merge_zone_moments, polygon_area_km2

__all__ = ["zone_labels", "zone_statistics", "zone_statistics_coverage", "zone_statistics_many",
           "zone_statistics_coverage_many", "zone_areas", "zones_off_the_grid",
           "write_zone_csv", "ZONE_COLUMNS"]

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


# --- the zone as a whole ------------------------------------------------------------------
def zone_areas(zones: Zones, grid: TargetGrid) -> tuple[np.ndarray, np.ndarray]:
    """Each zone's true area and the part of it on the grid [km2], as two float64 arrays.

    Areas by :func:`~radledger.outputs.zonal_exact.polygon_area_km2` in the grid CRS
    (planar for a projected grid, geodesic for a geographic one); the part on the grid
    is the polygon clipped to the grid's bounds.
    """
    crs = CRS.from_user_input(grid.crs.to_wkt())
    if CRS.from_user_input(zones.crs) != crs:
        zones = zones.to_crs(crs)
    box = shapely.box(*grid.bounds)
    total = np.array([polygon_area_km2(g, crs) for g in zones.geometries])
    on_grid = np.array([polygon_area_km2(shapely.intersection(g, box), crs) for g in zones.geometries])
    return total, np.minimum(on_grid, total)


def zones_off_the_grid(zones: Zones, grid: TargetGrid, *, tolerance: float = 1e-6) -> list[tuple[object, float]]:
    """(id, fraction of the zone's area on the grid [1]) of each zone that lies partly or wholly off it."""
    total, on_grid = zone_areas(zones, grid)
    inside = np.divide(on_grid, total, out=np.zeros_like(total), where=total > 0)
    return [(zid, float(f)) for zid, f in zip(zones.ids, inside) if f < 1 - tolerance]


def _row(zones: Zones, i: int, *, count: int, mean, lo, hi, std, coverage: float, area: float) -> dict:
    valid = count > 0
    return {zones.id_field: zones.ids[i], "mean": float(mean) if valid else math.nan,
            "min": float(lo) if valid else math.nan, "max": float(hi) if valid else math.nan,
            "std": float(std) if valid else math.nan, "count": int(count),
            "coverage": float(min(max(coverage, 0.0), 1.0)), "area_km2": float(area)}


def _tree(blocks: list, merge) -> object:
    """Merge delayed per-window summaries pairwise (few partial summaries alive at a time)."""
    while len(blocks) > 1:
        merged = [dask.delayed(merge, pure=True)(a, b) for a, b in zip(blocks[0::2], blocks[1::2])]
        blocks = merged + ([blocks[-1]] if len(blocks) % 2 else [])
    return blocks[0]


# --- pixel-centre rule ---------------------------------------------------------------------
# rows of a per-block zone summary: the five moments rows of composite.merge_moments, then
_ZONE_PIXELS = 5


def _block_summary(values: np.ndarray, labels: np.ndarray, n_labels: int) -> np.ndarray:
    """(6, n_labels) float64: valid count, mean, m2, min, max, zone pixels per label."""
    lab = labels.ravel()
    v = np.asarray(values, dtype=np.float64).ravel()
    pixels = np.bincount(lab, minlength=n_labels).astype(np.float64)
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
    return np.stack([n, mean, m2, lo, hi, pixels])


def _merge_summaries(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return np.concatenate([merge_moments(a[:5], b[:5]), a[5:] + b[5:]])


def _check_shapes(values, grid: TargetGrid, *others) -> None:
    shapes = [tuple(values.shape), *(tuple(o.shape) for o in others)]
    if any(s != grid.shape for s in shapes):
        raise ValueError(f"values and labels {shapes} must have the grid's shape {grid.shape}")


def zone_statistics(values, labels, zones: Zones, grid: TargetGrid, *, compute=dask.compute) -> list[dict]:
    """Per-zone summary of a 2-D product by the pixel-centre rule (computes; memory bounded by the chunk).

    Parameters
    ----------
    values : dask.array.Array or numpy.ndarray
        The product on ``grid`` [product units]; NaN = no value.
    labels : dask.array.Array
        From :func:`zone_labels` (0 outside, i for the i-th zone).
    zones : Zones
        The zones the labels were made from.
    grid : TargetGrid
        The run's grid.
    compute : callable, optional
        Computes a Dask collection and returns a tuple of results (the run's
        engine, so the work goes where the run's does); ``dask.compute`` by default.

    Returns
    -------
    list of dict
        One row per zone in file order with keys ``zones.id_field`` (the id), ``mean``,
        ``min``, ``max``, ``std`` (population, ddof = 0) [product units] of the pixels
        whose centre lies in the zone, ``count`` (those with a value, int),
        ``coverage`` (valid fraction of the whole zone [1]: valid / zone pixels times the
        fraction of the zone's area on the grid; 0 without a pixel centre on the grid)
        and ``area_km2`` (the polygon's area, see :func:`zone_areas`, parts off the
        grid included [km2]).  A zone without valid pixels has NaN mean/min/max/std.
    """
    return zone_statistics_many([values], labels, zones, grid, compute=compute)[0]


def zone_statistics_many(values_list: Sequence, labels, zones: Zones, grid: TargetGrid, *,
                         compute=dask.compute) -> list[list[dict]]:
    """:func:`zone_statistics` of several products in one computation (each chunk's labels burnt once)."""
    for values in values_list:
        _check_shapes(values, grid, labels)
    labels = da.asarray(labels).rechunk(grid.chunks)
    n_labels = len(zones) + 1
    label_blocks = labels.to_delayed().ravel()
    trees = []
    for values in values_list:
        values = da.asarray(values).rechunk(grid.chunks)
        blocks = [dask.delayed(_block_summary, pure=True)(v, lab, n_labels)
                  for v, lab in zip(values.to_delayed().ravel(), label_blocks)]
        trees.append(_tree(blocks, _merge_summaries))
    summaries = compute(*trees)
    total, on_grid = zone_areas(zones, grid)
    out = []
    for summary in summaries:
        rows = []
        for i in range(len(zones)):
            n, mean, m2, lo, hi, pixels = summary[:, i + 1]
            inside = on_grid[i] / total[i] if total[i] > 0 else 0.0
            rows.append(_row(zones, i, count=int(n), mean=mean, lo=lo, hi=hi, std=math.sqrt(m2 / n) if n else 0.0,
                             coverage=n / pixels * inside if pixels > 0 else 0.0, area=total[i]))
        out.append(rows)
    return out


# --- coverage weighting (exact pixel fractions) --------------------------------------------
#: covered fractions below this are rounding noise where an edge runs along pixel edges (seen: 7e-13)
MIN_FRACTION = 1e-6


def _exact_block(values, window: Window, grid: TargetGrid, geometries) -> tuple[ZoneMoments, np.ndarray]:
    """Area-weighted moments and valid-pixel counts of one window (exact fractions)."""
    values = np.asarray(values, dtype=np.float64)
    cov = coverage_fractions(geometries.items, grid.window_transform(window), values.shape)
    keep = cov.fraction >= MIN_FRACTION
    cov = cov._replace(zone=cov.zone[keep], pixel=cov.pixel[keep], fraction=cov.fraction[keep])
    moments = fold_window(values, cov, cell_weight=grid.pixel_area(window))
    valid = ~np.isnan(values.ravel()[cov.pixel])
    return moments, np.bincount(cov.zone[valid], minlength=cov.n_zones)


def _merge_exact(a, b):
    return merge_zone_moments(a[0], b[0]), a[1] + b[1]


class _Geometries:
    """One object carrying the zones into every window's task (not traversed by Dask)."""

    def __init__(self, items):
        self.items = tuple(items)


def zone_statistics_coverage(values, zones: Zones, grid: TargetGrid, *, compute=dask.compute) -> list[dict]:
    """Per-zone summary weighted by the fraction of each pixel inside the polygon (computes).

    Each window's exact pixel fractions come from
    :func:`~radledger.outputs.zonal_exact.coverage_fractions`; a pixel counts with weight
    ``fraction x pixel area``, so a zone's statistics follow its polygon, not the pixel
    centres, and overlapping zones are each measured whole.  Fractions below
    :data:`MIN_FRACTION` (a millionth of a pixel) are dropped as rounding noise.

    Parameters
    ----------
    values : dask.array.Array or numpy.ndarray
        The product on ``grid`` [product units]; NaN = no value.
    zones : Zones
        The zones (reprojected to the grid CRS if needed).
    grid : TargetGrid
        The run's grid.
    compute : callable, optional
        As for :func:`zone_statistics`.

    Returns
    -------
    list of dict
        Rows as :func:`zone_statistics` returns them, with ``mean`` and ``std``
        (population) weighted by covered area [product units], ``min``/``max`` over the
        valid pixels the polygon covers at all, ``count`` those pixels (int),
        ``coverage`` = covered valid area / the polygon's whole area [1] (parts off the
        grid count as not valid), and ``area_km2`` the polygon's area [km2].
    """
    return zone_statistics_coverage_many([values], zones, grid, compute=compute)[0]


def zone_statistics_coverage_many(values_list: Sequence, zones: Zones, grid: TargetGrid, *,
                                  compute=dask.compute) -> list[list[dict]]:
    """:func:`zone_statistics_coverage` of several products in one computation."""
    for values in values_list:
        _check_shapes(values, grid)
    crs = CRS.from_user_input(grid.crs.to_wkt())
    if CRS.from_user_input(zones.crs) != crs:
        zones = zones.to_crs(crs)
    geometries = dask.delayed(_Geometries(zones.geometries), pure=True)
    trees = []
    for values in values_list:
        values = da.asarray(values).rechunk(grid.chunks)
        blocks = [dask.delayed(_exact_block, pure=True)(v, w, grid, geometries)
                  for v, w in zip(values.to_delayed().ravel(), grid.windows())]
        trees.append(_tree(blocks, _merge_exact))
    total, _ = zone_areas(zones, grid)
    out = []
    for moments, counts in compute(*trees):
        std = moments.std
        out.append([_row(zones, i, count=int(counts[i]), mean=moments.mean[i], lo=moments.min[i],
                         hi=moments.max[i], std=std[i],
                         coverage=moments.weight[i] / 1e6 / total[i] if total[i] > 0 else 0.0, area=total[i])
                    for i in range(len(zones))])
    return out


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
