"""Finished products on the run's grid as lazy Dask arrays (one grid chunk per task)."""

from __future__ import annotations

import os
from pathlib import Path

import dask.array as da
import numpy as np
import rasterio
from dask.base import tokenize

from ..errors import InputError
from ..grid import TargetGrid

__all__ = ["read_product", "product_reader"]


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
            return self.read(src, window)

    def read(self, src, window):
        """Band 1 of ``window`` (rasterio window) from ``src``, this file opened by the caller, decoded."""
        block = src.read(1, window=window)
        if self.dtype.kind == "f":
            block = block.astype(self.dtype, copy=False)
            if self.nodata is not None and not np.isnan(self.nodata):
                block[block == self.nodata] = np.nan
        return block


def product_reader(path: str | os.PathLike, grid: TargetGrid, *, dtype="float32") -> _WindowReader:
    """A product file's window reader (``reader[rows, cols]``, ``reader.read(src, window)``), after
    checking that it opens and lies on ``grid`` (:class:`InputError` otherwise); see :func:`read_product`."""
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
    return _WindowReader(path, grid.shape, dtype, nodata)


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
    reader = product_reader(path, grid, dtype=dtype)
    path = reader.path
    try:
        stat = os.stat(path)
        stamp = (stat.st_mtime_ns, stat.st_size)
    except OSError:  # remote (/vsicurl/ ...) paths
        stamp = None
    name = f"read-{Path(path).stem}-{tokenize(path, stamp, np.dtype(dtype).str, grid.chunk)}"
    return da.from_array(reader, chunks=grid.chunks, name=name, lock=False, asarray=False,
                         fancy=False, meta=np.empty((0, 0), dtype=dtype))
