"""COG overviews computed inside the chunk tasks, so the COG driver only compresses.

GDAL's COG driver, asked for ``OVERVIEWS=AUTO``, re-reads the finished
full-resolution raster to average it down level by level (single-threaded),
which cost about 40 % of the COG step in our measurements.  Each chunk task
already holds its products in memory, so it averages them there: factors 2,
4, 8, ... that divide the chunk edge are exact per chunk; coarser levels (on
very large grids) are averaged from the coarsest in-task level afterwards,
which is small.  The averaging ignores NaN as GDAL's ``AVERAGE`` does with a
NaN nodata; the ``quality`` bits take the nearest pixel (averaging flags
would invent flags).
"""

from __future__ import annotations

import numpy as np

__all__ = ["overview_factors", "nearest_levels", "mean_levels", "reduce_level", "level_shape", "mean_pyramid"]

BLOCK = 512   # overviews are added until the coarsest fits in one 512-pixel tile (as GDAL's AUTO)


def overview_factors(width: int, height: int, block: int = BLOCK) -> tuple[int, ...]:
    """Factors 2, 4, ... as GDAL's COG driver picks them for ``OVERVIEWS=AUTO``."""
    out = []
    f = 1
    while max(-(-width // f), -(-height // f)) > block:
        f *= 2
        out.append(f)
    return tuple(out)


def level_shape(h: int, w: int, f: int) -> tuple[int, int]:
    return -(-h // f), -(-w // f)


def _halve(s: np.ndarray, n: np.ndarray | None, cells: int = 1) -> tuple[np.ndarray, np.ndarray | None]:
    """Sums and counts of 2 x 2 cells (a ragged last row/column counts what it has).

    ``n`` None: every cell holds the same count, ``cells`` (no value missing, even sides so far),
    so the counts need no arrays.  The four quarters are added as strided views (several times faster than a
    reduction over reshaped axes).
    """
    h, w = s.shape
    if h % 2 or w % 2:   # pad to even with empty cells
        if n is None:
            n = np.full(s.shape, cells, np.int32)
        s = np.pad(s, ((0, h % 2), (0, w % 2)))
        n = np.pad(n, ((0, h % 2), (0, w % 2)))
    out = s[0::2, 0::2] + s[1::2, 0::2]
    out += s[0::2, 1::2]
    out += s[1::2, 1::2]
    if n is None:
        return out, None
    m = n[0::2, 0::2] + n[1::2, 0::2]
    m += n[0::2, 1::2]
    m += n[1::2, 1::2]
    return out, m


def _mean_of(s: np.ndarray, n: np.ndarray | None, cells: int) -> np.ndarray:
    """Mean of the sums ``s``: over the counts ``n``, or over ``cells`` values each (``n`` None)."""
    if n is None:
        return (s * (1.0 / cells)).astype(np.float32)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(n > 0, s / np.maximum(n, 1), np.nan).astype(np.float32)


def mean_levels(block: np.ndarray, factors) -> dict[int, np.ndarray]:
    return mean_pyramid(block, factors)[0]


def mean_pyramid(block: np.ndarray, factors) -> tuple[dict[int, np.ndarray], tuple]:
    """NaN-ignoring mean levels of one block and its (min, max, sum, count) summary of finite values.

    Plain NumPy (2 x 2 sums by reshaping): a few milliseconds per 512 x 512 block, and no
    compiler to load for it.
    """
    a = np.asarray(block, dtype=np.float32)
    valid = ~np.isnan(a)
    finite = np.isfinite(a)
    cnt = int(np.count_nonzero(finite))
    if cnt:
        vals = a[finite] if cnt < a.size else a
        lo, hi, tot = float(vals.min()), float(vals.max()), float(vals.sum(dtype=np.float64))
    else:
        lo, hi, tot = float("inf"), float("-inf"), 0.0
    if valid.all():      # nothing missing: constant counts
        s, n = _halve(a.astype(np.float64), None)
    else:
        s, n = _halve(np.where(valid, a, np.float32(0)).astype(np.float64), valid.astype(np.int32))
    out, f = {}, 2
    for target in factors:
        while f < target:
            s, n = _halve(s, n, f * f)
            f *= 2
        out[target] = _mean_of(s, n, f * f)
    return out, (lo, hi, tot, cnt)


def nearest_levels(block: np.ndarray, factors) -> dict[int, np.ndarray]:
    h, w = block.shape
    out = {}
    for f in factors:
        H, W = level_shape(h, w, f)
        rows = np.minimum(np.arange(H) * f + f // 2, h - 1)
        cols = np.minimum(np.arange(W) * f + f // 2, w - 1)
        out[f] = block[np.ix_(rows, cols)]
    return out


def reduce_level(a: np.ndarray, factor: int, *, nearest: bool) -> np.ndarray:
    """A coarser level from a whole (small) level array."""
    if nearest:
        return nearest_levels(a, (factor,))[factor]
    return mean_levels(a, (factor,))[factor]
