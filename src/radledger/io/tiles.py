"""Compressed GeoTIFF tiles made inside the chunk tasks, spooled to one temporary file per task.

A product whose chunks are whole 512 x 512 tiles does not need GDAL's second
pass over an uncompressed intermediate: each task applies the TIFF predictor
and the codec to its own tiles (on the core that computed them, beside the other tasks)
and appends the compressed bytes to its spool file; ``io/cogfile.py`` then
lays the spooled tiles out as a COG.  An overview tile that lies inside the
task's chunk is compressed in the task too, as soon as the blocks under it are
done; the blocks of coarser levels, whose tiles span several chunks, are
spooled uncompressed (a few kilobytes each) and put together into tiles when
the product is finished (:func:`level_tiles`).

The encodings are the TIFF 6.0 ones (Adobe, 1992): predictor 2 (horizontal
differencing, section 14) for integers and predictor 3 (floating point, Adobe
Photoshop TIFF Technical Note 3, 2005) for floats, then Zstandard
(RFC 8878, TIFF compression code 50000) or Deflate (RFC 1950 zlib streams,
code 8).
"""

from __future__ import annotations

import os
import threading
import zlib
from dataclasses import dataclass

import numpy as np

from ..physics._jit import jit, numba_loaded
from .overviews import level_shape, reduce_level
from .space import write_failure

__all__ = ["TileCodec", "TileSink", "TileSpool", "TIFF_COMPRESSION", "SPOOL_CODECS", "TILE", "stop_spools",
           "spool_levels", "level_tiles", "level_array", "zstd_codec"]

TILE = 512
#: TIFF Compression tag values (TIFF 6.0; 50000 is the registered Zstandard code libtiff uses)
TIFF_COMPRESSION = {"zstd": 50000, "deflate": 8}
SPOOL_CODECS = tuple(TIFF_COMPRESSION)

# products given up in this process (their stems): a task still running must not start a spool file
# after the product's temporaries were removed
_stopped: set[str] = set()
_stop_lock = threading.Lock()


def stop_spools(stem: str) -> None:
    """No task of this process starts a spool file for ``stem`` from now on (call before removing them)."""
    with _stop_lock:
        _stopped.add(stem)


def float_predictor(a: np.ndarray) -> np.ndarray:
    """TIFF predictor 3 of a float32 tile: each row's bytes regrouped most significant first, then
    differenced byte by byte along the row (modulo 256).

    Where Numba is already loaded (scene runs: the fused kernels) a compiled loop does it in one
    pass, ~2-3x faster; otherwise (a season of days never loads Numba) NumPy.
    """
    h, w = a.shape
    raw = np.ascontiguousarray(a, dtype="<f4").view(np.uint8).reshape(h, 4 * w)
    if numba_loaded():
        return _float_predictor_loop(raw, np.empty_like(raw))
    planes = raw.reshape(h, w, 4)[:, :, ::-1]
    b = np.ascontiguousarray(planes.transpose(0, 2, 1)).reshape(h, 4 * w)
    out = np.empty_like(b)
    out[:, 0] = b[:, 0]
    np.subtract(b[:, 1:], b[:, :-1], out=out[:, 1:])
    return out


@jit(nogil=True, cache=True)
def _float_predictor_loop(raw, out):
    """``float_predictor`` on the tile's bytes ``raw`` (rows of 4 w little-endian bytes) into ``out``."""
    h, w4 = raw.shape
    w = w4 // 4
    for r in range(h):
        prev = np.uint8(0)
        for k in range(4):             # most significant byte plane first
            b = 3 - k
            base = k * w
            for c in range(w):
                v = raw[r, 4 * c + b]
                out[r, base + c] = v - prev
                prev = v
    return out


def horizontal_predictor(a: np.ndarray) -> np.ndarray:
    """TIFF predictor 2 of a uint8 tile: each sample minus its left neighbour (modulo 256)."""
    out = np.empty_like(a)
    out[:, 0] = a[:, 0]
    np.subtract(a[:, 1:], a[:, :-1], out=out[:, 1:])
    return out


