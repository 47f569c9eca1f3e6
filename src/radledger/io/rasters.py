"""Open and decode input layers, one target-grid window at a time.

A :class:`LayerSource` is a small picklable description (path + decoding);
:meth:`LayerSource.read` opens the file *inside* the task that needs it, so the
same graph runs on threads or on a distributed cluster.  Inputs on exactly the
target grid are read window by window; others are warped per window with
GDAL (rasterio's ``reproject`` with a source dataset reads only the source
blocks the window needs), so no code path holds a whole scene.
"""

from __future__ import annotations

import os
import threading
import warnings
from dataclasses import dataclass

import numpy as np
import rasterio
from rasterio.enums import Resampling
from rasterio.errors import NotGeoreferencedWarning, RasterioIOError
from rasterio.warp import reproject, transform_bounds
from rasterio.windows import Window, from_bounds

from ..errors import GridError, InputError
from ..grid import TargetGrid
from .gdalenv import gdal_env
from .memo import ReadMemo
from .paths import gdal_path
from .resample import FAST_RESAMPLING, warp_for
from .tiffread import BrokenTile, read_tiles

__all__ = ["LayerSource", "FileEncoding", "file_encoding", "open_dataset", "check_overlap", "read_failed",
           "short_error"]

# rasterio warns about the georeferencing of its temporary in-memory warp target, whose transform
# and CRS are in fact given; a process-wide filter, since catch_warnings is not thread-safe
warnings.filterwarnings("ignore", category=NotGeoreferencedWarning, module="rasterio.warp")


