"""Date-window statistics over products already written (mean, median, total, ...).

The inputs are GeoTIFF products on one :class:`~radledger.grid.TargetGrid`,
one file per date.  Every file is read lazily, one grid chunk per Dask task
(:func:`radledger.io.lazy.read_product`), so memory is bounded by the chunk size, not the scene.

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
from typing import Sequence

import dask.array as da
import numpy as np
from dask.base import tokenize

from ..errors import InputError
from ..grid import TargetGrid
from ..io.lazy import read_product
from ..model.products import COMPOSITE_STATISTICS
from .stats import MAX, MEAN, M2, MIN, N, median_of_dates, merge_moments, moments_of_dates

__all__ = ["LEAF_DATES", "composite"]

LEAF_DATES = 8  # dates folded per leaf task (memory: LEAF_DATES x chunk**2 x 4 bytes of input)

def _finish(m: np.ndarray, *, statistic: str, min_count: int, window_days: int | None,
            median: np.ndarray | None = None) -> np.ndarray:
    """One statistic (float32) from a moments block; NaN where count < min_count (except count)."""
    n = m[N]
    if statistic == "count":
        return n.astype(np.float32)
    if statistic == "median":
        value = median
    elif statistic in ("mean", "total"):
        value = m[MEAN] * (window_days if statistic == "total" else 1)
    elif statistic == "sum":
        value = m[MEAN] * n
    elif statistic == "std":
        value = np.sqrt(np.divide(m[M2], n, out=np.zeros_like(n), where=n > 0))
    else:  # min, max
        value = m[MIN if statistic == "min" else MAX]
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
            median = da.map_blocks(median_of_dates, *layers, dtype=np.float64,
                                   meta=np.empty((0, 0)), name=f"median-{tokenize(layers)}")
            out[statistic] = da.map_blocks(_finish_median, moments, median,
                                           drop_axis=0, dtype=np.float32, meta=np.empty((0, 0), np.float32),
                                           name=f"composite-median-{tokenize(moments, median, min_count)}", **kwargs)
        else:
            out[statistic] = da.map_blocks(_finish, moments, drop_axis=0, dtype=np.float32,
                                           meta=np.empty((0, 0), np.float32),
                                           name=f"composite-{statistic}-{tokenize(moments, kwargs)}", **kwargs)
    return out