@dataclass(frozen=True)
class TileCodec:
    """How one product's tiles are encoded: dtype, predictor, codec and level, tile edge, padding."""
    compression: str          # zstd | deflate
    level: int
    dtype: str                # float32 | uint8
    fill: float = float("nan")   # what pads a partial tile (the product's nodata)
    tile: int = TILE

    @property
    def predictor(self) -> int:
        return 3 if self.dtype == "float32" else 2

    @property
    def sample_format(self) -> int:
        return 3 if self.dtype == "float32" else 1      # TIFF SampleFormat: IEEE float / unsigned integer

    @property
    def bits(self) -> int:
        return np.dtype(self.dtype).itemsize * 8

    def encode(self, a: np.ndarray) -> bytes:
        """One tile (``tile`` x ``tile``, or the part of it inside the raster, padded here)."""
        t = self.tile
        a = np.asarray(a).astype(self.dtype, copy=False)
        if a.shape != (t, t):
            full = np.full((t, t), self.fill, dtype=self.dtype)
            full[:a.shape[0], :a.shape[1]] = a
            a = full
        raw = float_predictor(a) if self.dtype == "float32" else horizontal_predictor(a)
        if self.compression == "zstd":
            return zstd_codec(self.level).encode(raw)
        return zlib.compress(raw, self.level)


_ZSTD: dict[int, object] = {}


def zstd_codec(level: int = 1):
    """numcodecs' Zstandard codec (it releases the GIL); imported when first needed.  Any level decodes."""
    codec = _ZSTD.get(level)
    if codec is None:
        from numcodecs.zstd import Zstd
        codec = _ZSTD[level] = Zstd(level=level)
    return codec


@dataclass(frozen=True)
class TileSink:
    """Where the tasks put one product's tiles: a spool file per task beside the product.

    Shared by every task (and pickled to cluster workers); :meth:`for_chunk`
    gives a task its own :class:`TileSpool`.  ``factors``: the levels whose
    tiles the tasks make (1 = full resolution, then overview factors whose
    tiles lie inside one chunk); ``blocks``: the overview factors whose tiles
    span several chunks: the tasks spool their blocks uncompressed and the
    tiles are put together and compressed when the product is finished;
    ``block``: the edge of the blocks a task hands over [full-resolution
    pixels, a divisor of ``codec.tile``].
    """
    stem: str
    final: str
    codec: TileCodec
    height: int
    width: int
    factors: tuple[int, ...]
    block: int
    need: int = 0
    blocks: tuple[int, ...] = ()

    @property
    def levels(self) -> tuple[int, ...]:
        """Every overview factor the spool takes."""
        return (*self.factors[1:], *self.blocks)

    def for_chunk(self, window) -> "TileSpool":
        return self.spool(f"{self.stem}.c{int(window.row_off)}-{int(window.col_off)}.tiles")

    def spool(self, path: str) -> "TileSpool":
        return TileSpool(self, path)


