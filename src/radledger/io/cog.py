"""GeoTIFF products: chunked writes into a tiled intermediate, one compression pass into a COG.

Why this shape (measured on a 2-core machine, see benchmarks/README.md): compression, not arithmetic,
bounds a run, and GDAL's COG driver needs a finished source.  So blocks are
stored uncompressed into a tiled intermediate beside the target (cheap, and
in the page cache), then GDAL's COG driver compresses once, with overviews,
using every core, and the result is renamed into place.  No product ever sits
half-written at its final path; temporaries carry ``.radledger-partial`` in
their name so a later run can sweep up what a killed one left.
"""

from __future__ import annotations

import contextlib
import glob
import os
import threading
import uuid
from dataclasses import dataclass
from pathlib import Path

from xml.sax.saxutils import escape

import numpy as np
import rasterio
from affine import Affine
import rasterio.shutil
from rasterio.windows import Window

from ..grid import TargetGrid
from .gdalenv import gdal_env
from .overviews import level_shape, overview_factors, reduce_level

__all__ = ["COG_DEFAULTS", "COMPRESSIONS", "ProductFile", "WindowSink", "sweep_partials", "read_tags",
           "is_current", "PARTIAL_MARK"]

PARTIAL_MARK = ".radledger-partial"
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
    serialises writers of the same file.
    """

    def __init__(self, path: str, lock, dtype: str):
        self.path, self.lock, self.dtype = path, lock, dtype

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
            if ds is not None and not ds.closed:
                ds.write(block, 1, window=win)
            elif self.path in _closed_here:
                # a local run that was stopped: its handles are closed and the files removed
                raise RuntimeError(f"{self.path}: product aborted")
            else:
                with gdal_env(), rasterio.open(self.path, "r+") as ds2:
                    ds2.write(block, 1, window=win)


@dataclass
class ProductFile:
    """One product on its way to ``final``: intermediates -> COG -> rename.

    ``in_task`` lists the overview factors the chunk tasks write (see
    overviews.py); the remaining factors GDAL would add are averaged here from
    the coarsest of them.  With no in-task factor the COG driver makes the
    overviews itself.
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

    def __post_init__(self):
        token = f"{os.getpid()}-{uuid.uuid4().hex[:8]}"
        self.final = Path(self.final)
        stem = str(self.final.parent / f".{self.final.stem}{PARTIAL_MARK}-{token}")
        self.intermediate = f"{stem}.raw.tif"
        self.partial_cog = f"{stem}.cog.tif"
        self.vrt = f"{stem}.vrt"
        self.factors = overview_factors(self.grid.width, self.grid.height)
        self.in_task = tuple(f for f in self.in_task if f in self.factors)
        self.level_files = {f: f"{stem}.ov{f}.tif" for f in self.factors}
        self._lock = threading.Lock()
        self._sink_locks: dict[str, object] = {}

    def _create(self, path: str, width: int, height: int, transform, keep_open: bool, tags=None):
        with gdal_env():
            ds = rasterio.open(path, "w", width=width, height=height, count=1, dtype=self.dtype,
                               crs=self.grid.crs, transform=transform, nodata=self.nodata, **_INTERMEDIATE)
        if tags:
            ds.update_tags(**tags)
            ds.set_band_description(1, self.band_description)
        if keep_open:
            _open_for_write[path] = ds
        else:
            ds.close()

    # -- stage 1: the tiled intermediates, open for block writes
    def create(self, *, keep_open: bool = True) -> None:
        """Create the intermediates.  ``keep_open`` (local runs): threads write through these handles.

        On a cluster the files are closed at once so workers can reopen them
        ``r+``: a handle held open here would keep the header in memory and,
        when closed, rewrite the tile index over what the workers wrote.
        """
        self.final.parent.mkdir(parents=True, exist_ok=True)
        self._create(self.intermediate, self.grid.width, self.grid.height, self.grid.transform, keep_open,
                     self.tags)
        for f in self.in_task:
            h, w = level_shape(self.grid.height, self.grid.width, f)
            self._create(self.level_files[f], w, h, _scaled(self.grid.transform, f), keep_open)

    def sink(self, lock=None, factor: int = 1) -> WindowSink:
        path = self.intermediate if factor == 1 else self.level_files[factor]
        lock = lock if lock is not None else self._lock
        self._sink_locks[path] = lock
        return WindowSink(path, lock, self.dtype)

    def close_intermediate(self) -> None:
        """Close the handles, each under its writers' lock.

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
                    ds.close()

    # -- stage 2: one compression pass into a COG, then rename into place
    def finish(self) -> Path:
        self.close_intermediate()
        opts = cog_options(self.compression, categorical=self.categorical)
        source = self.intermediate
        if self.in_task:
            self._coarser_levels()
            self._write_vrt()
            source = self.vrt
            opts["OVERVIEWS"] = "FORCE_USE_EXISTING"
        with gdal_env(GDAL_NUM_THREADS="ALL_CPUS"):
            rasterio.shutil.copy(source, self.partial_cog, driver="COG", **opts)
        os.replace(self.partial_cog, self.final)
        self._remove_temporaries()
        return self.final

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
            with gdal_env(), rasterio.open(self.level_files[f], "r+") as ds:
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
        Path(self.vrt).write_text(xml, encoding="utf-8")

    def _remove_temporaries(self) -> None:
        for path in [self.intermediate, self.vrt, self.partial_cog, *self.level_files.values()]:
            _remove(path)

    def abort(self) -> None:
        self.close_intermediate()
        self._remove_temporaries()


def _scaled(t: Affine, f: int) -> Affine:
    """The transform of an overview ``f`` times coarser (same origin)."""
    return Affine(t.a * f, t.b * f, t.c, t.d * f, t.e * f, t.f)


def _remove(path: str) -> None:
    with contextlib.suppress(FileNotFoundError):
        os.remove(path)


def sweep_partials(directory: Path) -> list[str]:
    """Remove temporaries an interrupted or killed run left under ``directory``."""
    found = glob.glob(str(Path(directory) / "**" / f".*{PARTIAL_MARK}-*"), recursive=True)
    for f in found:
        _remove(f)
    return found


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
