"""Input windows decoded straight from GeoTIFF tiles (io/tiffread.py) equal GDAL's reads of them.

The reference is GDAL's own reader (libtiff) on files GDAL wrote, across the
data types, codecs, predictors, tile sizes, nodata and sparse tiles inputs come
with; the cases the direct path must leave to GDAL return None.
"""

from __future__ import annotations

import sys

import numba  # noqa: F401  (the direct path is taken only where Numba is loaded)
import numpy as np
import pytest
import rasterio
from rasterio.transform import from_origin
from rasterio.windows import Window

from radledger.errors import InputError
from radledger.grid import TargetGrid
from radledger.io.rasters import LayerSource
from radledger.io.tiffread import BrokenTile, read_tiles

SHAPE = (700, 1100)          # ragged edges for every tile size


def _write(path, a, *, tile=256, compress="zstd", predictor=None, nodata=None, **extra):
    opts = dict(driver="GTiff", width=a.shape[1], height=a.shape[0], count=1, dtype=a.dtype.name,
                crs="EPSG:32611", transform=from_origin(500000, 4100000, 30, 30), tiled=True,
                blockxsize=tile, blockysize=tile, nodata=nodata, **extra)
    if compress:
        opts["compress"] = compress
    if predictor:
        opts["predictor"] = predictor
    with rasterio.open(path, "w", **opts) as ds:
        ds.write(a, 1)
    return path


def _data(dtype, seed=0):
    rng = np.random.default_rng(seed)
    if dtype == "float32":
        a = rng.normal(290, 15, SHAPE).astype(np.float32)
        a[40:90, 100:300] = np.nan
        return a
    info = np.iinfo(dtype)
    return rng.integers(max(info.min, -30000), min(info.max, 60000), SHAPE, endpoint=True).astype(dtype)


def _windows(tile):
    h, w = SHAPE
    yield Window(0, 0, tile, tile)
    yield Window(tile, 0, min(2 * tile, w - tile), tile)              # two tiles (or up to the edge)
    yield Window(0, (h // tile) * tile, tile, h - (h // tile) * tile)  # the ragged last row
    yield Window((w // tile) * tile, (h // tile) * tile, w - (w // tile) * tile, h - (h // tile) * tile)


@pytest.mark.parametrize("dtype,predictor", [("float32", 3), ("float32", 1), ("int16", 2), ("uint16", 2),
                                             ("uint8", 2), ("int32", 1), ("uint16", None)])
@pytest.mark.parametrize("compress", ["zstd", "deflate", None])
def test_direct_tile_reads_equal_gdal(tmp_path, dtype, predictor, compress):
    a = _data(dtype)
    nodata = None if dtype == "float32" else int(a[0, 0])
    path = _write(tmp_path / "x.tif", a, compress=compress, predictor=predictor, nodata=nodata)
    with rasterio.open(path) as ds:
        for win in _windows(256):
            got = read_tiles(ds, win)
            assert got is not None, win
            np.testing.assert_array_equal(got, ds.read(1, window=win))


@pytest.mark.parametrize("tile", [128, 512])
def test_other_tile_sizes_and_misaligned_windows(tmp_path, tile):
    a = _data("float32")
    path = _write(tmp_path / "x.tif", a, tile=tile, predictor=3)
    with rasterio.open(path) as ds:
        for win in _windows(tile):
            np.testing.assert_array_equal(read_tiles(ds, win), ds.read(1, window=win))
        assert read_tiles(ds, Window(10, 0, tile, tile)) is None          # not on a tile edge: GDAL reads it
        assert read_tiles(ds, Window(0, 0, tile + 5, tile)) is None       # ends inside a tile


def test_sparse_tiles_read_as_nodata_like_gdal(tmp_path):
    a = np.full(SHAPE, -9999, np.int16)
    a[:256, :256] = 7
    path = _write(tmp_path / "x.tif", a, nodata=-9999, predictor=2, SPARSE_OK="TRUE")
    with rasterio.open(path) as ds:
        assert not ds.get_tag_item("BLOCK_OFFSET_2_1", "TIFF", bidx=1)   # GDAL left the tile out
        for win in _windows(256):
            np.testing.assert_array_equal(read_tiles(ds, win), ds.read(1, window=win))


@pytest.mark.parametrize("case", ["big-endian", "lzw", "strips", "internal-mask", "two-bands"])
def test_unusual_files_are_left_to_gdal(tmp_path, case):
    a = _data("float32")
    path = tmp_path / "x.tif"
    if case == "big-endian":
        _write(path, a, predictor=3, ENDIANNESS="BIG")
    elif case == "lzw":
        _write(path, a, compress="lzw", predictor=3)
    elif case == "strips":
        with rasterio.open(path, "w", driver="GTiff", width=SHAPE[1], height=SHAPE[0], count=1,
                           dtype="float32", compress="zstd") as ds:
            ds.write(a, 1)
    elif case == "internal-mask":
        with rasterio.Env(GDAL_TIFF_INTERNAL_MASK=True):
            with rasterio.open(path, "w", driver="GTiff", width=SHAPE[1], height=SHAPE[0], count=1,
                               dtype="float32", tiled=True, compress="zstd") as ds:
                ds.write(a, 1)
                ds.write_mask(np.isfinite(a))
    else:
        with rasterio.open(path, "w", driver="GTiff", width=SHAPE[1], height=SHAPE[0], count=2,
                           dtype="float32", tiled=True, compress="zstd") as ds:
            ds.write(np.stack([a, a]))
    with rasterio.open(path) as ds:
        assert read_tiles(ds, Window(0, 0, 256, 256)) is None


def test_without_numba_gdal_reads(tmp_path, monkeypatch):
    path = _write(tmp_path / "x.tif", _data("float32"), predictor=3)
    monkeypatch.delitem(sys.modules, "numba")
    with rasterio.open(path) as ds:
        assert read_tiles(ds, Window(0, 0, 256, 256)) is None


def test_a_corrupt_tile_is_one_line_naming_the_file(tmp_path):
    a = _data("float32")
    path = _write(tmp_path / "x.tif", a, predictor=3)
    with rasterio.open(path) as ds:
        off = int(ds.get_tag_item("BLOCK_OFFSET_0_0", "TIFF", bidx=1))
        n = int(ds.get_tag_item("BLOCK_SIZE_0_0", "TIFF", bidx=1))
    raw = bytearray(path.read_bytes())
    raw[off:off + n] = b"\x00" * n                              # the first tile's bytes overwritten
    path.write_bytes(bytes(raw))
    with rasterio.open(path) as ds, pytest.raises(BrokenTile, match="does not decode"):
        read_tiles(ds, Window(0, 0, 256, 256))
    with rasterio.open(path) as ds:
        grid = TargetGrid(ds.crs, ds.transform, ds.width, ds.height, 256)
    with pytest.raises(InputError, match=r"x\.tif: read failed .*corrupt"):
        LayerSource("surface_temperature", str(path)).read(grid, Window(0, 0, 256, 256))
