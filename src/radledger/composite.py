"""Date-window statistics over products already written (mean, median, total, ...).

The inputs are GeoTIFF products on one :class:`~radledger.grid.TargetGrid`,
one file per date.  Every file is read lazily, one grid chunk per Dask task
(:func:`read_product`), so memory is bounded by the chunk size, not the scene.

How the statistics are reduced over time
----------------------------------------
* mean, sum, std, min, max and count come from *moments*: each leaf task
  folds up to :data:`LEAF_DATES` dates of one chunk into five float64 arrays
  (valid count, mean, sum of squared deviations, min, max; Welford's update),
  and leaves are merged pairwise (Chan et al. 1979).  A task holds at most
  ``LEAF_DATES`` date chunks, whatever the window length.
* median needs every date of a chunk at once: one task per chunk, holding
  ``n_dates x chunk**2 x 4`` bytes of input (92 dates at chunk 1024 = 0.4 GB);
  lower ``grid.chunk`` for long windows.

NaN is "no value" everywhere; the kernels never emit all-NaN RuntimeWarnings.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Sequence

import dask.array as da
import numpy as np
import rasterio
from dask.base import tokenize

from .datewindows import COMPOSITE_STATISTICS, SEASONS, season_window  # noqa: F401 (re-exported)
from .errors import InputError
from .grid import TargetGrid

__all__ = ["COMPOSITE_STATISTICS", "SEASONS", "LEAF_DATES", "season_window", "composite",
           "read_product", "moments_of_dates", "merge_moments"]

LEAF_DATES = 8  # dates folded per leaf task (memory: LEAF_DATES x chunk**2 x 4 bytes of input)

# rows of a moments array (see moments_of_dates)
_N, _MEAN, _M2, _MIN, _MAX = range(5)


# --- lazy reading --------------------------------------------------------------------------
class _WindowReader:
    """Array-like over band 1 of a raster file; each ``[rows, cols]`` opens the file and reads
    that window, so a Dask task carries only the path (works on distributed workers)."""

    def __init__(self, path: str, shape: tuple[int, int], dtype, nodata):
        self.path, self.shape, self.dtype, self.nodata = path, shape, np.dtype(dtype), nodata
        self.ndim = 2

    def __getitem__(self, key):
        rows, cols = key
        window = ((rows.start or 0, rows.stop), (cols.start or 0, cols.stop))
        with rasterio.open(self.path) as src:
            block = src.read(1, window=window)
        if self.dtype.kind == "f":
            block = block.astype(self.dtype, copy=False)
            if self.nodata is not None and not np.isnan(self.nodata):
                block[block == self.nodata] = np.nan
        return block


def read_product(path: str | os.PathLike, grid: TargetGrid, *, dtype="float32") -> da.Array:
    """Band 1 of a product file as a lazy 2-D Dask array with ``grid.chunks``.

    Parameters
    ----------
    path : str or path-like
        A raster on ``grid`` (same CRS, transform and size).
    grid : TargetGrid
        The grid the file must lie on.
    dtype : numpy dtype, optional
        ``float32`` (default): the file's nodata becomes NaN.  An integer dtype
        (e.g. ``uint8`` for ``quality``) keeps the stored values as they are.

    Only the file's metadata is read here; pixels are read by the Dask tasks.
    """
    path = str(path)
    try:
        with rasterio.open(path) as src:
            on_grid = grid.same_as(src.crs, src.transform, src.width, src.height)
            size = (src.width, src.height)
            nodata = src.nodata
    except rasterio.errors.RasterioIOError as exc:
        raise InputError(f"{path}: cannot open ({exc}); check that the product exists and is readable") from None
    if not on_grid:
        raise InputError(f"{path}: is not on the run's grid ({size[0]} x {size[1]} px vs {grid.describe()}); "
                         f"re-create it with the current grid settings")
    try:
        stat = os.stat(path)
        stamp = (stat.st_mtime_ns, stat.st_size)
    except OSError:  # remote (/vsicurl/ ...) paths
        stamp = None
    reader = _WindowReader(path, grid.shape, dtype, nodata)
    name = f"read-{Path(path).stem}-{tokenize(path, stamp, np.dtype(dtype).str, grid.chunk)}"
    return da.from_array(reader, chunks=grid.chunks, name=name, lock=False, asarray=False,
                         fancy=False, meta=np.empty((0, 0), dtype=dtype))


# --- moments kernels (pure NumPy; shared with zones.py) -------------------------------------
def moments_of_dates(*blocks: np.ndarray) -> np.ndarray:
    """Per-pixel moments of some dates of one chunk.

    Parameters
    ----------
    *blocks : numpy.ndarray
        2-D arrays of one chunk, one per date [product units]; NaN = no value.

    Returns
    -------
    numpy.ndarray
        float64, shape ``(5,) + block.shape``: valid count [1], mean, sum of squared
        deviations from the mean [units**2], min, max (NaN where no valid value).
    """
    shape = blocks[0].shape
    n = np.zeros(shape)
    mean = np.zeros(shape)
    m2 = np.zeros(shape)
    lo = np.full(shape, np.nan)
    hi = np.full(shape, np.nan)
    for block in blocks:
        x = np.asarray(block, dtype=np.float64)
        ok = ~np.isnan(x)
        n += ok
        delta = np.where(ok, x - mean, 0.0)
        mean += np.divide(delta, n, out=np.zeros(shape), where=ok)
        m2 += np.where(ok, delta * (x - mean), 0.0)
        np.fmin(lo, x, out=lo)  # fmin/fmax ignore NaN and never warn
        np.fmax(hi, x, out=hi)
    return np.stack([n, mean, m2, lo, hi])


def merge_moments(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Merge two moments arrays (rows: count, mean, m2, min, max) of disjoint samples.

    Chan, Golub & LeVeque (1979) pairwise update, exact for any split of the
    samples; works elementwise on arrays of any trailing shape.
    """
    na, nb = a[_N], b[_N]
    n = na + nb
    frac = np.divide(nb, n, out=np.zeros_like(n), where=n > 0)
    delta = b[_MEAN] - a[_MEAN]
    mean = a[_MEAN] + delta * frac
    m2 = a[_M2] + b[_M2] + delta * delta * na * frac
    return np.stack([n, mean, m2, np.fmin(a[_MIN], b[_MIN]), np.fmax(a[_MAX], b[_MAX])])


