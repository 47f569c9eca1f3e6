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
from pyproj import Transformer
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
            x, y = Transformer.from_crs(grid.crs, src_crs, always_xy=True).transform(x, y)
        inv = ~src_transform
        if CRS.from_user_input(src_crs).is_geographic and src_transform.c >= 0 and np.nanmax(x) < 0:
            x = x + 360.0          # a 0..360 longitude source, a target west of Greenwich
        col_f, row_f = inv * (x, y)
        self.col = lattice.spread(col_f, np.float32)   # source pixel coordinates of every pixel centre
        self.row = lattice.spread(row_f, np.float32)
        self.src_shape = src_shape
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
        plan = self._plan(slab.shape, r0, c0, method)
        flat = np.concatenate([slab.ravel(), np.full(1, np.nan, np.float32)])   # the last cell: "off the slab"
        if method == "nearest":
            return flat[plan["i00"]].reshape(self.shape)
        fx, fy = plan["fx"], plan["fy"]
        a, b, c, d = (np.take(flat, plan[k]) for k in ("i00", "i01", "i10", "i11"))
        top = a + (b - a) * fx
        out = top + ((c + (d - c) * fx) - top) * fy
        redo = plan["edge"] if not np.isnan(slab).any() else np.isnan(out) | plan["edge"]
        if redo.any():   # a missing or off-source neighbour: GDAL drops it and renormalises the rest
            k = np.flatnonzero(redo.ravel())
            total = np.zeros(k.size, np.float32)
            weight = np.zeros(k.size, np.float32)
            fxk, fyk = fx.ravel()[k], fy.ravel()[k]
            for name, wgt in (("i00", (1 - fyk) * (1 - fxk)), ("i01", (1 - fyk) * fxk),
                              ("i10", fyk * (1 - fxk)), ("i11", fyk * fxk)):
                v = flat[plan[name].ravel()[k]]
                ok = ~np.isnan(v)
                total += np.where(ok, v * wgt, np.float32(0))
                weight += np.where(ok, wgt, np.float32(0))
            with np.errstate(invalid="ignore", divide="ignore"):
                out.ravel()[k] = np.where(weight >= 0.5, total / weight, np.nan)
        out[~plan["inside"]] = np.nan
        return out

    def _plan(self, shape, r0: int, c0: int, method: str) -> dict:
        """Flat indices of each pixel's neighbours in a slab of ``shape`` at (r0, c0), and the weights.

        The same for every date a task reads (the slab's place follows from the geometry), so it is
        computed once; a neighbour off the slab points at an extra NaN cell.
        """
        key = (tuple(shape), r0, c0, method)
        if self._plans.get("key") == key:
            return self._plans
        hs, ws = shape
        sh, sw = self.src_shape
        inside = (self.row >= 0) & (self.row <= sh) & (self.col >= 0) & (self.col <= sw)
        off = hs * ws      # index of the NaN cell

        def index(i, j):
            ok = (i >= 0) & (i < hs) & (j >= 0) & (j < ws)
            return np.where(ok, i * ws + j, off).astype(np.int32), ok

        if method == "nearest":
            i00, _ = index(np.floor(self.row).astype(np.int64) - r0, np.floor(self.col).astype(np.int64) - c0)
            self._plans = {"key": key, "i00": np.where(inside, i00, off).astype(np.int32)}
            return self._plans
        y = self.row - np.float32(0.5) - r0
        x = self.col - np.float32(0.5) - c0
        i0 = np.floor(y).astype(np.int64)
        j0 = np.floor(x).astype(np.int64)
        plan = {"key": key, "fy": (y - i0).astype(np.float32), "fx": (x - j0).astype(np.float32), "inside": inside}
        edge = np.zeros(self.shape, bool)
        for name, di, dj in (("i00", 0, 0), ("i01", 0, 1), ("i10", 1, 0), ("i11", 1, 1)):
            plan[name], ok = index(i0 + di, j0 + dj)
            edge |= ~ok
        plan["edge"] = edge & inside
        self._plans = plan
        return plan


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
