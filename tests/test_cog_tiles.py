"""COGs laid out from tiles the chunk tasks compressed (io/tiles.py, io/cogfile.py).

The reference is GDAL: its COG driver writes the same products from the
uncompressed intermediates (a grid chunk that is not a multiple of 512 takes
that path), and GDAL's TIFF reader (libtiff) decodes the tiled files.  The
layout rules checked are those of GDAL's COG driver documentation ("File
layout"): IFDs first (full resolution, then overviews from largest to
smallest), then the tiles from the smallest overview to the full resolution,
row by row, each tile preceded by its size as a uint32 and followed by its
last four bytes.  The predictor checks are worked by hand from the TIFF 6.0
specification (section 14, predictor 2) and Adobe's TIFF Technical Note 3
(predictor 3: bytes of each row regrouped most significant first, then
differenced).
"""

from __future__ import annotations

import struct
import sys

import numpy as np
import pytest
import rasterio
from rasterio.transform import from_origin

from rio_cogeo.cogeo import cog_validate

from radledger.config.load import load_config
from radledger.io import tiles as tilesmod
from radledger.io.cogfile import GHOST, georeferencing_tags, write_cog
from radledger.io.tiles import TileCodec, TileSink, float_predictor, horizontal_predictor
from radledger.runner import run_config

from scenario import make_scenario

PRODUCTS = ("net_radiation", "net_shortwave", "net_longwave", "quality")


def _levels(path):
    """Every level of a GeoTIFF (full resolution first) as arrays."""
    with rasterio.open(path) as ds:
        out = [ds.read(1)]
        n = len(ds.overviews(1))
    for i in range(n):
        with rasterio.open(path, overview_level=i) as ov:
            out.append(ov.read(1))
    return out


def _run(scn, folder: str, chunk: int, compression: str = "zstd"):
    scn.write_config(**{"grid.chunk": chunk, "output.directory": folder, "output.compression": compression})
    run_config(load_config(scn.config))
    return scn.folder / folder / "scenes"


@pytest.mark.parametrize("shape,tiled_chunk,compression", [
    ((1100, 1300), 1024, "zstd"),    # overviews 2 (tiles made in the tasks) and 4 (from a level file)
    ((600, 700), 512, "deflate"),    # overview 2 from a level file only
])
def test_tiled_products_equal_gdal_cog_driver_products(tmp_path, shape, tiled_chunk, compression):
    scn = make_scenario(tmp_path, shape=shape, chunk=256)
    ref = _run(scn, "ref", 256, compression)           # GDAL's COG driver (chunk not a multiple of 512)
    new = _run(scn, "tiled", tiled_chunk, compression)
    assert not [p for p in new.iterdir() if p.name.startswith(".")]      # no spool file or intermediate left
    for name in PRODUCTS:
        (a,) = ref.glob(f"{name}_*.tif")
        b = new / a.name
        with rasterio.open(a) as ra, rasterio.open(b) as rb:
            assert rb.tags(ns="IMAGE_STRUCTURE") == ra.tags(ns="IMAGE_STRUCTURE")   # LAYOUT=COG, codec, predictor
            assert (rb.crs, rb.transform, rb.shape, rb.dtypes, rb.block_shapes) == \
                   (ra.crs, ra.transform, ra.shape, ra.dtypes, ra.block_shapes)
            assert rb.overviews(1) == ra.overviews(1)
            assert rb.descriptions == ra.descriptions
            assert str(rb.nodata) == str(ra.nodata)
            ta, tb = ra.tags(), rb.tags()
            assert {k: v for k, v in tb.items() if k != "created"} == {k: v for k, v in ta.items() if k != "created"}
        for la, lb in zip(_levels(a), _levels(b), strict=True):
            np.testing.assert_array_equal(lb, la)


