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

from ..physics._jit import jit
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


@jit(nogil=True, cache=True)
def _halve_mean(s, n):
    """Sums and counts of 2 x 2 cells (a ragged last row/column counts what it has)."""
    h, w = s.shape
    s2 = np.zeros(((h + 1) // 2, (w + 1) // 2), np.float64)
    n2 = np.zeros(((h + 1) // 2, (w + 1) // 2), np.int64)
    for i in range(h):
        ii = i >> 1
        for j in range(w):
            s2[ii, j >> 1] += s[i, j]
            n2[ii, j >> 1] += n[i, j]
    return s2, n2


@jit(nogil=True, cache=True)
def _mean_of(s, n):
    out = np.empty(s.shape, np.float32)
    for i in range(s.shape[0]):
        for j in range(s.shape[1]):
            out[i, j] = s[i, j] / n[i, j] if n[i, j] > 0 else np.nan
    return out


def mean_levels(block: np.ndarray, factors) -> dict[int, np.ndarray]:
    return mean_pyramid(block, factors)[0]


@jit(nogil=True, cache=True)
def _halve_with_stats(a):
    """2 x 2 sums and counts of the non-NaN pixels of ``a``, plus min, max, sum, count of its finite ones."""
    h, w = a.shape
    s = np.zeros(((h + 1) // 2, (w + 1) // 2), np.float64)
    n = np.zeros(((h + 1) // 2, (w + 1) // 2), np.int64)
    lo, hi, tot, cnt = np.inf, -np.inf, 0.0, 0
    for i in range(h):
        ii = i >> 1
        for j in range(w):
            v = a[i, j]
            if v == v:
                s[ii, j >> 1] += v
                n[ii, j >> 1] += 1
                if v != np.inf and v != -np.inf:
                    lo = min(lo, v)
                    hi = max(hi, v)
                    tot += v
                    cnt += 1
    return s, n, lo, hi, tot, cnt


def mean_pyramid(block: np.ndarray, factors) -> tuple[dict[int, np.ndarray], tuple]:
    """NaN-ignoring mean levels of one block and its (min, max, sum, count) summary, in one pass."""
    s, n, lo, hi, tot, cnt = _halve_with_stats(np.ascontiguousarray(block, dtype=np.float32))
    out, f = {}, 2
    for target in factors:
        while f < target:
            s, n = _halve_mean(s, n)
            f *= 2
        out[target] = _mean_of(s, n)
    return out, (float(lo), float(hi), float(tot), int(cnt))


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
