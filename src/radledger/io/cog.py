"""GeoTIFF products: written by the chunk tasks, laid out or compressed once into a COG, renamed into place.

Why this shape (measured on a 2-core machine, see benchmarks/README.md): compression, not arithmetic,
bounds a run.  Two ways, chosen per product by the chunking:

* **Tiles compressed in the tasks** (``ProductFile.tiled``: chunks of whole 512-pixel tiles, ZSTD or
  DEFLATE): each task compresses its own tiles on its own core and spools the bytes (io/tiles.py);
  the COG is laid out from them (io/cogfile.py).  Nothing is compressed twice.
* **One COG pass** (any other chunk edge, or LZW): blocks are stored uncompressed into a tiled
  intermediate beside the target (in the page cache); GDAL's COG driver compresses it once.

No product ever sits half-written at its final path; temporaries carry ``.radledger-partial`` and
their owner in their name so a later run can sweep up what a killed one left.

GDAL does not report every failed write (a full disk while it flushes its
block cache is only recorded in its error state, and the COG driver can
finish a truncated file without an error), so every write is checked: GDAL's
error state after each block and close, every tile that received data present
in the intermediate, and before the rename every tile of the COG inside the
file, its last tile and smallest overview decoded, and the file synced to disk
(io/cogcheck.py).  A failure raises :class:`~radledger.errors.DiskFullError` or
:class:`~radledger.errors.WriteError` and removes the temporaries.
"""

from __future__ import annotations

import contextlib
import glob
import os
import threading
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from xml.sax.saxutils import escape

import numpy as np
import rasterio
import rasterio._err
import rasterio.errors
import rasterio.shutil
from affine import Affine
from rasterio.windows import Window

from ..errors import RadledgerError
from ..grid import TargetGrid
from .atomic import fsync_file
from .gdalapi import GdalFailure, gdal_failures
from .gdalenv import gdal_env
from .lock import PARTIAL_MARK, partial_token, sweep_partials
from .cogcheck import check_tiles_written, verify_cog
from .cogfile import georeferencing_tags, write_cog
from .overviews import level_shape, overview_factors, reduce_level
from .space import write_failure
from .tiles import SPOOL_CODECS, TILE, TileCodec, TileSink, spool_levels, stop_spools

__all__ = ["COG_DEFAULTS", "COMPRESSIONS", "ProductFile", "WindowSink", "sweep_partials", "read_tags",
           "is_current", "PARTIAL_MARK", "before_rename"]

QUOTE = {'"': "&quot;"}

# The one place for COG settings.  ZSTD level 1: ~5x faster than the default
# level 9 for a ~3 % larger file (measured: benchmarks/README.md); predictor 3 (floating point) or 2
# (integers); 512 px tiles; overviews down to < 512 px, averaged for fluxes,
# nearest for bit flags.  NUM_THREADS=ALL_CPUS: compression is the bottleneck.
COG_DEFAULTS: dict[str, str] = {
    "BLOCKSIZE": "512",
    "OVERVIEWS": "AUTO",
    "OVERVIEW_RESAMPLING": "AVERAGE",
    "NUM_THREADS": "ALL_CPUS",
    "BIGTIFF": "IF_SAFER",
    "PREDICTOR": "YES",
}
CODEC_LEVEL = {"zstd": ("LEVEL", "1"), "deflate": ("LEVEL", "6"), "lzw": (None, None)}

# The intermediate: tiled like the COG so the COG driver reads whole tiles.
_INTERMEDIATE = {"driver": "GTiff", "tiled": True, "blockxsize": 512, "blockysize": 512,
                 "compress": "none", "BIGTIFF": "IF_NEEDED", "SPARSE_OK": "TRUE"}

# Handles open for writing in this process, so threads of a local run share one.
_open_for_write: dict[str, rasterio.io.DatasetWriter] = {}
_closed_here: set[str] = set()   # paths whose handle this process opened and closed
# checks run just before a finished product is renamed into place (the runner's input guard)
_before_rename: list[Callable[[Path], None]] = []
#: what a failed write can raise: OS errors (rasterio's included) and GDAL's own errors
_WRITE_ERRORS = (OSError, rasterio.errors.RasterioError, rasterio._err.CPLE_BaseError)


