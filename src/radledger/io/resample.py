"""Resampling a coarser source onto one grid window, with the geometry computed once.

Where a source grid is coarser than the target (weather at 0.01-0.05 deg onto a 30 m basin),
every date of a season maps the same target pixels to the same source positions.  A
:class:`WindowWarp` computes those positions once per (source grid, window) - exactly on a
lattice every 16 pixels, bilinear in between, as :meth:`TargetGrid.lonlat` does - and then
resamples each date's slab by gathering neighbours, which is several times cheaper than a
GDAL warp per date.  It reproduces GDAL's bilinear (pixel-centre convention; neighbours that are
missing or off the source drop out and the weights of the others are renormalised, provided they
hold at least half of the weight, else the pixel is missing; a target pixel whose centre falls
outside the source is missing) and nearest-neighbour resampling.
Anything else (averaging, cubic, a source finer than the target) goes through GDAL.
"""

from __future__ import annotations

import numpy as np
from affine import Affine
from rasterio.crs import CRS
from rasterio.windows import Window

from ..grid import TargetGrid

__all__ = ["WindowWarp", "FAST_RESAMPLING", "warp_for"]

FAST_RESAMPLING = ("bilinear", "nearest")


class WindowWarp:
    """Where the pixel centres of one window fall on one source grid, and resampling by gathering."""

    def __init__(self, grid: TargetGrid, window: Window, src_crs: CRS, src_transform: Affine,
                 src_shape: tuple[int, int]):
        h, w = int(window.height), int(window.width)
        lattice = grid.lattice(window)
        rows, cols = lattice.rows, lattice.cols
        x, y = lattice.xy()
        if CRS.from_user_input(src_crs) != grid.crs:
            x, y = grid.transformer_to(src_crs).transform(x, y)
        inv = ~src_transform
        if CRS.from_user_input(src_crs).is_geographic and src_transform.c >= 0 and np.nanmax(x) < 0:
            x = x + 360.0          # a 0..360 longitude source, a target west of Greenwich
        col_f, row_f = inv * (x, y)
        self.col = lattice.spread(col_f, np.float32)   # source pixel coordinates of every pixel centre
        self.row = lattice.spread(row_f, np.float32)
        self.src_shape = src_shape
        sh, sw = src_shape
        # GDAL: a target pixel whose centre falls outside the source gets no value
        self.inside = (self.row >= 0) & (self.row <= sh) & (self.col >= 0) & (self.col <= sw)
        dc = (np.abs(np.diff(col_f, axis=1)) / np.diff(cols)[None, :]).max() if len(cols) > 1 else 0.0
        dr = (np.abs(np.diff(row_f, axis=0)) / np.diff(rows)[:, None]).max() if len(rows) > 1 else 0.0
        # upsampling (one target pixel moves less than one source pixel): the 4-neighbour kernel is GDAL's
        self.upsampling = bool(dc < 1.0 and dr < 1.0)
        self.shape = (h, w)
        self._plans: dict = {}

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
        slab = np.asarray(slab, dtype=np.float32)
        hs, ws = slab.shape
        plan = self._plan(slab.shape, r0, c0, method)
        # the slab inside a border of missing cells: a neighbour off the slab (off the source) is missing
        padded = np.full((hs + 2, ws + 2), np.nan, np.float32)
        padded[1:-1, 1:-1] = slab
        flat = padded.ravel()
        i00 = plan["i00"]
        if method == "nearest":
            out = np.take(flat, i00)
            out[~self.inside] = np.nan
            return out
        fx, fy = plan["fx"], plan["fy"]
        row = ws + 2
        # the four neighbours by gathering from shifted views (no index arrays per date)
        a, b, c, d = (np.take(flat[k:], i00) for k in (0, 1, row, row + 1))
        top = a + (b - a) * fx
        out = top + ((c + (d - c) * fx) - top) * fy
        redo = np.isnan(out)
        redo &= self.inside
        if redo.any():   # a missing or off-source neighbour: GDAL drops it and renormalises the rest
            k = np.flatnonzero(redo.ravel())
            base = i00.ravel()[k]
            total = np.zeros(k.size, np.float32)
            weight = np.zeros(k.size, np.float32)
            fxk, fyk = fx.ravel()[k], fy.ravel()[k]
            for shift, wgt in ((0, (1 - fyk) * (1 - fxk)), (1, (1 - fyk) * fxk),
                               (row, fyk * (1 - fxk)), (row + 1, fyk * fxk)):
                v = flat[base + shift]
                ok = ~np.isnan(v)
                total += np.where(ok, v * wgt, np.float32(0))
                weight += np.where(ok, wgt, np.float32(0))
            with np.errstate(invalid="ignore", divide="ignore"):
                out.ravel()[k] = np.where(weight >= 0.5, total / weight, np.nan)
        out[~self.inside] = np.nan
        return out

    def _plan(self, shape, r0: int, c0: int, method: str) -> dict:
        """Each pixel's first neighbour in a slab of ``shape`` at (r0, c0) with a border of one cell
        (flat index), and its weights.

        The same for every date a task reads (the slab's place follows from the geometry), so it is
        computed once.  Only the first neighbour is stored: the others are 1, a row and a row + 1
        cells further on (the border keeps every one of them on the padded slab).
        """
        key = (tuple(shape), r0, c0, method)
        if self._plans.get("key") == key:
            return self._plans
        hs, ws = shape
        if method == "nearest":
            i = np.clip(np.floor(self.row) - r0, -1, hs).astype(np.int32)
            j = np.clip(np.floor(self.col) - c0, -1, ws).astype(np.int32)
        else:
            y = self.row - np.float32(0.5 + r0)
            x = self.col - np.float32(0.5 + c0)
            i = np.clip(np.floor(y), -1, hs - 1).astype(np.int32)
            j = np.clip(np.floor(x), -1, ws - 1).astype(np.int32)
            fy, fx = y - i.astype(np.float32), x - j.astype(np.float32)
            np.clip(fy, 0, 1, out=fy)     # a pixel beyond the border row: its weight on that border
            np.clip(fx, 0, 1, out=fx)
        i += 1
        j += 1
        i *= ws + 2
        i += j
        self._plans = {"key": key, "i00": i} if method == "nearest" else {"key": key, "i00": i, "fx": fx, "fy": fy}
        return self._plans


def warp_for(cache: dict | None, grid: TargetGrid, window: Window, src_crs, src_transform: Affine,
             src_shape: tuple[int, int]) -> WindowWarp:
    """The :class:`WindowWarp` of a source grid for ``window``, memoised in ``cache`` (per chunk task)."""
    key = (str(src_crs), tuple(src_transform), tuple(src_shape), int(window.row_off), int(window.col_off),
           int(window.height), int(window.width))
    if cache is None:
        return WindowWarp(grid, window, src_crs, src_transform, src_shape)
    if key not in cache:
        cache[key] = WindowWarp(grid, window, src_crs, src_transform, src_shape)
    return cache[key]
