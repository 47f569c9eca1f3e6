"""Resampling a coarser grid by gathering (io/resample.py) equals GDAL's own warp, the reference."""

from __future__ import annotations

import numpy as np
import pytest
from affine import Affine
from rasterio.crs import CRS
from rasterio.enums import Resampling
from pyproj import Transformer
import rasterio
from rasterio.vrt import WarpedVRT
from rasterio.windows import Window

from radledger.grid import TargetGrid
from radledger.io.resample import WindowWarp

GRID = TargetGrid(CRS.from_epsg(32611), Affine(30.0, 0, 300000.0, 0, -30.0, 4300000.0), 700, 600, chunk=256)
SRC_T = Affine(0.01, 0, -119.315, 0, -0.01, 38.835)   # a 0.01 deg lon/lat source over most of the grid


def _gdal(src, window, method, tmp):
    """GDAL's warp of ``src`` onto ``window``, its transformation approximated to 1e-6 source pixels."""
    path = tmp / "src.tif"
    with rasterio.open(path, "w", driver="GTiff", width=src.shape[1], height=src.shape[0], count=1,
                       dtype="float32", crs="EPSG:4326", transform=SRC_T, nodata=np.nan) as ds:
        ds.write(src, 1)
    with rasterio.open(path) as ds, WarpedVRT(ds, crs=GRID.crs, transform=GRID.window_transform(window),
                                              width=int(window.width), height=int(window.height),
                                              resampling=Resampling[method], tolerance=1e-6, nodata=np.nan) as vrt:
        return vrt.read(1)


def test_the_geometry_is_exact():
    # where each pixel centre falls on the source, against pyproj at every pixel
    window = Window(0, 0, 256, 256)
    warp = WindowWarp(GRID, window, CRS.from_epsg(4326), SRC_T, (16, 22))
    x, y = GRID.pixel_centres(window)
    col, row = ~SRC_T * Transformer.from_crs(GRID.crs, "EPSG:4326", always_xy=True).transform(x, y)
    assert np.abs(col - warp.col).max() < 1e-4 and np.abs(row - warp.row).max() < 1e-4   # source pixels


@pytest.mark.parametrize("method", ["bilinear", "nearest"])
@pytest.mark.parametrize("holes", [False, True])
def test_gathering_equals_gdal(method, holes, tmp_path):
    rng = np.random.default_rng(4)
    src = rng.uniform(0, 100, (16, 22)).astype(np.float32)    # ends inside the grid: its edge is tested too
    if holes:
        src[10:12, 5:9] = np.nan
        src[0, :] = np.nan
    for window in (Window(0, 0, 256, 256), Window(512, 256, 188, 256)):
        expected = _gdal(src, window, method, tmp_path)
        warp = WindowWarp(GRID, window, CRS.from_epsg(4326), SRC_T, src.shape)
        assert warp.upsampling
        r0, r1, c0, c1 = warp.bounds()
        got = warp.resample(src[r0:r1, c0:c1], r0, c0, method)
        assert np.isfinite(expected).mean() > 0.3
        np.testing.assert_array_equal(np.isnan(got), np.isnan(expected))
        # float32 arithmetic; the lattice moves a pixel by < 1e-5 of a source pixel (about 1e-3 of a value here)
        np.testing.assert_allclose(got, expected, atol=2e-3, equal_nan=True)