@dataclass(frozen=True)
class LayerSource:
    """One input raster and how to decode it to internal units.

    ``internal = (stored * scale + offset) * factor + shift``; stored == nodata -> NaN.
    """
    layer: str
    path: str                     # as given (for messages and provenance)
    scale: float = 1.0
    offset: float = 0.0
    nodata: float | None = None
    factor: float = 1.0
    shift: float = 0.0
    resampling: str = "bilinear"
    units: str = ""               # declared units (for messages)

    @property
    def gdal_path(self) -> str:
        return gdal_path(self.path)

    def read_layers(self, grid: TargetGrid, window: Window, memo: ReadMemo | None = None) -> dict[str, np.ndarray]:
        return {self.layer: self.read(grid, window, memo)}

    def read(self, grid: TargetGrid, window: Window, memo: ReadMemo | None = None) -> np.ndarray:
        """The decoded float32 values of ``window`` of ``grid``; NaN = missing/off-footprint.

        ``memo``: what the task keeps between dates (io/memo.py), so a task reading many dates
        of sources on one coarser grid computes where its pixels fall only once.
        """
        with gdal_env():
            ds = open_dataset(self.gdal_path, self.path)
            try:
                raw = self._read_raw(ds, grid, window, memo.warps if memo is not None else None)
            except (RasterioIOError, BrokenTile) as exc:
                raise read_failed(self.path, exc) from None
        return self._decode(raw)

    def _read_raw(self, ds, grid: TargetGrid, window: Window, warps: dict | None = None) -> np.ndarray:
        h, w = int(window.height), int(window.width)
        nodata = self.nodata
        if grid.same_as(ds.crs, ds.transform, ds.width, ds.height):
            raw = read_tiles(ds, window)
            if raw is None:
                raw = ds.read(1, window=window)
            raw = raw.astype(np.float32, copy=False)
            if nodata is not None:
                raw = np.where(raw == np.float32(nodata), np.float32(np.nan), raw)
            return raw
        if self.resampling in FAST_RESAMPLING:
            warp = warp_for(warps, grid, window, ds.crs, ds.transform, (ds.height, ds.width))
            if warp.upsampling:
                r0, r1, c0, c1 = warp.bounds()
                if r1 <= r0 or c1 <= c0:
                    return np.full((h, w), np.nan, dtype=np.float32)
                slab = ds.read(1, window=Window(c0, r0, c1 - c0, r1 - r0)).astype(np.float32)
                if nodata is not None:
                    slab[slab == np.float32(nodata)] = np.nan
                return warp.resample(slab, r0, c0, self.resampling)
        out = np.full((h, w), np.nan, dtype=np.float32)
        if not self._overlaps(ds, grid, window):
            return out
        reproject(
            source=rasterio.band(ds, 1), destination=out,
            src_nodata=nodata, dst_transform=grid.window_transform(window), dst_crs=grid.crs,
            dst_nodata=np.nan, resampling=Resampling[self.resampling], init_dest_nodata=True,
            num_threads=1,
        )
        return out

    @staticmethod
    def _overlaps(ds, grid: TargetGrid, window: Window) -> bool:
        try:
            b = transform_bounds(grid.crs, ds.crs, *grid.window_bounds(window), densify_pts=11)
        except Exception:
            return True
        l, bt, r, t = ds.bounds
        return not (b[2] < min(l, r) or b[0] > max(l, r) or b[3] < min(bt, t) or b[1] > max(bt, t))

    def _decode(self, raw: np.ndarray) -> np.ndarray:
        a = np.float32(self.scale * self.factor)
        b = np.float32(self.offset * self.factor + self.shift)
        if a != 1:
            raw *= a
        if b != 0:
            raw += b
        return raw

    def read_sample(self, max_pixels: int = 256, blocks: int = 3) -> np.ndarray:
        """A small decoded sample of the file, cheap whatever its size.

        Uses the smallest overview when the file has overviews; otherwise reads
        ``blocks x blocks`` of its internal blocks spread over the raster
        (a decimated read of a file without overviews would decompress every
        block).
        """
        with gdal_env():
            ds = open_dataset(self.gdal_path, self.path)
            try:
                if ds.overviews(1):
                    f = max(1, int(np.ceil(max(ds.width, ds.height) / max_pixels)))
                    shape = (max(1, ds.height // f), max(1, ds.width // f))
                    raw = ds.read(1, out_shape=shape, resampling=Resampling.nearest).astype(np.float32)
                else:
                    bh, bw = ds.block_shapes[0]
                    bh, bw = min(bh, 256, ds.height), min(bw, 256, ds.width)
                    rows = np.unique(np.linspace(0, ds.height - bh, blocks).astype(int))
                    cols = np.unique(np.linspace(0, ds.width - bw, blocks).astype(int))
                    raw = np.concatenate([ds.read(1, window=Window(c, r, bw, bh)).astype(np.float32).ravel()
                                          for r in rows for c in cols])
            except RasterioIOError as exc:
                raise read_failed(self.path, exc) from None
        if self.nodata is not None:
            raw[raw == np.float32(self.nodata)] = np.nan
        return self._decode(raw)


# Open datasets are cached per thread: a chunk task reads several windows of
# the same files, and reopening a remote file costs a round trip.
_local = threading.local()
_MAX_OPEN = 64


def open_dataset(gdal_name: str, shown: str | None = None):
    """Open ``gdal_name`` for reading (cached per thread); errors name the file."""
    cache = getattr(_local, "datasets", None)
    if cache is None:
        cache = _local.datasets = {}
    pid = os.getpid()
    key = (pid, gdal_name, _mtime(gdal_name))
    ds = cache.get(key)
    if ds is not None and not ds.closed:
        return ds
    shown = shown or gdal_name
    if not gdal_name.startswith("/vsi") and not os.path.exists(gdal_name):
        raise InputError(f"{shown}: file not found; check the path in the config")
    try:
        ds = rasterio.open(gdal_name)
    except RasterioIOError as exc:
        raise InputError(f"{shown}: cannot open as a raster ({short_error(exc)}); check that it is a "
                         f"GeoTIFF/NetCDF GDAL can read and not truncated") from None
    if len(cache) >= _MAX_OPEN:
        for k in list(cache)[: _MAX_OPEN // 2]:
            cache.pop(k).close()
    cache[key] = ds
    return ds


def _mtime(name: str) -> float:
    try:
        return os.stat(name).st_mtime_ns
    except OSError:
        return 0


def read_failed(path: str, exc: Exception) -> InputError:
    return InputError(f"{path}: read failed ({short_error(exc)}); the file may be truncated or corrupt - "
                      f"re-download or re-export it")


def short_error(exc: Exception) -> str:
    return " ".join(str(exc).split())[:200]


def check_overlap(src: LayerSource, grid: TargetGrid) -> None:
    """Raise :class:`GridError` when ``src`` does not overlap ``grid`` at all."""
    with gdal_env():
        ds = open_dataset(src.gdal_path, src.path)
        try:
            b = transform_bounds(grid.crs, ds.crs, *grid.bounds, densify_pts=21)
        except Exception as exc:
            raise GridError(f"{src.path}: layer {src.layer}: cannot relate its CRS to the grid's "
                            f"({short_error(exc)})") from None
        try:
            win = from_bounds(*b, transform=ds.transform)
            win = win.intersection(Window(0, 0, ds.width, ds.height))
        except Exception:
            win = None
        if win is None or win.width <= 0 or win.height <= 0:
            raise GridError(f"{src.path}: layer {src.layer} does not overlap the target grid "
                            f"({grid.describe()}); check its CRS and extent")


@dataclass(frozen=True)
class FileEncoding:
    """What a raster file itself says about its values (band 1)."""
    scale: float
    offset: float
    nodata: float | None


def file_encoding(path: str, layer: str) -> FileEncoding:
    """Band 1's own scale, offset and nodata; :class:`InputError` when the file has no CRS."""
    with gdal_env():
        ds = open_dataset(gdal_path(path), path)
        if ds.crs is None:
            raise InputError(f"{path}: layer {layer} has no CRS; assign one (e.g. gdal_edit.py -a_srs "
                             f"EPSG:xxxx {os.path.basename(path)})")
        if ds.count > 1:
            raise InputError(f"{path}: layer {layer} has {ds.count} bands; radledger reads one band per raster "
                             f"file - give one file per date (a template such as "
                             f"{{date:%Y%m%d}}) or a NetCDF/Zarr time stack as {{path: ..., variable: ...}}")
        return FileEncoding(scale=float(ds.scales[0]) if ds.scales else 1.0,
                            offset=float(ds.offsets[0]) if ds.offsets else 0.0,
                            nodata=ds.nodata)
