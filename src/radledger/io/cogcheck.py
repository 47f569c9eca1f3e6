"""Checks that a written GeoTIFF is whole: every tile that received data lies inside the file.

GDAL does not report every failed write (see io/cog.py), so the intermediates
and each finished COG are checked through GDAL's own view of their tile
offsets and sizes, and the COG's last tile and smallest overview are decoded.
"""

from __future__ import annotations

import os

import rasterio
from rasterio.windows import Window

from .gdalapi import gdal_failures
from .gdalenv import gdal_env

__all__ = ["check_tiles_written", "verify_cog"]


def check_tiles_written(path: str, touched: set[tuple[int, int]]) -> None:
    """Every tile that received data is stored inside the file (a lost write leaves it sparse)."""
    if not touched:
        return
    size = os.path.getsize(path)
    with gdal_env(), rasterio.open(path) as ds:
        for tr, tc in sorted(touched):
            off = ds.get_tag_item(f"BLOCK_OFFSET_{tc}_{tr}", "TIFF", bidx=1)
            n = ds.get_tag_item(f"BLOCK_SIZE_{tc}_{tr}", "TIFF", bidx=1)
            if not off or not n or int(off) + int(n) > size:
                raise OSError(f"{path}: tile ({tr}, {tc}) was written but is not in the file")


def verify_cog(path: str, *, width: int, height: int, dtype: str) -> None:
    """Raise ``OSError`` unless ``path`` is a whole COG: header, every tile, last tile, smallest overview.

    Each tile of the image and of every overview must lie inside the file;
    the last tile of the image (written last) and the whole smallest overview
    are decoded.
    """
    size = os.path.getsize(path)
    with gdal_failures(path), gdal_env():
        with rasterio.open(path) as ds:
            if (ds.width, ds.height, ds.dtypes[0]) != (width, height, dtype):
                raise OSError(f"{path}: header says {ds.width} x {ds.height} {ds.dtypes[0]}, "
                              f"expected {width} x {height} {dtype}")
            n_levels = len(ds.overviews(1))
            _tiles_inside(ds, size, None)
            bh, bw = ds.block_shapes[0]
            r0, c0 = (height - 1) // bh * bh, (width - 1) // bw * bw
            ds.read(1, window=Window(c0, r0, width - c0, height - r0))
        for level in range(n_levels):
            with rasterio.open(path, overview_level=level) as ov:
                _tiles_inside(ov, size, level)
                if level == n_levels - 1:
                    ov.read(1)


def _tiles_inside(ds, size: int, level) -> None:
    bh, bw = ds.block_shapes[0]
    for r in range(-(-ds.height // bh)):
        for c in range(-(-ds.width // bw)):
            off = ds.get_tag_item(f"BLOCK_OFFSET_{c}_{r}", "TIFF", bidx=1)
            n = ds.get_tag_item(f"BLOCK_SIZE_{c}_{r}", "TIFF", bidx=1)
            if not off or not n or int(off) + int(n) > size:
                where = "image" if level is None else f"overview {level + 1}"
                raise OSError(f"{ds.name}: tile ({r}, {c}) of the {where} is missing or cut off")
