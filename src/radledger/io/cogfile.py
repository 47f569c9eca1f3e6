"""A COG laid out from already-compressed tiles (see ``io/tiles.py``), without recompressing them.

The layout is GDAL's cloud-optimised GeoTIFF (GDAL COG driver documentation,
"File layout"): the TIFF header, GDAL's structural-metadata block that says
how the file is organised, every IFD (full resolution first, then overviews
from largest to smallest) with their tag data, then the tiles: smallest
overview first, full resolution last, each level row by row, every tile
preceded by its byte count (uint32) and followed by a copy of its last four
bytes.  Classic TIFF while offsets fit in 32 bits, BigTIFF beyond.

The georeferencing and metadata tags (GeoTIFF keys, GDAL's metadata and nodata
tags) are not encoded here: GDAL writes them for a one-pixel GeoTIFF with the
same CRS, transform, nodata, tags and band description, and they are copied
from its IFD, so they are exactly what GDAL would write for the product.
"""

from __future__ import annotations

import os
import struct

from rasterio.io import MemoryFile

from .gdalapi import gdal_failures
from .gdalenv import gdal_env
from .overviews import level_shape
from .tiles import TIFF_COMPRESSION, TileCodec

__all__ = ["write_cog", "georeferencing_tags", "GHOST"]

GHOST_BODY = (b"LAYOUT=IFDS_BEFORE_DATA\nBLOCK_ORDER=ROW_MAJOR\nBLOCK_LEADER=SIZE_AS_UINT4\n"
              b"BLOCK_TRAILER=LAST_4_BYTES_REPEATED\nKNOWN_INCOMPATIBLE_EDITION=NO\n ")
GHOST = b"GDAL_STRUCTURAL_METADATA_SIZE=%06d bytes\n" % len(GHOST_BODY) + GHOST_BODY

#: tags copied from GDAL's one-pixel GeoTIFF: ModelPixelScale, ModelTiepoint, ModelTransformation,
#: GeoKeyDirectory, GeoDoubleParams, GeoAsciiParams, GDAL_METADATA, GDAL_NODATA
BORROWED = (33550, 33922, 34264, 34735, 34736, 34737, 42112, 42113)
NODATA_TAG = 42113
SHORT, LONG, LONG8, ASCII = 3, 4, 16, 2
_TYPE_SIZE = {1: 1, 2: 1, 3: 2, 4: 4, 5: 8, 6: 1, 7: 1, 8: 2, 9: 4, 10: 8, 11: 4, 12: 8, 16: 8, 17: 8, 18: 8}


def georeferencing_tags(*, crs, transform, dtype: str, nodata: float, tags: dict, description: str) -> dict:
    """tag -> (type, count, value bytes) of the georeferencing and metadata tags GDAL writes."""
    with gdal_env(), MemoryFile() as mem:
        with gdal_failures("the COG header"), mem.open(driver="GTiff", width=1, height=1, count=1, dtype=dtype,
                                                        crs=crs, transform=transform, nodata=nodata) as ds:
            if tags:
                ds.update_tags(**tags)
            ds.set_band_description(1, description)
        raw = mem.read()
    return {tag: v for tag, v in _first_ifd(raw).items() if tag in BORROWED}


def _first_ifd(raw: bytes) -> dict:
    """tag -> (type, count, value bytes) of the first IFD of a little-endian classic TIFF."""
    if raw[:4] != b"II*\x00":
        raise ValueError("expected a little-endian classic TIFF from GDAL")
    off = struct.unpack_from("<I", raw, 4)[0]
    n = struct.unpack_from("<H", raw, off)[0]
    out = {}
    for i in range(n):
        tag, typ, count, value = struct.unpack_from("<HHII", raw, off + 2 + 12 * i)
        size = _TYPE_SIZE[typ] * count
        at = off + 2 + 12 * i + 8 if size <= 4 else value
        out[tag] = (typ, count, raw[at:at + size])
    return out


def _structure(codec: TileCodec, width: int, height: int, overview: bool) -> dict:
    dim = SHORT if max(width, height) < 65536 else LONG
    tags = {256: (dim, 1, width), 257: (dim, 1, height), 258: (SHORT, 1, codec.bits),
            259: (SHORT, 1, TIFF_COMPRESSION[codec.compression]), 262: (SHORT, 1, 1), 277: (SHORT, 1, 1),
            284: (SHORT, 1, 1), 317: (SHORT, 1, codec.predictor), 322: (SHORT, 1, codec.tile),
            323: (SHORT, 1, codec.tile), 339: (SHORT, 1, codec.sample_format)}
    if overview:
        tags[254] = (LONG, 1, 1)         # NewSubfileType: reduced-resolution image
    return {k: (t, c, struct.pack("<" + {SHORT: "H", LONG: "I"}[t], v)) for k, (t, c, v) in tags.items()}


class _Layout:
    """Classic or BigTIFF sizes and packing."""

    def __init__(self, big: bool):
        self.big = big
        self.header = 16 if big else 8
        self.entry, self.count_size, self.next_size, self.inline = (20, 8, 8, 8) if big else (12, 2, 4, 4)
        self.offset_type = LONG8 if big else LONG

    def ifd_size(self, tags: dict) -> int:
        """The IFD with its out-of-line values (each padded to an even length)."""
        extra = sum(len(v) + len(v) % 2 for _, _, v in tags.values() if len(v) > self.inline)
        return self.count_size + self.entry * len(tags) + self.next_size + extra

    def pack_ifd(self, tags: dict, at: int, next_ifd: int) -> bytes:
        head = struct.pack("<Q" if self.big else "<H", len(tags))
        entries, extra = [], b""
        data_at = at + self.count_size + self.entry * len(tags) + self.next_size
        for tag in sorted(tags):
            typ, count, value = tags[tag]
            if len(value) <= self.inline:
                field = value.ljust(self.inline, b"\x00")
            else:
                field = struct.pack("<Q" if self.big else "<I", data_at + len(extra))
                extra += value + b"\x00" * (len(value) % 2)
            entries.append(struct.pack("<HHQ" if self.big else "<HHI", tag, typ, count) + field)
        tail = struct.pack("<Q" if self.big else "<I", next_ifd)
        return head + b"".join(entries) + tail + extra


