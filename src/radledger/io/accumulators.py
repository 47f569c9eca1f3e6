"""Running per-pixel sums on disk: a composite accumulated while its dates are computed.

Each field (sum, count, sum of squares, min, max) is an uncompressed tiled GeoTIFF temporary beside
the composite, read and written one block at a time under a lock, so memory stays bounded by the
block whatever the grid or the number of dates, and workers of a cluster can add to it as well.
Unwritten tiles read as the field's starting value (GDAL's sparse files: no space used until then).
"""

from __future__ import annotations

import contextlib
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import rasterio
from rasterio.windows import Window

from ..grid import TargetGrid
from .gdalenv import gdal_env
from .lock import PARTIAL_MARK, partial_token

__all__ = ["Accumulator", "FIELDS"]

#: field -> (dtype, starting value)
FIELDS = {"sum": ("float64", 0.0), "count": ("float32", 0.0), "sumsq": ("float64", 0.0),
          "min": ("float32", np.inf), "max": ("float32", -np.inf)}


@dataclass
class Accumulator:
    """The accumulation files of one composite (``fields``: which of :data:`FIELDS` it needs)."""
    directory: Path
    name: str
    grid: TargetGrid
    fields: tuple[str, ...]
    locks: dict = field(default_factory=dict)     # field -> lock (the engine's: threads or a cluster)
    paths: dict = field(default_factory=dict)

    def create(self) -> None:
        self.directory.mkdir(parents=True, exist_ok=True)
        token = partial_token()
        for f in self.fields:
            dtype, start = FIELDS[f]
            path = self.directory / f".{self.name}.accumulate-{f}{PARTIAL_MARK}-{token}.tif"
            with gdal_env(), rasterio.open(path, "w", driver="GTiff", width=self.grid.width,
                                           height=self.grid.height, count=1, dtype=dtype, crs=self.grid.crs,
                                           transform=self.grid.transform, nodata=start, tiled=True,
                                           blockxsize=512, blockysize=512, SPARSE_OK="TRUE", BIGTIFF="IF_SAFER"):
                pass
            self.paths[f] = str(path)

    def read(self, name: str, window: Window) -> np.ndarray:
        with gdal_env(), rasterio.open(self.paths[name]) as ds:
            return ds.read(1, window=window)

    def add(self, window: Window, updates: dict[str, np.ndarray]) -> None:
        """Fold one block's partial results into the files (sum/count/sumsq add, min/max take the extreme)."""
        for name, value in updates.items():
            with self.locks.get(name, contextlib.nullcontext()):
                with gdal_env(), rasterio.open(self.paths[name], "r+") as ds:
                    current = ds.read(1, window=window)
                    if name == "min":
                        new = np.fmin(current, value)
                    elif name == "max":
                        new = np.fmax(current, value)
                    else:
                        new = current + value
                    ds.write(new.astype(current.dtype, copy=False), 1, window=window)

    def remove(self) -> None:
        for path in self.paths.values():
            with contextlib.suppress(FileNotFoundError):
                os.remove(path)
