"""GeoTIFF products: chunked writes into a tiled intermediate, one compression pass into a COG.

Why this shape (measurements in shared/PERF.md): compression, not arithmetic,
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

import numpy as np
import rasterio
import rasterio.shutil
from rasterio.windows import Window

from .gdalenv import gdal_env
from .grid import TargetGrid
from .products import QUALITY_NODATA

__all__ = ["COG_DEFAULTS", "ProductFile", "WindowSink", "sweep_partials", "read_tags", "PARTIAL_MARK"]

PARTIAL_MARK = ".radledger-partial"

# The one place for COG settings.  ZSTD level 1: ~5x faster than the default
# level 9 for a ~3 % larger file (PERF.md); predictor 3 (floating point) or 2
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


def cog_options(compression: str, dtype: str) -> dict[str, str]:
    opts = dict(COG_DEFAULTS, COMPRESS=compression.upper())
    key, level = CODEC_LEVEL[compression]
    if key:
        opts[key] = level
    if dtype == "uint8":
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
            else:
                with gdal_env(), rasterio.open(self.path, "r+") as ds2:
                    ds2.write(block, 1, window=win)


@dataclass
class ProductFile:
    """One product on its way to ``final``: intermediate -> COG -> rename."""
    final: Path
    grid: TargetGrid
    dtype: str
    tags: dict[str, str]
    band_description: str
    compression: str

    def __post_init__(self):
        token = f"{os.getpid()}-{uuid.uuid4().hex[:8]}"
        self.final = Path(self.final)
        self.intermediate = str(self.final.parent / f".{self.final.stem}{PARTIAL_MARK}-{token}.raw.tif")
        self.partial_cog = str(self.final.parent / f".{self.final.stem}{PARTIAL_MARK}-{token}.cog.tif")
        self._lock = threading.Lock()

    # -- stage 1: the tiled intermediate, open for block writes
    def create(self, *, keep_open: bool = True) -> None:
        """Create the intermediate.  ``keep_open`` (local runs): threads write through this handle.

        On a cluster the file is closed at once so workers can reopen it ``r+``:
        a handle held open here would keep the header in memory and, when
        closed, rewrite the tile index over what the workers wrote.
        """
        self.final.parent.mkdir(parents=True, exist_ok=True)
        nodata = QUALITY_NODATA if self.dtype == "uint8" else np.nan
        with gdal_env():
            ds = rasterio.open(self.intermediate, "w", width=self.grid.width, height=self.grid.height,
                               count=1, dtype=self.dtype, crs=self.grid.crs, transform=self.grid.transform,
                               nodata=nodata, **_INTERMEDIATE)
        ds.update_tags(**self.tags)
        ds.set_band_description(1, self.band_description)
        if keep_open:
            _open_for_write[self.intermediate] = ds
        else:
            ds.close()

    def sink(self, lock=None) -> WindowSink:
        return WindowSink(self.intermediate, lock if lock is not None else self._lock, self.dtype)

    def close_intermediate(self) -> None:
        ds = _open_for_write.pop(self.intermediate, None)
        if ds is not None and not ds.closed:
            ds.close()

    # -- stage 2: one compression pass into a COG, then rename into place
    def finish(self) -> Path:
        self.close_intermediate()
        with gdal_env(GDAL_NUM_THREADS="ALL_CPUS"):
            rasterio.shutil.copy(self.intermediate, self.partial_cog, driver="COG",
                                 **cog_options(self.compression, self.dtype))
        os.replace(self.partial_cog, self.final)
        _remove(self.intermediate)
        return self.final

    def abort(self) -> None:
        self.close_intermediate()
        _remove(self.intermediate)
        _remove(self.partial_cog)


def _remove(path: str) -> None:
    with contextlib.suppress(FileNotFoundError):
        os.remove(path)


def sweep_partials(directory: Path) -> list[str]:
    """Remove temporaries an interrupted or killed run left under ``directory``."""
    found = glob.glob(str(Path(directory) / "**" / f".*{PARTIAL_MARK}-*"), recursive=True)
    for f in found:
        _remove(f)
    return found


def read_tags(path: str | os.PathLike) -> dict[str, str]:
    """The dataset tags of a finished product ({} if unreadable)."""
    try:
        with gdal_env(), rasterio.open(path) as ds:
            return dict(ds.tags())
    except Exception:
        return {}