COMPRESSIONS = tuple(CODEC_LEVEL)


def cog_options(compression: str, *, categorical: bool) -> dict[str, str]:
    opts = dict(COG_DEFAULTS, COMPRESS=compression.upper())
    key, level = CODEC_LEVEL[compression]
    if key:
        opts[key] = level
    if categorical:
        opts["OVERVIEW_RESAMPLING"] = "NEAREST"   # averaging bit flags would invent flags
    return opts


class WindowSink:
    """A ``dask.array.store`` target that writes blocks into a GeoTIFF by window.

    In the process that created the file it writes through the open handle; on
    a distributed worker it reopens the file ``r+`` for each block.  Either way
    ``lock`` (a threading lock locally, a ``distributed.Lock`` on a cluster)
    serialises writers of the same file, and GDAL's error state is checked
    after each write.  Locally it also notes which 512 x 512 tiles received
    data, so the product can check they all reached the disk.
    """

    def __init__(self, path: str, lock, dtype: str, *, final: str | None = None, nodata: float = float("nan"),
                 need: int = 0, tile: int = TILE):
        self.path, self.lock, self.dtype = path, lock, dtype
        self.tile = tile              # the file's tile edge [pixel]
        self.final = final or path
        self.nodata = nodata
        self.need = need              # bytes the file grows to (for a disk-full message)
        self.touched: set[tuple[int, int]] = set()

    def __getstate__(self):
        state = dict(self.__dict__)
        state["touched"] = set()     # a worker's copy starts empty; only the local run checks it
        return state

    def __setitem__(self, key, value):
        rows, cols = key[-2], key[-1]
        win = Window.from_slices(rows, cols)
        block = np.asarray(value)
        if block.ndim == 3:
            block = block[0]
        if self.dtype == "uint8":
            block = block.astype(np.uint8)
        else:
            block = block.astype(np.float32, copy=False)
        with self.lock:
            ds = _open_for_write.get(self.path)
            try:
                if ds is not None and not ds.closed:
                    with gdal_failures(self.path):
                        ds.write(block, 1, window=win)
                    self._note(block, int(win.row_off), int(win.col_off))
                elif self.path in _closed_here:
                    # a local run that was stopped: its handles are closed and the files removed
                    raise RuntimeError(f"{self.path}: product aborted")
                else:
                    with gdal_failures(self.path), gdal_env(), rasterio.open(self.path, "r+") as ds2:
                        ds2.write(block, 1, window=win)
            except _WRITE_ERRORS as exc:
                raise write_failure(self.final, exc, need=self.need) from None

    def _note(self, block: np.ndarray, r0: int, c0: int) -> None:
        """Remember the tiles this block put data into (nodata-only tiles may stay sparse)."""
        h, w = block.shape
        t = self.tile
        for tr in range(r0 // t, (r0 + h - 1) // t + 1):
            for tc in range(c0 // t, (c0 + w - 1) // t + 1):
                sub = block[max(tr * t - r0, 0):(tr + 1) * t - r0, max(tc * t - c0, 0):(tc + 1) * t - c0]
                valid = np.isfinite(sub) if np.isnan(self.nodata) else sub != self.nodata
                if valid.any():
                    self.touched.add((tr, tc))


@dataclass
class ProductFile:
    """One product on its way to ``final``: intermediates -> COG -> rename.

    ``in_task`` lists the overview factors the chunk tasks write (see
    overviews.py); the remaining factors GDAL would add are averaged here from
    the coarsest of them.  With no in-task factor the COG driver makes the
    overviews itself.

    ``tiled`` (``spool=True`` and chunks of whole 512-pixel tiles, ZSTD or DEFLATE): the tasks
    spool compressed tiles and uncompressed overview blocks instead (io/tiles.py); ``finish``
    compresses the overview tiles that span chunks and lays the COG out (io/cogfile.py).
    """
    final: Path
    grid: TargetGrid
    dtype: str
    tags: dict[str, str]
    band_description: str
    compression: str
    in_task: tuple[int, ...] = ()
    nodata: float = float("nan")  # NaN for float products; a declared value for integer (flag) ones
    categorical: bool = False     # overviews by nearest pixel (bit flags), not by averaging
    block: int = TILE             # edge of the blocks the tasks write [pixel] (the intermediates' tiles)
    spool: bool = False           # compress tiles in the tasks where the chunking allows (``tiled``)

    def __post_init__(self):
        self.final = Path(self.final)
        self.stem = stem = str(self.final.parent / f".{self.final.stem}{PARTIAL_MARK}-{partial_token()}")
        self.intermediate = f"{stem}.raw.tif"
        self.partial_cog = f"{stem}.cog.tif"
        self.vrt = f"{stem}.vrt"
        self.factors = overview_factors(self.grid.width, self.grid.height)
        chunk = self.grid.chunk
        self.tiled = (self.spool and self.compression in SPOOL_CODECS and self.block == TILE
                      and chunk % TILE == 0)
        # tiles compressed in tasks: full resolution, overview tiles inside a chunk; other levels' blocks spooled raw
        self.task_tiles = (1, *(f for f in self.factors if chunk % (TILE * f) == 0)) if self.tiled else ()
        self.in_task = tuple(f for f in self.in_task if f in self.factors and f not in self.task_tiles)
        self.raw_levels, self.in_task = (self.in_task, ()) if self.tiled else ((), self.in_task)
        self.level_files = {f: f"{stem}.ov{f}.tif" for f in self.factors}
        self._tiles: dict[tuple[int, int, int], tuple] = {}
        self._blocks: list[tuple] = []
        self._lock = threading.Lock()
        self._sink_locks: dict[str, object] = {}
        self._sinks: list[WindowSink] = []
        self._kept_open = False

    @property
    def need(self) -> int:
        """Bytes of the largest temporary (the uncompressed intermediate)."""
        return self.grid.width * self.grid.height * np.dtype(self.dtype).itemsize

    def tile_for(self, factor: int) -> int:
        """Tile edge of the intermediate at overview ``factor``: the tasks' block at that level.

        A task then writes whole tiles, which GDAL stores at once; a part of a tile would wait in
        GDAL's memory for the rest (per open file: this dominated a season's memory).
        """
        edge, whole = self.block // factor, self.block % factor == 0
        if whole and edge % 16 == 0:        # a GeoTIFF tile edge is a multiple of 16
            return edge
        return 16 if whole and edge < 16 else TILE

    def _create(self, path: str, width: int, height: int, transform, keep_open: bool, tags=None, tile: int = TILE):
        with gdal_failures(path), gdal_env():
            ds = rasterio.open(path, "w", width=width, height=height, count=1, dtype=self.dtype,
                               crs=self.grid.crs, transform=transform, nodata=self.nodata,
                               **{**_INTERMEDIATE, "blockxsize": tile, "blockysize": tile})
        if tags:
            ds.update_tags(**tags)
            ds.set_band_description(1, self.band_description)
        if keep_open:
            _open_for_write[path] = ds
        else:
            with gdal_failures(path):
                ds.close()

    # -- stage 1: the tiled intermediates, open for block writes
    def create(self, *, keep_open: bool = True) -> None:
        """Create the intermediates.  ``keep_open`` (local runs): threads write through these handles.

        On a cluster the files are closed at once so workers can reopen them
        ``r+``: a handle held open here would keep the header in memory and,
        when closed, rewrite the tile index over what the workers wrote.
        """
        self._kept_open = keep_open
        try:
            self.final.parent.mkdir(parents=True, exist_ok=True)
            if not self.tiled:
                self._create(self.intermediate, self.grid.width, self.grid.height, self.grid.transform, keep_open,
                             self.tags, tile=self.tile_for(1))
            for f in self.in_task:
                h, w = level_shape(self.grid.height, self.grid.width, f)
                self._create(self.level_files[f], w, h, _scaled(self.grid.transform, f), keep_open,
                             tile=self.tile_for(f))
        except _WRITE_ERRORS as exc:
            raise write_failure(self.final, exc, need=self.need) from None

    def sink(self, lock=None, factor: int = 1) -> WindowSink:
        path = self.intermediate if factor == 1 else self.level_files[factor]
        lock = lock if lock is not None else self._lock
        self._sink_locks[path] = lock
        sink = WindowSink(path, lock, self.dtype, final=str(self.final), nodata=self.nodata, need=self.need,
                          tile=self.tile_for(factor))
        self._sinks.append(sink)
        return sink

    def tile_sink(self) -> TileSink:
        """Where the tasks put this product's compressed tiles (``tiled`` products)."""
        codec = TileCodec(self.compression, int(CODEC_LEVEL[self.compression][1]), self.dtype, fill=self.nodata)
        return TileSink(self.stem, str(self.final), codec, self.grid.height, self.grid.width, self.task_tiles,
                        self.block, need=self.need, blocks=self.raw_levels)

    def add_tiles(self, index: tuple[list, list]) -> None:
        """What a task spooled (:meth:`TileSpool.close`): its tiles and its uncompressed level blocks."""
        tiles, blocks = index
        for factor, tr, tc, *where in tiles:
            self._tiles[(factor, tr, tc)] = tuple(where)
        self._blocks += blocks

    def close_intermediate(self, *, check: bool = False) -> None:
        """Close the handles, each under its writers' lock; ``check``: raise if a write was lost.

        On an interrupted run other threads may still be inside a block write;
        closing a GDAL dataset under them crashed the process (SIGSEGV), so the
        close waits for the write in flight.
        """
        for path in [self.intermediate, *self.level_files.values()]:
            ds = _open_for_write.get(path)
            if ds is None:
                continue
            with self._sink_locks.get(path, self._lock):
                _open_for_write.pop(path, None)
                _closed_here.add(path)
                if not ds.closed:
                    if check:
                        with gdal_failures(path):
                            ds.close()
                    else:
                        ds.close()
        if check and self._kept_open:
            for sink in self._sinks:
                check_tiles_written(sink.path, sink.touched)

    # -- stage 2: one compression pass into a COG, checked, then renamed into place
    def finish(self, *, threads: str = "ALL_CPUS") -> Path:
        """The COG pass (GDAL's compression on ``threads``), checked, renamed into place."""
        try:
            self.close_intermediate(check=True)
            if self.tiled:
                self._assemble()
            else:
                self._compress(threads)
            verify_cog(self.partial_cog, width=self.grid.width, height=self.grid.height, dtype=self.dtype)
            fsync_file(self.partial_cog)
            for check in list(_before_rename):
                check(self.final)
            os.replace(self.partial_cog, self.final)
        except RadledgerError:
            self.abort()
            raise
        except _WRITE_ERRORS as exc:
            failure = write_failure(self.final, exc, need=self.need)   # judged before cleaning up
            self.abort()
            raise failure from None
        self._remove_temporaries()
        return self.final

    def _compress(self, threads: str) -> None:
        """GDAL's COG driver over the intermediate (and the level files): ``partial_cog``."""
        opts = dict(cog_options(self.compression, categorical=self.categorical), NUM_THREADS=threads)
        source = self.intermediate
        if self.in_task:
            self._coarser_levels()
            self._write_vrt()
            source = self.vrt
            opts["OVERVIEWS"] = "FORCE_USE_EXISTING"
        with gdal_failures(self.partial_cog), gdal_env(GDAL_NUM_THREADS=threads):
            try:
                rasterio.shutil.copy(source, self.partial_cog, driver="COG", **opts)
            except SystemError as exc:   # rasterio: GDAL returned nothing and said nothing
                raise GdalFailure(f"{self.partial_cog}: the COG copy failed ({exc})") from None

    def _assemble(self) -> None:
        """``partial_cog`` from the spooled tiles; the tiles of the block-spooled levels (and of any
        level coarser still, averaged from the coarsest) compressed here first."""
        sink = self.tile_sink()
        spool = sink.spool(f"{self.stem}.levels.tiles")
        try:        # (a failed write must not leave the file open: a full disk could not be unmounted)
            rest = [f for f in self.factors if f not in self.task_tiles and f not in self.raw_levels]
            spool_levels(spool, self._blocks, rest, max(self.raw_levels, default=1), nearest=self.categorical)
            self.add_tiles(spool.close())
        except BaseException:
            spool.discard()
            raise
        geo = georeferencing_tags(crs=self.grid.crs, transform=self.grid.transform, dtype=self.dtype,
                                  nodata=self.nodata, tags=self.tags, description=self.band_description)
        write_cog(self.partial_cog, codec=sink.codec, width=self.grid.width, height=self.grid.height,
                  factors=self.factors, tiles=self._tiles, geo=geo)

    def _coarser_levels(self) -> None:
        """Levels beyond the in-task ones, from the coarsest in-task level (small)."""
        base = max(self.in_task)
        rest = [f for f in self.factors if f > base]
        if not rest:
            return
        with gdal_env(), rasterio.open(self.level_files[base]) as ds:
            a = ds.read(1)
        for f in rest:
            level = reduce_level(a, f // base, nearest=self.categorical)
            h, w = level.shape
            self._create(self.level_files[f], w, h, _scaled(self.grid.transform, f), keep_open=False)
            with gdal_failures(self.level_files[f]), gdal_env(), rasterio.open(self.level_files[f], "r+") as ds:
                ds.write(level, 1)

    def _write_vrt(self) -> None:
        t = self.grid.transform
        dtype = {"float32": "Float32", "uint8": "Byte"}[self.dtype]
        nodata = "nan" if np.isnan(self.nodata) else repr(self.nodata)
        meta = "".join(f'<MDI key="{escape(k, QUOTE)}">{escape(str(v))}</MDI>' for k, v in self.tags.items())
        overviews = "".join(
            f'<Overview><SourceFilename relativeToVRT="1">{escape(os.path.basename(self.level_files[f]))}'
            f'</SourceFilename><SourceBand>1</SourceBand></Overview>' for f in self.factors)
        xml = (f'<VRTDataset rasterXSize="{self.grid.width}" rasterYSize="{self.grid.height}">'
               f'<SRS>{escape(self.grid.crs.to_wkt())}</SRS>'
               f'<GeoTransform>{t.c!r}, {t.a!r}, {t.b!r}, {t.f!r}, {t.d!r}, {t.e!r}</GeoTransform>'
               f'<Metadata>{meta}</Metadata>'
               f'<VRTRasterBand dataType="{dtype}" band="1"><Description>{escape(self.band_description)}'
               f'</Description><NoDataValue>{nodata}</NoDataValue>'
               f'<SimpleSource><SourceFilename relativeToVRT="1">{escape(os.path.basename(self.intermediate))}'
               f'</SourceFilename><SourceBand>1</SourceBand></SimpleSource>{overviews}</VRTRasterBand>'
               f'</VRTDataset>')
        with open(self.vrt, "w", encoding="utf-8") as fh:
            fh.write(xml)

    def _remove_temporaries(self) -> None:
        spools = glob.glob(glob.escape(self.stem) + ".*.tiles") if self.tiled else []
        for path in [self.intermediate, self.vrt, self.partial_cog, *self.level_files.values(), *spools]:
            _remove(path)

    def abort(self) -> None:
        self.close_intermediate()
        stop_spools(self.stem)
        self._remove_temporaries()


@contextlib.contextmanager
def before_rename(check: Callable[[Path], None]):
    """Within the block, ``check(final_path)`` runs before each product is renamed into place.

    ``check`` may raise (a :class:`~radledger.errors.RadledgerError`); the
    product is then removed instead of renamed.
    """
    _before_rename.append(check)
    try:
        yield
    finally:
        _before_rename.remove(check)


def _scaled(t: Affine, f: int) -> Affine:
    """The transform of an overview ``f`` times coarser (same origin)."""
    return Affine(t.a * f, t.b * f, t.c, t.d * f, t.e * f, t.f)


def _remove(path: str) -> None:
    with contextlib.suppress(FileNotFoundError):
        os.remove(path)


def is_current(path: Path, settings_hash: str) -> bool:
    """A finished product with the same inputs and settings (its ``settings_hash`` tag) is at ``path``."""
    return Path(path).exists() and read_tags(path).get("settings_hash") == settings_hash


def read_tags(path: str | os.PathLike) -> dict[str, str]:
    """The dataset tags of a finished product ({} if unreadable)."""
    try:
        with gdal_env(), rasterio.open(path) as ds:
            return dict(ds.tags())
    except Exception:
        return {}
