"""What one chunk task computes once for all the dates it handles.

A task runs one grid chunk for a batch of dates (a few days of a season, or a few scenes).  Its
context keeps what is the same for every date of the batch: the pixels' longitude and latitude,
the sources shared by all of them (the DEM, the land cover, any other static layer), and where
the window's pixels fall on each coarser source grid (weather stacks, templates on one grid).
It lives as long as the task, so memory stays bounded by the chunk size.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from rasterio.windows import Window

from ..grid import TargetGrid

__all__ = ["ChunkContext"]


@dataclass
class ChunkContext:
    grid: TargetGrid
    window: Window
    shared: frozenset = frozenset()          # sources every job of the batch reads: read once
    warps: dict = field(default_factory=dict)
    _memo: dict = field(default_factory=dict)
    _lonlat: tuple | None = None

    def read(self, source) -> dict[str, np.ndarray]:
        """The decoded arrays of one source on the window (a shared source is read only once)."""
        if source in self.shared:
            if source not in self._memo:
                self._memo[source] = source.read_layers(self.grid, self.window, self.warps)
            return {k: v.copy() for k, v in self._memo[source].items()}   # kernels may write in place
        return source.read_layers(self.grid, self.window, self.warps)

    def lonlat(self) -> tuple[np.ndarray, np.ndarray]:
        if self._lonlat is None:
            self._lonlat = self.grid.lonlat(self.window)
        return self._lonlat
