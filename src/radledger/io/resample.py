"""Resampling a coarser source onto one grid window, with the geometry computed once.

Where a source grid is coarser than the target (weather at 0.01-0.05 deg onto a 30 m basin),
every date of a season maps the same target pixels to the same source positions.  A
:class:`WindowWarp` computes those positions once per (source grid, window) - exactly on a
lattice every 16 pixels, bilinear in between, as :meth:`TargetGrid.lonlat` does - and then
resamples each date's slab by gathering neighbours, which is several times cheaper than a
GDAL warp per date.  It reproduces GDAL's bilinear (pixel-centre convention; neighbours that are
missing or off the source drop out and the weights of the others are renormalised; a target
pixel whose centre falls outside the source is missing) and nearest-neighbour resampling.
Anything else (averaging, cubic, a source finer than the target) goes through GDAL.
"""

from __future__ import annotations

import numpy as np
from affine import Affine
from pyproj import Transformer
from rasterio.crs import CRS
from rasterio.windows import Window

from ..grid import TargetGrid

__all__ = ["WindowWarp", "FAST_RESAMPLING", "warp_for"]

FAST_RESAMPLING = ("bilinear", "nearest")
_STEP = 16


def _lattice(n: int, step: int) -> np.ndarray:
    return np.unique(np.r_[np.arange(0, n, step), n - 1])


def _interp2(v: np.ndarray, rows: np.ndarray, cols: np.ndarray, h: int, w: int) -> np.ndarray:
    """Bilinear interpolation of lattice values to every pixel (separable: along columns, then rows)."""
    c = np.arange(w)
    along = np.empty((len(rows), w))
    for k in range(len(rows)):
        along[k] = np.interp(c, cols, v[k])
    out = np.empty((h, w))
    r = np.arange(h)
    i = np.clip(np.searchsorted(rows, r, side="right") - 1, 0, max(len(rows) - 2, 0))
    if len(rows) == 1:
        out[:] = along[0]
        return out
    f = ((r - rows[i]) / (rows[i + 1] - rows[i]))[:, None]
    return along[i] * (1 - f) + along[i + 1] * f


class WindowWarp:
    """Where the pixel centres of one window fall on one source grid, and resampling by gathering."""

    def __init__(self, grid: TargetGrid, window: Window, src_crs: CRS, src_transform: Affine,
                 src_shape: tuple[int, int]):
        h, w = int(window.height), int(window.width)
        rows, cols = _lattice(h, _STEP), _lattice(w, _STEP)
        t = grid.window_transform(window)
        x, y = np.meshgrid(t.c + t.a * (cols + 0.5), t.f + t.e * (rows + 0.5))
        if CRS.from_user_input(src_crs) != grid.crs:
            x, y = Transformer.from_crs(grid.crs, src_crs, always_xy=True).transform(x, y)
        inv = ~src_transform
        if CRS.from_user_input(src_crs).is_geographic and src_transform.c >= 0 and np.nanmax(x) < 0:
            x = x + 360.0          # a 0..360 longitude source, a target west of Greenwich
        col_f, row_f = inv * (x, y)
        self.col = _interp2(col_f, rows, cols, h, w).astype(np.float32)   # source pixel coordinates
        self.row = _interp2(row_f, rows, cols, h, w).astype(np.float32)
        self.src_shape = src_shape
        dc = np.abs(np.diff(col_f, axis=1)).max() / _STEP if len(cols) > 1 else 0.0
        dr = np.abs(np.diff(row_f, axis=0)).max() / _STEP if len(rows) > 1 else 0.0
        # upsampling (one target pixel moves less than one source pixel): the 4-neighbour kernel is GDAL's
        self.upsampling = bool(dc < 1.0 and dr < 1.0)
        self.shape = (h, w)

    def bounds(self) -> tuple[int, int, int, int]:
        """(row0, row1, col0, col1) of the source pixels the window needs (clipped to the source)."""
        sh, sw = self.src_shape
        r0 = max(0, int(np.floor(np.nanmin(self.row) - 0.5)) - 1)
        r1 = min(sh, int(np.ceil(np.nanmax(self.row) + 0.5)) + 1)
        c0 = max(0, int(np.floor(np.nanmin(self.col) - 0.5)) - 1)
        c1 = min(sw, int(np.ceil(np.nanmax(self.col) + 0.5)) + 1)
        return r0, max(r0, r1), c0, max(c0, c1)

    def resample(self, slab: np.ndarray, r0: int, c0: int, method: str) -> np.ndarray:
        """The window from ``slab`` (source rows r0.., columns c0..; NaN = missing), float32."""
        sh, sw = self.src_shape
        inside = (self.row >= 0) & (self.row <= sh) & (self.col >= 0) & (self.col <= sw)
        slab = np.asarray(slab, dtype=np.float32)
        hs, ws = slab.shape
        if method == "nearest":
            i = np.floor(self.row).astype(np.int64) - r0
            j = np.floor(self.col).astype(np.int64) - c0
            ok = inside & (i >= 0) & (i < hs) & (j >= 0) & (j < ws)
            out = np.full(self.shape, np.nan, np.float32)
            out[ok] = slab[i[ok], j[ok]]
            return out
        y = self.row - 0.5 - r0
        x = self.col - 0.5 - c0
        i0 = np.floor(y).astype(np.int64)
        j0 = np.floor(x).astype(np.int64)
        fy = (y - i0).astype(np.float32)
        fx = (x - j0).astype(np.float32)
        total = np.zeros(self.shape, np.float32)
        weight = np.zeros(self.shape, np.float32)
        flat = slab.ravel()
        for di, dj, wgt in ((0, 0, (1 - fy) * (1 - fx)), (0, 1, (1 - fy) * fx), (1, 0, fy * (1 - fx)),
                            (1, 1, fy * fx)):
            ii, jj = i0 + di, j0 + dj
            ok = (ii >= 0) & (ii < hs) & (jj >= 0) & (jj < ws)
            v = flat[np.where(ok, ii * ws + jj, 0)]
            ok &= ~np.isnan(v)
            total += np.where(ok, v * wgt, np.float32(0))
            weight += np.where(ok, wgt, np.float32(0))
        with np.errstate(invalid="ignore", divide="ignore"):
            out = total / weight
        out[~inside | (weight < 1e-5)] = np.nan
        return out


def warp_for(cache: dict | None, grid: TargetGrid, window: Window, src_crs, src_transform: Affine,
             src_shape: tuple[int, int]) -> WindowWarp:
    """The :class:`WindowWarp` of a source grid for ``window``, memoised in ``cache`` (per chunk task)."""
    key = (str(src_crs), tuple(src_transform), tuple(src_shape))
    if cache is None:
        return WindowWarp(grid, window, src_crs, src_transform, src_shape)
    if key not in cache:
        cache[key] = WindowWarp(grid, window, src_crs, src_transform, src_shape)
    return cache[key]