def _median_of_dates(*blocks: np.ndarray, rows: int = 64) -> np.ndarray:
    """Per-pixel median ignoring NaN (equal to ``numpy.nanmedian``), strip by strip, no warnings."""
    height, width = blocks[0].shape
    out = np.full((height, width), np.nan, dtype=np.float64)
    for r0 in range(0, height, rows):
        x = np.sort(np.stack([b[r0:r0 + rows] for b in blocks]), axis=0)  # NaNs sort last
        n = (~np.isnan(x)).sum(axis=0)
        lo = np.take_along_axis(x, np.maximum((n - 1) // 2, 0)[None], axis=0)[0]
        hi = np.take_along_axis(x, np.maximum(n // 2, 0)[None], axis=0)[0]
        out[r0:r0 + rows] = np.where(n > 0, 0.5 * (lo.astype(np.float64) + hi), np.nan)
    return out


def _finish(m: np.ndarray, *, statistic: str, min_count: int, window_days: int | None,
            median: np.ndarray | None = None) -> np.ndarray:
    """One statistic (float32) from a moments block; NaN where count < min_count (except count)."""
    n = m[_N]
    if statistic == "count":
        return n.astype(np.float32)
    if statistic == "median":
        value = median
    elif statistic in ("mean", "total"):
        value = m[_MEAN] * (window_days if statistic == "total" else 1)
    elif statistic == "sum":
        value = m[_MEAN] * n
    elif statistic == "std":
        value = np.sqrt(np.divide(m[_M2], n, out=np.zeros_like(n), where=n > 0))
    else:  # min, max
        value = m[_MIN if statistic == "min" else _MAX]
    return np.where(n >= min_count, value, np.nan).astype(np.float32)


def _finish_median(m: np.ndarray, median: np.ndarray, **kwargs) -> np.ndarray:
    return _finish(m, median=median, **kwargs)


def _tree_moments(layers: list[da.Array], grid: TargetGrid) -> da.Array:
    """Lazy moments (5, y, x) of a stack of 2-D layers: leaves of LEAF_DATES dates, then pairwise merges."""
    chunks = ((5,),) + grid.chunks
    meta = np.empty((0, 0, 0))
    parts = [da.map_blocks(moments_of_dates, *layers[i:i + LEAF_DATES], new_axis=0, chunks=chunks,
                           dtype=np.float64, meta=meta, name=f"moments-{tokenize(layers[i:i + LEAF_DATES])}")
             for i in range(0, len(layers), LEAF_DATES)]
    while len(parts) > 1:
        merged = [da.map_blocks(merge_moments, a, b, dtype=np.float64, meta=meta)
                  for a, b in zip(parts[0::2], parts[1::2])]
        parts = merged + ([parts[-1]] if len(parts) % 2 else [])
    return parts[0]


def composite(paths: Sequence[str | os.PathLike], grid: TargetGrid, *, statistics: Sequence[str],
              min_count: int = 1, window_days: int | None = None, name: str = "composite") -> dict[str, da.Array]:
    """Per-pixel statistics over the dates of a window, lazily.

    Parameters
    ----------
    paths : sequence of str or path-like
        One product GeoTIFF per date [product units, e.g. MJ m-2 day-1], all on ``grid``.
    grid : TargetGrid
        The run's grid; results have ``grid.chunks``.
    statistics : sequence of str
        Any of :data:`COMPOSITE_STATISTICS`:

        * ``mean``, ``median``, ``min``, ``max`` of the valid dates [product units];
        * ``sum`` of the valid dates [product units x days, e.g. MJ m-2 for daily products];
        * ``std``: population standard deviation (ddof = 0) of the valid dates [product units];
        * ``count``: number of valid dates [1], float32, 0 where none (never masked);
        * ``total`` = mean x ``window_days`` [product units x days]: the window's energy
          with the gaps filled by the mean (daily products only; the caller checks that).
    min_count : int, optional
        Pixels with fewer valid dates than this [1] are NaN in every statistic but ``count``.
    window_days : int, optional
        Days in the window, inclusive [day]; required for ``total``.
    name : str, optional
        The composite's name, used in error messages.

    Returns
    -------
    dict of str to dask.array.Array
        float32 2-D arrays with ``grid.chunks``, keyed by statistic, in the order asked.
        Nothing is computed until the caller computes or stores them; arrays stored
        together share one read of each file.
    """
    wanted = list(dict.fromkeys(statistics))
    unknown = [s for s in wanted if s not in COMPOSITE_STATISTICS]
    if unknown:
        raise ValueError(f"unknown statistic {', '.join(map(repr, unknown))}; "
                         f"valid: {', '.join(COMPOSITE_STATISTICS)}")
    if not wanted:
        raise ValueError(f"no statistics asked; valid: {', '.join(COMPOSITE_STATISTICS)}")
    if isinstance(min_count, bool) or int(min_count) != min_count or min_count < 1:
        raise ValueError(f"min_count must be a whole number >= 1, got {min_count!r}")
    if "total" in wanted and (window_days is None or window_days <= 0):
        raise ValueError(f"statistic 'total' needs window_days > 0 (days in the window), got {window_days!r}")
    if not paths:
        raise InputError(f"composite {name!r}: no products fall in its window; "
                         f"widen start/end or add dates to the run")

    layers = [read_product(p, grid) for p in paths]
    moments = _tree_moments(layers, grid)  # also gives the count that min_count masks the median with
    out: dict[str, da.Array] = {}
    for statistic in wanted:
        kwargs = dict(statistic=statistic, min_count=int(min_count), window_days=window_days)
        if statistic == "median":
            median = da.map_blocks(_median_of_dates, *layers, dtype=np.float64,
                                   meta=np.empty((0, 0)), name=f"median-{tokenize(layers)}")
            out[statistic] = da.map_blocks(_finish_median, moments, median,
                                           drop_axis=0, dtype=np.float32, meta=np.empty((0, 0), np.float32),
                                           name=f"composite-median-{tokenize(moments, median, min_count)}", **kwargs)
        else:
            out[statistic] = da.map_blocks(_finish, moments, drop_axis=0, dtype=np.float32,
                                           meta=np.empty((0, 0), np.float32),
                                           name=f"composite-{statistic}-{tokenize(moments, kwargs)}", **kwargs)
    return out