class TileSpool:
    """One task's compressed tiles of one product: appended to ``path``, indexed as they go.

    Full-resolution blocks are whole tiles; an overview tile gathers the
    level blocks of every compute block under it and is encoded when the last
    one arrives.  :meth:`close` returns the index: the tiles, ``(factor,
    tile_row, tile_col, path, offset, size, last4)`` each (``last4``: the
    tile's last four bytes, which the COG repeats after each tile), and the
    uncompressed blocks of the ``blocks`` levels, ``(factor, row, col, path,
    offset, height, width)`` each.
    """

    def __init__(self, sink: TileSink, path: str):
        self.sink, self.path = sink, path
        self._fh = None
        self._offset = 0
        self._index: list[tuple] = []
        self._raw: list[tuple] = []
        self._canvas: dict[tuple[int, int, int], list] = {}   # (factor, tr, tc) -> [array, blocks left]

    def put(self, factor: int, row: int, col: int, block: np.ndarray) -> None:
        """``block`` of level ``factor`` at level pixel (``row``, ``col``)."""
        t, s = self.sink.codec.tile, self.sink
        if factor in s.blocks:
            data = np.ascontiguousarray(block, dtype=s.codec.dtype)
            self._raw.append((factor, row, col, self.path, self._append(data), *data.shape))
            return
        if factor == 1:
            if row % t or col % t or block.shape[0] > t or block.shape[1] > t:
                raise ValueError(f"{self.path}: block at ({row}, {col}) {block.shape} is not one tile")
            self.write_tile(1, row // t, col // t, block)
            return
        tr, tc = row // t, col // t
        key = (factor, tr, tc)
        entry = self._canvas.get(key)
        if entry is None:
            entry = self._canvas[key] = [np.full((t, t), s.codec.fill, dtype=s.codec.dtype),
                                         self._blocks_under(factor, tr, tc)]
        r, c = row - tr * t, col - tc * t
        entry[0][r:r + block.shape[0], c:c + block.shape[1]] = block
        entry[1] -= 1
        if entry[1] == 0:               # (beyond the raster the canvas holds the padding value already)
            del self._canvas[key]
            self.write_tile(factor, tr, tc, entry[0])

    def _blocks_under(self, factor: int, tr: int, tc: int) -> int:
        """Compute blocks that cover level tile (tr, tc), clipped to the raster."""
        s, span = self.sink, self.sink.codec.tile * factor
        rows = min(span, s.height - tr * span)
        cols = min(span, s.width - tc * span)
        return -(-rows // s.block) * -(-cols // s.block)

    def write_tile(self, factor: int, tr: int, tc: int, tile: np.ndarray) -> None:
        """Encode one whole tile (or its part inside the raster) of level ``factor`` and append it."""
        data = self.sink.codec.encode(tile)
        self._index.append((factor, tr, tc, self.path, self._append(data), len(data), data[-4:]))

    def _append(self, data) -> int:
        """Append ``data`` (bytes or an array) to the file; its offset."""
        try:
            if self._fh is None:
                with _stop_lock:
                    if self.sink.stem in _stopped:
                        raise RuntimeError(f"{self.sink.final}: product aborted")
                    self._fh = open(self.path, "wb")
            self._fh.write(data)
        except OSError as exc:
            raise write_failure(self.sink.final, exc, need=self.sink.need) from None
        at = self._offset
        self._offset += memoryview(data).nbytes
        return at

    def close(self) -> tuple[list, list]:
        """Flush the file; the index of its tiles and blocks.  Tiles still waiting for blocks are a bug."""
        if self._canvas:
            raise RuntimeError(f"{self.path}: overview tiles left incomplete: {sorted(self._canvas)}")
        if self._fh is not None:
            try:
                self._fh.close()
            except OSError as exc:
                raise write_failure(self.sink.final, exc, need=self.sink.need) from None
            self._fh = None
        return self._index, self._raw

    def discard(self) -> None:
        """Close (even after a failed write) and remove the file."""
        fh, self._fh = self._fh, None
        if fh is not None:
            try:
                fh.close()
            except OSError:
                pass
        try:
            os.remove(self.path)
        except FileNotFoundError:
            pass


def spool_levels(spool: TileSpool, blocks: list[tuple], rest, base: int, *, nearest: bool) -> None:
    """Encode into ``spool`` the tiles of the levels spooled as blocks, then those of the levels
    ``rest`` (coarser than any task's), reduced from level ``base``."""
    level_tiles(spool, blocks)
    t = spool.sink.codec.tile
    a = level_array(spool.sink, blocks, base) if rest else None
    for f in rest:
        level = reduce_level(a, f // base, nearest=nearest)
        for r in range(0, level.shape[0], t):
            for c in range(0, level.shape[1], t):
                spool.write_tile(f, r // t, c // t, level[r:r + t, c:c + t])


def level_tiles(spool: TileSpool, blocks: list[tuple]) -> None:
    """Encode into ``spool`` every tile of the levels the tasks spooled as uncompressed blocks.

    ``blocks``: the blocks' index entries (see :class:`TileSpool`); each
    block lies inside one tile, so tiles are put together one at a time.
    """
    s, t = spool.sink, spool.sink.codec.tile
    by_tile: dict[tuple[int, int, int], list] = {}
    for entry in blocks:
        f, r, c = entry[:3]
        by_tile.setdefault((f, r // t, c // t), []).append(entry)
    with _BlockReader(s.codec.dtype) as reader:
        for (f, tr, tc), parts in sorted(by_tile.items()):
            canvas = np.full((t, t), s.codec.fill, dtype=s.codec.dtype)
            for _, r, c, path, off, h, w in parts:
                canvas[r - tr * t:r - tr * t + h, c - tc * t:c - tc * t + w] = reader.read(path, off, h, w)
            spool.write_tile(f, tr, tc, canvas)


def level_array(sink: TileSink, blocks: list[tuple], factor: int) -> np.ndarray:
    """The whole level ``factor`` from its spooled blocks (for the coarsest levels: small)."""
    out = np.full(level_shape(sink.height, sink.width, factor), sink.codec.fill, dtype=sink.codec.dtype)
    with _BlockReader(sink.codec.dtype) as reader:
        for f, r, c, path, off, h, w in blocks:
            if f == factor:
                out[r:r + h, c:c + w] = reader.read(path, off, h, w)
    return out


class _BlockReader:
    """Uncompressed blocks read back from spool files (one descriptor per file)."""

    def __init__(self, dtype: str):
        self.dtype = np.dtype(dtype)
        self.fds: dict[str, int] = {}

    def read(self, path: str, offset: int, h: int, w: int) -> np.ndarray:
        fd = self.fds.get(path)
        if fd is None:
            fd = self.fds[path] = os.open(path, os.O_RDONLY)
        n = h * w * self.dtype.itemsize
        data = os.pread(fd, n, offset)
        if len(data) != n:
            raise OSError(f"{path}: spooled block at byte {offset} is cut off")
        return np.frombuffer(data, dtype=self.dtype).reshape(h, w)

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        for fd in self.fds.values():
            os.close(fd)
