"""Per-pixel moments over dates, shared by composites (over time) and zone tables (over space).

Welford's update folds values one by one; Chan, Golub & LeVeque (1979) merge
two partial results exactly, so any split of the samples gives the same answer.
"""

from __future__ import annotations

import numpy as np

__all__ = ["moments_of_dates", "merge_moments", "median_of_dates", "N", "MEAN", "M2", "MIN", "MAX"]

# rows of a moments array (see moments_of_dates)
N, MEAN, M2, MIN, MAX = range(5)


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
    na, nb = a[N], b[N]
    n = na + nb
    frac = np.divide(nb, n, out=np.zeros_like(n), where=n > 0)
    delta = b[MEAN] - a[MEAN]
    mean = a[MEAN] + delta * frac
    m2 = a[M2] + b[M2] + delta * delta * na * frac
    return np.stack([n, mean, m2, np.fmin(a[MIN], b[MIN]), np.fmax(a[MAX], b[MAX])])


def median_of_dates(*blocks: np.ndarray, rows: int = 64) -> np.ndarray:
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