def _tiff_layout(path):
    """GDAL's view of the file: IFD offset, tile offsets and sizes per level (full resolution first)."""
    out = []
    with rasterio.open(path) as ds:
        n = len(ds.overviews(1))
    for level in [None, *range(n)]:
        kw = {} if level is None else {"overview_level": level}
        with rasterio.open(path, **kw) as ds:
            bh, bw = ds.block_shapes[0]
            ifd = int(ds.get_tag_item("IFD_OFFSET", "TIFF", bidx=1))
            blocks = [(int(ds.get_tag_item(f"BLOCK_OFFSET_{c}_{r}", "TIFF", bidx=1)),
                       int(ds.get_tag_item(f"BLOCK_SIZE_{c}_{r}", "TIFF", bidx=1)))
                      for r in range(-(-ds.height // bh)) for c in range(-(-ds.width // bw))]
        out.append((ifd, blocks))
    return out


def test_tiled_cog_follows_gdal_cog_layout(tmp_path):
    scn = make_scenario(tmp_path, shape=(1100, 1300), chunk=1024)
    out = _run(scn, "out", 1024)
    (path,) = out.glob("net_radiation_*.tif")
    raw = path.read_bytes()
    assert raw[:4] == b"II*\x00"
    assert raw[8:8 + len(GHOST)] == GHOST
    layout = _tiff_layout(path)
    ifds = [ifd for ifd, _ in layout]
    first_ifd = 8 + len(GHOST) + (8 + len(GHOST)) % 2
    assert ifds[0] == struct.unpack_from("<I", raw, 4)[0] == first_ifd      # right after the ghost area
    assert ifds == sorted(ifds)                                              # main, then overviews
    starts = [blocks[0][0] for _, blocks in layout]
    assert max(ifds) < min(starts)                                           # every IFD before any tile
    assert starts[::-1] == sorted(starts)                                    # smallest overview's tiles first
    for _, blocks in layout:
        offsets = [o for o, _ in blocks]
        assert offsets == sorted(offsets)                                    # row by row
        for off, size in blocks:
            assert struct.unpack_from("<I", raw, off - 4)[0] == size         # leader: the tile's size
            assert raw[off + size:off + size + 4] == raw[off + size - 4:off + size]   # trailer: last 4 bytes


@pytest.mark.parametrize("compression", ["zstd", "deflate"])
def test_tiled_products_pass_rio_cogeo_validation(tmp_path, compression):
    # rio-cogeo's cog_validate: the rasterio port of GDAL's validate_cloud_optimized_geotiff.py
    scn = make_scenario(tmp_path, shape=(1100, 1300), chunk=1024)
    out = _run(scn, "out", 1024, compression)
    for name in PRODUCTS:
        (path,) = out.glob(f"{name}_*.tif")
        valid, errors, warnings = cog_validate(str(path), strict=True, quiet=True)
        assert valid and not errors and not warnings, (name, errors, warnings)


def _spool_cog(path, a, codec, factors=(), bigtiff=None, crs="EPSG:32611"):
    """A COG of ``a`` (no overviews) through the spool and the layout writer."""
    h, w = a.shape
    sink = TileSink(str(path) + ".stem", str(path), codec, h, w, (1,), 512)
    spool = sink.spool(str(path) + ".tiles")
    for r in range(0, h, 512):
        for c in range(0, w, 512):
            spool.put(1, r, c, a[r:r + 512, c:c + 512])
    tiles = {entry[:3]: entry[3:] for entry in spool.close()[0]}
    geo = georeferencing_tags(crs=crs, transform=from_origin(500000, 4100000, 30, 30), dtype=codec.dtype,
                              nodata=codec.fill, tags={"units": "W m-2"}, description="fixture")
    write_cog(str(path), codec=codec, width=w, height=h, factors=factors, tiles=tiles, geo=geo, bigtiff=bigtiff)


@pytest.mark.parametrize("crs", ["EPSG:4326", "EPSG:3035",
                                 "+proj=laea +lat_0=44 +lon_0=-109 +ellps=GRS80 +units=m +no_defs"])
def test_georeferencing_equals_gdal_cog_driver_for_other_crs(tmp_path, crs):
    a = np.arange(600 * 520, dtype=np.float32).reshape(600, 520)
    ours = tmp_path / "ours.tif"
    _spool_cog(ours, a, TileCodec("zstd", 1, "float32"), crs=crs)
    ref = tmp_path / "ref.tif"
    with rasterio.open(ref, "w", driver="COG", width=520, height=600, count=1, dtype="float32", crs=crs,
                       transform=from_origin(500000, 4100000, 30, 30), nodata=float("nan"), compress="zstd",
                       blocksize=512, overviews="NONE") as ds:
        ds.write(a, 1)
    with rasterio.open(ours) as o, rasterio.open(ref) as r:
        assert o.crs.to_wkt() == r.crs.to_wkt()
        assert o.transform == r.transform
        np.testing.assert_array_equal(o.read(1), r.read(1))
    assert not list(tmp_path.glob("*.aux.xml"))


@pytest.mark.parametrize("bigtiff", [False, True])
@pytest.mark.parametrize("dtype", ["float32", "uint8"])
def test_gdal_decodes_spooled_tiles_classic_and_bigtiff(tmp_path, bigtiff, dtype):
    rng = np.random.default_rng(3)
    if dtype == "float32":
        a = (rng.normal(300, 40, (700, 1030))).astype(np.float32)
        a[5:50, 600:700] = np.nan
        codec = TileCodec("zstd", 1, "float32")
    else:
        a = rng.integers(0, 40, (700, 1030)).astype(np.uint8)
        codec = TileCodec("deflate", 6, "uint8", fill=255)
    path = tmp_path / "x.tif"
    _spool_cog(path, a, codec, bigtiff=bigtiff)
    assert path.read_bytes()[:4] == (b"II+\x00" if bigtiff else b"II*\x00")
    valid, errors, _ = cog_validate(str(path), quiet=True)       # (no overviews here: a warning only)
    assert valid and not errors, errors
    with rasterio.open(path) as ds:
        np.testing.assert_array_equal(ds.read(1), a)
        assert ds.tags()["units"] == "W m-2" and ds.descriptions == ("fixture",)
        assert ds.tags(ns="IMAGE_STRUCTURE")["LAYOUT"] == "COG"
        assert ds.crs.to_epsg() == 32611 and ds.transform == from_origin(500000, 4100000, 30, 30)


#: one row of two samples, 1.0 (0x3F800000) and 2.0 (0x40000000): bytes regrouped most significant first,
#: 3F 40 | 80 00 | 00 00 | 00 00, then each byte minus the one before it (mod 256)
TN3_ROW = np.array([[1.0, 2.0]], dtype=np.float32)
TN3_EXPECTED = [[0x3F, 0x01, 0x40, 0x80, 0x00, 0x00, 0x00, 0x00]]


def test_float_predictor_worked_from_adobe_technical_note_3(monkeypatch):
    monkeypatch.delitem(sys.modules, "numba", raising=False)        # the NumPy path
    assert float_predictor(TN3_ROW).tolist() == TN3_EXPECTED


def test_float_predictor_loop_matches_the_worked_example_and_numpy(monkeypatch):
    pytest.importorskip("numba")
    raw = TN3_ROW.view(np.uint8).reshape(1, 8)
    assert tilesmod._float_predictor_loop(raw, np.empty_like(raw)).tolist() == TN3_EXPECTED
    a = np.random.default_rng(0).normal(0, 1e3, (64, 48)).astype(np.float32)
    loop = float_predictor(a)                                         # Numba loaded: the compiled loop
    monkeypatch.delitem(sys.modules, "numba")
    np.testing.assert_array_equal(float_predictor(a), loop)


def test_horizontal_predictor_worked_from_tiff6_section14():
    # samples 10, 12, 11, 250 -> 10, 2, 255 (= -1 mod 256), 239
    assert horizontal_predictor(np.array([[10, 12, 11, 250]], np.uint8)).tolist() == [[10, 2, 255, 239]]


def test_a_missing_tile_is_named_and_nothing_is_written(tmp_path):
    codec = TileCodec("zstd", 1, "float32")
    a = np.ones((600, 600), np.float32)
    sink = TileSink(str(tmp_path / "s"), str(tmp_path / "x.tif"), codec, 600, 600, (1,), 512)
    spool = sink.spool(str(tmp_path / "s.tiles"))
    spool.put(1, 0, 0, a[:512, :512])
    tiles = {e[:3]: e[3:] for e in spool.close()[0]}
    geo = georeferencing_tags(crs="EPSG:32611", transform=from_origin(500000, 4100000, 30, 30), dtype="float32",
                              nodata=float("nan"), tags={}, description="x")
    with pytest.raises(OSError, match=r"tile \(row 0, column 1\) of level 1/1 was never written"):
        write_cog(str(tmp_path / "x.tif"), codec=codec, width=600, height=600, factors=(), tiles=tiles, geo=geo)
    assert not (tmp_path / "x.tif").exists()


def test_overview_tile_waits_for_every_block_under_it(tmp_path):
    codec = TileCodec("zstd", 1, "float32")
    sink = TileSink(str(tmp_path / "s"), str(tmp_path / "x.tif"), codec, 1000, 1000, (1, 2), 512)
    spool = sink.spool(str(tmp_path / "s.tiles"))
    spool.put(2, 0, 0, np.ones((256, 256), np.float32))
    spool.put(2, 0, 256, np.ones((256, 244), np.float32))
    spool.put(2, 256, 0, np.ones((244, 256), np.float32))
    with pytest.raises(RuntimeError, match="overview tiles left incomplete"):
        spool.close()
    spool.put(2, 256, 256, np.ones((244, 244), np.float32))
    assert [e[:3] for e in spool.close()[0]] == [(2, 0, 0)]


def test_levels_beyond_the_task_levels_equal_gdal_path(tmp_path, monkeypatch):
    # On grids wider than 512 x 512 tiles the tasks stop at factor 512 and coarser levels are averaged
    # from the coarsest task level.  Pretend the tasks stop at factor 4 so that a small grid needs it:
    # factor 8 then comes from factor 4 on both paths.
    from radledger.execution import graph
    monkeypatch.setattr(graph, "overview_factors", lambda w, h: (2, 4))
    scn = make_scenario(tmp_path, shape=(2100, 1100), chunk=256)
    ref = _run(scn, "ref", 256)
    new = _run(scn, "tiled", 1024)
    for name in ("net_radiation", "quality"):
        (a,) = ref.glob(f"{name}_*.tif")
        levels_a, levels_b = _levels(a), _levels(new / a.name)
        assert len(levels_a) == len(levels_b) == 4          # factors 2, 4, 8
        for la, lb in zip(levels_a, levels_b):
            np.testing.assert_array_equal(lb, la)
