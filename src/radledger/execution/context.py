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

from .. import physics as ph
from ..grid import TargetGrid
from ..io.memo import ReadMemo
from ..model.params import DaySolar

__all__ = ["ChunkContext"]


@dataclass
class ChunkContext:
    grid: TargetGrid
    window: Window
    shared: frozenset = frozenset()          # sources every job of the batch reads: read once
    memo: ReadMemo = field(default_factory=ReadMemo)   # shared by every block of the task
    _memo: dict = field(default_factory=dict)
    _lonlat: tuple | None = None
    _lattice: object = None
    _lattice_lat: np.ndarray | None = None

    def read(self, source) -> dict[str, np.ndarray]:
        """The decoded arrays of one source on the window (a shared source is read only once)."""
        if source in self.shared:
            if source not in self._memo:
                self._memo[source] = self._read(source)
            return {k: v.copy() for k, v in self._memo[source].items()}   # kernels may write in place
        return self._read(source)

    def _read(self, source) -> dict[str, np.ndarray]:
        if getattr(source, "needs_lonlat", False):   # a layer derived per pixel (a scene's Tmax/Tmin -> Ta)
            return source.read_layers(self.grid, self.window, self.memo, lonlat=self.lonlat())
        return source.read_layers(self.grid, self.window, self.memo)

    def lonlat(self) -> tuple[np.ndarray, np.ndarray]:
        if self._lonlat is None:
            self._lonlat = self.grid.lonlat(self.window)
        return self._lonlat

    def day_solar(self, day_of_year: int, *, daylight: bool = False, latitude: bool = False) -> DaySolar:
        """FAO-56 R_a (eq. 21) and day length N (eq. 34) of one day over the window.

        Both depend only on latitude, smoothly: they are evaluated at the lattice's points and
        spread bilinearly (far below the standard's own rounding, see tests/test_days.py).
        """
        if self._lattice is None:
            self._lattice = self.grid.lattice(self.window)
            self._lattice_lat = self._lattice.lonlat()[1]
        lat = self._lattice_lat
        ra = ph.extraterrestrial_daily(lat, day_of_year)
        n = ph.daylight_hours(ph.sunset_hour_angle(lat, ph.solar_declination(day_of_year))) if daylight else None
        return DaySolar(self._lattice.spread(ra, np.float32),
                        self._lattice.spread(n, np.float32) if daylight else None,
                        self.lonlat()[1] if latitude else None)
