"""The target grid: one CRS, transform and shape that every input is aligned onto.

A :class:`TargetGrid` is a small immutable value.  It knows its chunking, so
every part of the pipeline (inputs, physics, writers, zones) iterates over the
same windows, and it can give the longitude/latitude of the pixel centres of
any window without building full-scene coordinate arrays.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from typing import Iterator

import numpy as np
from affine import Affine
from rasterio.crs import CRS
from rasterio.windows import Window

from .errors import GridError

__all__ = ["TargetGrid", "Lattice", "LATTICE_STEP"]

LATTICE_STEP = 16


@dataclass(frozen=True)
class TargetGrid:
    """A north-up raster grid with a chunk edge.

    Parameters
    ----------
    crs : rasterio.crs.CRS
        Coordinate reference system of the grid.
    transform : affine.Affine
        Pixel-corner affine transform (rasterio convention).
    width, height : int
        Grid size [pixel].
    chunk : int
        Edge of the square Dask chunks [pixel].
    """

    crs: CRS
    transform: Affine
    width: int
    height: int
    chunk: int = 1024

    def __post_init__(self):
        if self.width <= 0 or self.height <= 0:
            raise GridError(f"grid: size {self.width} x {self.height} is empty; check grid bounds/resolution")
        if self.chunk <= 0:
            raise GridError(f"grid.chunk: {self.chunk} must be a positive number of pixels")
        if self.transform.b != 0 or self.transform.d != 0:
            raise GridError("grid: rotated transforms are not supported; warp the input to a north-up grid first")

    # --- construction ---------------------------------------------------
    @classmethod
    def from_bounds(cls, crs, resolution, bounds, chunk=1024) -> "TargetGrid":
        """A grid from ``bounds = (xmin, ymin, xmax, ymax)`` and a square or (x, y) resolution."""
        rx, ry = (resolution, resolution) if np.isscalar(resolution) else resolution
        xmin, ymin, xmax, ymax = bounds
        if rx <= 0 or ry <= 0:
            raise GridError(f"grid.resolution: {resolution} must be positive")
        if xmax <= xmin or ymax <= ymin:
            raise GridError(f"grid.bounds: {list(bounds)} must be [xmin, ymin, xmax, ymax] with xmin < xmax and ymin < ymax")
        width = int(np.ceil((xmax - xmin) / rx - 1e-9))
        height = int(np.ceil((ymax - ymin) / ry - 1e-9))
        return cls(CRS.from_user_input(crs), Affine(rx, 0.0, xmin, 0.0, -ry, ymax), width, height, int(chunk))

    @classmethod
    def from_dataset(cls, dataset, chunk=1024) -> "TargetGrid":
        """The grid of an open rasterio dataset."""
        if dataset.crs is None:
            raise GridError(f"{dataset.name}: has no CRS; assign one (e.g. gdal_edit.py -a_srs EPSG:xxxx) before using it as the grid")
        return cls(CRS.from_user_input(dataset.crs), dataset.transform, dataset.width, dataset.height, int(chunk))

    # --- geometry -------------------------------------------------------
    @property
    def shape(self) -> tuple[int, int]:
        return (self.height, self.width)

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        t = self.transform
        x0, y0 = t.c, t.f
        x1, y1 = _apply(t, self.width, self.height)
        return (min(x0, x1), min(y0, y1), max(x0, x1), max(y0, y1))

    @property
    def resolution(self) -> tuple[float, float]:
        return (abs(self.transform.a), abs(self.transform.e))

    @property
    def chunks(self) -> tuple[tuple[int, ...], tuple[int, ...]]:
        """Dask chunks of a 2-D array on this grid."""
        return (_split(self.height, self.chunk), _split(self.width, self.chunk))

    def windows(self) -> Iterator[Window]:
        """Every chunk window, row-major."""
        r = 0
        for h in self.chunks[0]:
            c = 0
            for w in self.chunks[1]:
                yield Window(c, r, w, h)
                c += w
            r += h

    def window_transform(self, window: Window) -> Affine:
        t = self.transform
        x, y = _apply(t, window.col_off, window.row_off)
        return Affine(t.a, t.b, x, t.d, t.e, y)

    def window_bounds(self, window: Window) -> tuple[float, float, float, float]:
        t = self.window_transform(window)
        x0, y0 = t.c, t.f
        x1, y1 = _apply(t, window.width, window.height)
        return (min(x0, x1), min(y0, y1), max(x0, x1), max(y0, y1))

    def pixel_centres(self, window: Window) -> tuple[np.ndarray, np.ndarray]:
        """x, y of the pixel centres of ``window`` in the grid CRS (2-D arrays)."""
        t = self.window_transform(window)
        cols = np.arange(int(window.width)) + 0.5
        rows = np.arange(int(window.height)) + 0.5
        xs = t.c + t.a * cols
        ys = t.f + t.e * rows
        return np.meshgrid(xs, ys)

    def lattice(self, window: Window, *, step: int = LATTICE_STEP) -> "Lattice":
        """Every ``step``-th pixel centre of ``window`` (and the last row/column), for smooth fields."""
        return Lattice(self, window, step)

    def lonlat(self, window: Window, *, step: int = LATTICE_STEP) -> tuple[np.ndarray, np.ndarray]:
        """Longitude, latitude [deg] of the pixel centres of ``window``.

        Projected grids are transformed exactly on a lattice every ``step``
        pixels and interpolated bilinearly in between: map projections are
        smooth, so over a few hundred metres the interpolation error is far
        below 1e-6 deg (tests/test_grid.py), at 1/step^2 of the cost of
        transforming every pixel (pyproj dominated the chunk time otherwise).
        """
        if self.crs.is_geographic:
            return self.pixel_centres(window)
        h, w = int(window.height), int(window.width)
        if step <= 1 or (h <= step and w <= step):
            x, y = self.pixel_centres(window)
            return self._to_lonlat.transform(x, y)
        lattice = self.lattice(window, step=step)
        lon, lat = lattice.lonlat()
        return lattice.spread(lon), lattice.spread(lat)

    def lonlat_corners(self, window: Window) -> tuple[np.ndarray, np.ndarray]:
        """Longitude, latitude [deg] of the four corner pixel centres of ``window`` (2 x 2)."""
        t = self.window_transform(window)
        cols = np.array([0.5, int(window.width) - 0.5])
        rows = np.array([0.5, int(window.height) - 0.5])
        x, y = np.meshgrid(t.c + t.a * cols, t.f + t.e * rows)
        if self.crs.is_geographic:
            return x, y
        return self._to_lonlat.transform(x, y)

    def to_lonlat(self, x, y) -> tuple[np.ndarray, np.ndarray]:
        """Longitude, latitude [deg] of points ``x, y`` in the grid's CRS."""
        return self._to_lonlat.transform(x, y)

    @cached_property
    def identity(self) -> str:
        """An exact identity of the grid: CRS (WKT), affine transform (every coefficient, exactly) and shape.

        Two grids that differ in anything that moves a pixel - half a pixel of
        origin, one standard parallel of a custom projection - have different
        identities; the chunk edge is not part of it (it changes no pixel).
        Settings hashes and task names use this, never :meth:`describe`.
        """
        t = self.transform
        coefficients = ",".join(float(v).hex() for v in (t.a, t.b, t.c, t.d, t.e, t.f))
        return f"{self.crs.to_wkt()}|{coefficients}|{self.width}x{self.height}"

    def transformer_to(self, crs):
        """A pyproj transformer from the grid's CRS to ``crs`` (x/y order), made once per CRS.

        Making one costs milliseconds (a PROJ database look-up), more than transforming a chunk's
        lattice; pyproj transformers may be shared between threads.
        """
        from pyproj import Transformer

        key = CRS.from_user_input(crs).to_wkt()
        cache = self.__dict__.setdefault("_transformers", {})
        if key not in cache:
            cache[key] = Transformer.from_crs(self.crs, crs, always_xy=True)
        return cache[key]

    @cached_property
    def _to_lonlat(self):
        from pyproj import Transformer

        return Transformer.from_crs(self.crs, "EPSG:4326", always_xy=True)

    def pixel_area(self, window: Window) -> np.ndarray:
        """Area of each pixel of ``window`` [m2] (exact for projected grids, ellipsoidal for geographic)."""
        if not self.crs.is_geographic:
            a = abs(self.transform.a * self.transform.e)
            return np.full((int(window.height), int(window.width)), a)
        # exact area of a lon/lat cell on the WGS84 ellipsoid (authalic-latitude form):
        # A = a^2 (1 - e^2) dlon / 2 * [q(lat2) - q(lat1)],
        # q(p) = sin p / (1 - e^2 sin^2 p) + ln((1 + e sin p) / (1 - e sin p)) / (2 e)
        a_, f_ = 6378137.0, 1 / 298.257223563
        e2 = f_ * (2 - f_)
        e = np.sqrt(e2)
        t = self.window_transform(window)
        dx, dy = abs(t.a), abs(t.e)
        _, lat = self.lonlat(window)
        lat_c = lat[:, 0]

        def q(p):
            sp = np.sin(np.deg2rad(p))
            return sp / (1 - e2 * sp**2) + np.log((1 + e * sp) / (1 - e * sp)) / (2 * e)

        area = a_**2 * (1 - e2) * np.deg2rad(dx) / 2 * np.abs(q(lat_c + dy / 2) - q(lat_c - dy / 2))
        return np.repeat(area[:, None], int(window.width), axis=1)

    def same_as(self, crs, transform, width, height, *, tol: float = 1e-6) -> bool:
        """True if another raster lies exactly on this grid (same CRS, pixels and size)."""
        if (width, height) != (self.width, self.height) or crs is None:
            return False
        if CRS.from_user_input(crs) != self.crs:
            return False
        return transform.almost_equals(self.transform, precision=tol * max(self.resolution))

    def describe(self) -> str:
        x0, y0, x1, y1 = self.bounds
        rx, ry = self.resolution
        epsg = self.crs.to_epsg()
        crs = f"EPSG:{epsg}" if epsg else self.crs.to_string()[:60]
        return (f"{crs}, {self.width} x {self.height} px at {rx:g} x {ry:g}, "
                f"bounds [{x0:.6g}, {y0:.6g}, {x1:.6g}, {y1:.6g}], chunk {self.chunk}")


