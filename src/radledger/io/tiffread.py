"""Windows of a local tiled GeoTIFF decoded straight from its tiles.

For an input on the target grid whose tiles the window covers whole, the
tiles' bytes are read (``os.pread``), decompressed (Zstandard or Deflate) and
the TIFF predictor undone by a compiled loop, instead of going through GDAL's
block cache and libtiff's byte-by-byte floating-point predictor: about twice
as fast (benchmarks/README.md), which matters because reading the inputs is a
quarter of a scene's work.  GDAL still opens the file and reports where each
tile is (its ``BLOCK_OFFSET_c_r`` / ``BLOCK_SIZE_c_r`` metadata) and
everything else: the georeferencing, nodata, the layout.

Only the plain case takes this path: a local little-endian GeoTIFF, one band,
tiled, no internal mask, Zstandard / Deflate / no compression, predictor 1, 2
(integers) or 3 (float32), and only where Numba is already loaded (scene runs:
the fused kernels), since loading it costs more than it saves on a season of
days.  Anything else returns ``None`` and GDAL reads the window.
"""

from __future__ import annotations

import os
import threading
import zlib

import numpy as np
from rasterio.enums import MaskFlags

from ..physics._jit import jit, numba_loaded
from .tiles import zstd_codec

__all__ = ["read_tiles", "BrokenTile"]


class BrokenTile(OSError):
    """A tile cut off or not decodable (the file is truncated or corrupt)."""

_DTYPES = {"uint8", "int8", "uint16", "int16", "uint32", "int32", "float32"}
_readers: dict[tuple, "_TileReader | None"] = {}
_lock = threading.Lock()


def read_tiles(ds, window) -> np.ndarray | None:
    """``window`` of band 1 of ``ds`` decoded from its tiles, or None where GDAL has to read it."""
    if not numba_loaded():
        return None
    try:
        st = os.stat(ds.name)
    except OSError:
        return None
    key = (os.getpid(), ds.name, st.st_ino, st.st_mtime_ns, st.st_size)   # a rewritten file is another
    reader = _readers.get(key, False)
    if reader is False:
        reader = _TileReader.probe(ds)
        with _lock:
            if len(_readers) > 256:
                _readers.clear()
            _readers[key] = reader
    return None if reader is None else reader.read(ds, window)


class _TileReader:
    def __init__(self, ds, codec: str | None, predictor: int):
        self.path = ds.name
        self.dtype = np.dtype(ds.dtypes[0]).newbyteorder("<")
        self.th, self.tw = ds.block_shapes[0]
        self.height, self.width = ds.height, ds.width
        self.codec, self.predictor = codec, predictor
        self.fill = ds.nodata if ds.nodata is not None else 0
        self.where: dict[tuple[int, int], tuple[int, int]] = {}
        self.fd = os.open(self.path, os.O_RDONLY)

    def __del__(self):
        try:
            os.close(self.fd)
        except (OSError, AttributeError):
            pass

    @classmethod
    def probe(cls, ds) -> "_TileReader | None":
        """A reader if ``ds`` is the plain case (see the module docstring), else None."""
        try:
            if ds.driver != "GTiff" or ds.count != 1 or not os.path.isfile(ds.name):
                return None
            if not ds.profile.get("tiled") or ds.dtypes[0] not in _DTYPES:
                return None
            if ds.mask_flag_enums[0] not in ([MaskFlags.all_valid], [MaskFlags.nodata]):
                return None
            info = ds.tags(ns="IMAGE_STRUCTURE")
            codec = {None: None, "ZSTD": "zstd", "DEFLATE": "deflate"}.get(info.get("COMPRESSION"), "?")
            predictor = int(info.get("PREDICTOR", "1"))
            if codec == "?" or "NBITS" in info or predictor not in (1, 2, 3):
                return None
            if (predictor == 3) != (ds.dtypes[0] == "float32") and predictor != 1:
                return None
            with open(ds.name, "rb") as fh:
                if fh.read(2) != b"II":
                    return None
            return cls(ds, codec, predictor)
        except (OSError, ValueError, KeyError, AttributeError):
            return None

    def read(self, ds, window) -> np.ndarray | None:
        r0, c0 = int(window.row_off), int(window.col_off)
        h, w = int(window.height), int(window.width)
        th, tw = self.th, self.tw
        r1, c1 = r0 + h, c0 + w
        if (r0 % th or c0 % tw or r0 < 0 or c0 < 0 or r1 > self.height or c1 > self.width
                or (r1 % th and r1 != self.height) or (c1 % tw and c1 != self.width)):
            return None
        out = np.empty((h, w), dtype=self.dtype)
        for tr in range(r0 // th, -(-r1 // th)):
            for tc in range(c0 // tw, -(-c1 // tw)):
                tile = self._tile(ds, tr, tc)
                y, x = tr * th - r0, tc * tw - c0
                out[y:y + th, x:x + tw] = tile[:min(th, h - y), :min(tw, w - x)]
        return out

    def _tile(self, ds, tr: int, tc: int) -> np.ndarray:
        where = self.where.get((tr, tc))
        if where is None:
            off = ds.get_tag_item(f"BLOCK_OFFSET_{tc}_{tr}", "TIFF", bidx=1)
            n = ds.get_tag_item(f"BLOCK_SIZE_{tc}_{tr}", "TIFF", bidx=1)
            where = self.where[(tr, tc)] = (int(off or 0), int(n or 0))
        off, n = where
        th, tw = self.th, self.tw
        if not off or not n:                       # a sparse tile: nodata (or 0), as GDAL reads it
            return np.full((th, tw), self.fill, dtype=self.dtype)
        data = os.pread(self.fd, n, off)
        if len(data) != n:
            raise BrokenTile(f"tile ({tr}, {tc}) is cut off")
        try:
            if self.codec == "zstd":
                data = zstd_codec().decode(data)
            elif self.codec == "deflate":
                data = zlib.decompress(data)
        except (RuntimeError, ValueError, zlib.error) as exc:
            raise BrokenTile(f"tile ({tr}, {tc}) does not decode ({exc})") from None
        raw = np.frombuffer(data, dtype=np.uint8)
        if raw.size != th * tw * self.dtype.itemsize:
            raise BrokenTile(f"tile ({tr}, {tc}) decodes to {raw.size} bytes")
        if self.predictor == 3:
            rows = raw.reshape(th, 4 * tw)
            return _undo_float_predictor(rows, np.empty_like(rows)).view(self.dtype).reshape(th, tw)
        a = raw.view(self.dtype).reshape(th, tw)
        if self.predictor == 2:
            a = _undo_horizontal_predictor(a.copy())
        return a


@jit(nogil=True, cache=True)
def _undo_float_predictor(src, out):
    """TIFF predictor 3 undone: each row's bytes summed along the row (mod 256), then the byte planes
    (most significant first) put back into little-endian float32 order."""
    h, w4 = src.shape
    w = w4 // 4
    for r in range(h):
        acc = np.uint8(0)
        for k in range(4):
            b = 3 - k
            base = k * w
            for c in range(w):
                acc = np.uint8(acc + src[r, base + c])
                out[r, 4 * c + b] = acc
    return out


@jit(nogil=True, cache=True)
def _undo_horizontal_predictor(a):
    """TIFF predictor 2 undone in place: each sample plus its left neighbour, wrapping like the type."""
    h, w = a.shape
    for r in range(h):
        for c in range(1, w):
            a[r, c] = a[r, c] + a[r, c - 1]
    return a