def write_cog(path: str, *, codec: TileCodec, width: int, height: int, factors: tuple[int, ...],
              tiles: dict, geo: dict, bigtiff: bool | None = None) -> None:
    """Write the COG at ``path`` from spooled tiles.

    ``factors``: the overview factors (the full resolution is 1); ``tiles``:
    (factor, tile_row, tile_col) -> (spool path, offset, size, last four bytes)
    for every tile of every level; ``geo``: :func:`georeferencing_tags`;
    ``bigtiff``: None for BigTIFF only where 32-bit offsets do not reach.
    Raises ``OSError`` naming the first missing tile.
    """
    t = codec.tile
    levels = [(1, width, height)] + [(f, *level_shape(height, width, f)[::-1]) for f in factors]
    order = []                         # tiles per level, row-major
    for f, w, h in levels:
        keys = [(f, r, c) for r in range(-(-h // t)) for c in range(-(-w // t))]
        for k in keys:
            if k not in tiles:
                raise OSError(f"{path}: tile (row {k[1]}, column {k[2]}) of level 1/{f} was never written")
        order.append(keys)
    payload = sum(tiles[k][2] + 8 for keys in order for k in keys)
    nodata = {NODATA_TAG: geo[NODATA_TAG]} if NODATA_TAG in geo else {}
    for big in ((False, True) if bigtiff is None else (bigtiff,)):
        lay = _Layout(big)
        # offsets/counts are placeholders of the right size while the header is measured
        ifd_tags = []
        for i, ((f, w, h), keys) in enumerate(zip(levels, order)):
            tags = _structure(codec, w, h, overview=i > 0)
            tags.update(geo if i == 0 else nodata)
            tags[324] = (lay.offset_type, len(keys), b"\x00" * (8 if big else 4) * len(keys))
            tags[325] = (lay.offset_type, len(keys), b"\x00" * (8 if big else 4) * len(keys))
            ifd_tags.append(tags)
        first = lay.header + len(GHOST)
        first += first % 2
        ifd_at, at = [], first
        for tags in ifd_tags:
            ifd_at.append(at)
            at += lay.ifd_size(tags)
        if big or at + payload < 2 ** 32:
            break
    # tile offsets: smallest overview first, full resolution last
    where, pos = {}, at
    for keys in reversed(order):
        for k in keys:
            where[k] = pos + 4           # after the 4-byte leader
            pos += tiles[k][2] + 8
    fmt = "<%dQ" if big else "<%dI"
    for tags, keys in zip(ifd_tags, order):
        tags[324] = (lay.offset_type, len(keys), struct.pack(fmt % len(keys), *(where[k] for k in keys)))
        tags[325] = (lay.offset_type, len(keys), struct.pack(fmt % len(keys), *(tiles[k][2] for k in keys)))
    head = (b"II+\x00" + struct.pack("<HHQ", 8, 0, first) if big else b"II*\x00" + struct.pack("<I", first))
    head += GHOST + b"\x00" * (first - len(head) - len(GHOST))
    for i, tags in enumerate(ifd_tags):
        nxt = ifd_at[i + 1] if i + 1 < len(ifd_tags) else 0
        head += lay.pack_ifd(tags, ifd_at[i], nxt)
    assert len(head) == at, (len(head), at)
    _write_file(path, head, [k for keys in reversed(order) for k in keys], tiles)


def _write_file(path: str, head: bytes, keys: list, tiles: dict) -> None:
    """The header, then each tile (leader, bytes copied from its spool file, trailer)."""
    sources: dict[str, int] = {}
    fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o666)
    try:
        _write_all(fd, head)
        for k in keys:
            spool, offset, size, last4 = tiles[k]
            src = sources.get(spool)
            if src is None:
                src = sources[spool] = os.open(spool, os.O_RDONLY)
            _write_all(fd, struct.pack("<I", size))
            _copy(src, fd, offset, size)
            _write_all(fd, last4)
    finally:
        os.close(fd)
        for src in sources.values():
            os.close(src)


def _write_all(fd: int, data: bytes) -> None:
    view = memoryview(data)
    while view:
        view = view[os.write(fd, view):]


def _copy(src: int, dst: int, offset: int, size: int) -> None:
    """``size`` bytes of ``src`` from ``offset`` appended to ``dst`` (in the kernel where it can)."""
    done = 0
    if hasattr(os, "copy_file_range"):
        try:
            while done < size:
                n = os.copy_file_range(src, dst, size - done, offset + done)
                if n == 0:
                    break
                done += n
        except OSError as exc:
            if exc.errno not in (18, 22, 38, 95):   # EXDEV, EINVAL, ENOSYS, EOPNOTSUPP: copy by hand
                raise
    while done < size:
        chunk = os.pread(src, min(size - done, 1 << 22), offset + done)
        if not chunk:
            raise OSError(f"spool file ended early at byte {offset + done}")
        _write_all(dst, chunk)
        done += len(chunk)