class Lattice:
    """The pixel centres of a window every ``step`` pixels, and bilinear spreading to every pixel.

    Fields that vary smoothly over a few hundred metres (coordinates, the sun's angles, daily
    extraterrestrial radiation, where pixels fall on a coarser grid) are computed exactly at the
    lattice's points and interpolated in between, at 1/step^2 of the cost.
    """

    def __init__(self, grid: TargetGrid, window: Window, step: int = LATTICE_STEP):
        self.grid, self.window, self.step = grid, window, step
        self.h, self.w = int(window.height), int(window.width)
        self.rows = np.unique(np.r_[np.arange(0, self.h, step), self.h - 1])
        self.cols = np.unique(np.r_[np.arange(0, self.w, step), self.w - 1])

    @classmethod
    def of_shape(cls, shape: tuple[int, int], step: int = LATTICE_STEP) -> "Lattice":
        """The lattice of an array of ``shape`` (for spreading values already on it; no coordinates)."""
        return cls(None, Window(0, 0, shape[1], shape[0]), step)

    def xy(self) -> tuple[np.ndarray, np.ndarray]:
        """The lattice points in the grid's CRS (2-D, rows x cols)."""
        t = self.grid.window_transform(self.window)
        return np.meshgrid(t.c + t.a * (self.cols + 0.5), t.f + t.e * (self.rows + 0.5))

    def lonlat(self) -> tuple[np.ndarray, np.ndarray]:
        """Longitude, latitude [deg] of the lattice points."""
        x, y = self.xy()
        return (x, y) if self.grid.crs.is_geographic else self.grid.to_lonlat(x, y)

    def spread(self, values: np.ndarray, dtype=np.float64) -> np.ndarray:
        """Values at the lattice points, interpolated bilinearly to every pixel of the window."""
        v = np.asarray(values, dtype=np.float64)
        c = np.arange(self.w)
        along = np.empty((len(self.rows), self.w))
        for k in range(len(self.rows)):
            along[k] = np.interp(c, self.cols, v[k])
        if len(self.rows) == 1:
            return np.broadcast_to(along[0], (self.h, self.w)).astype(dtype)
        r = np.arange(self.h)
        i = np.clip(np.searchsorted(self.rows, r, side="right") - 1, 0, len(self.rows) - 2)
        f = ((r - self.rows[i]) / (self.rows[i + 1] - self.rows[i]))[:, None]
        out = along[i]
        out *= 1 - f
        out += along[i + 1] * f
        return out.astype(dtype, copy=False)


def _apply(t: Affine, col: float, row: float) -> tuple[float, float]:
    """Map pixel (col, row) to x, y (written out: affine deprecates ``*`` for this)."""
    return t.a * col + t.b * row + t.c, t.d * col + t.e * row + t.f


def _split(n: int, step: int) -> tuple[int, ...]:
    full, rest = divmod(n, step)
    return (step,) * full + ((rest,) if rest else ())
