"""Test helper: small synthetic rasters and grids in tmp_path."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import rasterio
from rasterio.enums import Resampling

from radledger.grid import TargetGrid


def utm_grid(width=40, height=30, *, chunk=16, res=30.0, x0=500_000.0, y0=4_200_000.0, crs="EPSG:32611"):
    """A small north-up grid (default UTM 11N, 30 m pixels, top-left corner at x0, y0)."""
    return TargetGrid.from_bounds(crs, res, (x0, y0 - height * res, x0 + width * res, y0), chunk=chunk)


def write_raster(path, grid: TargetGrid, data, *, nodata=None, tags=None, overviews=()) -> Path:
    """Write a single-band GeoTIFF of ``data`` (2-D, dtype kept) on ``grid``.

    ``nodata`` defaults to NaN for float data and none for integer data; ``overviews``
    are decimation factors (e.g. (2, 4)) built with average resampling.
    """
    data = np.asarray(data)
    assert data.shape == grid.shape, (data.shape, grid.shape)
    if nodata is None and data.dtype.kind == "f":
        nodata = np.nan
    profile = dict(driver="GTiff", width=grid.width, height=grid.height, count=1, dtype=data.dtype.name,
                   crs=grid.crs, transform=grid.transform, nodata=nodata, compress="deflate")
    if grid.width >= 16 and grid.height >= 16:
        profile.update(tiled=True, blockxsize=16, blockysize=16)
    path = Path(path)
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(data, 1)
        if tags:
            dst.update_tags(**tags)
        if overviews:
            kind = Resampling.nearest if data.dtype.kind in "iu" else Resampling.average
            dst.build_overviews(list(overviews), kind)
    return path
