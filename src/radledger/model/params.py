"""What a scene's or a day's kernel needs to know besides its input arrays."""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field

import numpy as np

from .needs import Needs

__all__ = ["SceneParams", "DayParams", "DaySolar"]


@dataclass(frozen=True)
class DaySolar:
    """The sun's part of one day over a chunk (FAO-56): what depends only on latitude and date."""
    extraterrestrial: np.ndarray    # R_a, eq. 21 [MJ m-2 day-1]
    daylight_hours: np.ndarray | None = None   # N, eq. 34 [hour] (when a daylight mean needs it)
    latitude: np.ndarray | None = None         # the pixels' latitude [deg] (when terrain needs it)


@dataclass(frozen=True)
class SceneParams:
    time: dt.datetime
    products: tuple[str, ...]
    needs: Needs
    sky_emissivity: str = "brutsaert"
    clouds: str = "none"
    clear_sky_shortwave: str = "beam-diffuse"
    emissivity_lut: np.ndarray | None = field(default=None, compare=False)
    emissivity_constant: float | None = None
    emissivity_unknown: float | None = None      # for classes not in the table; None = stop with an error
    land_cover_path: str = ""                    # for the error message
    emissivity_table: str = ""
    scene_to_day: str = "none"                   # none | sinusoidal | shortwave-ratio
    terrain: str = "none"                        # none | slope | shading (model/terrain.py)
    terrain_layers: str = ""                     # identity (settings hash) of the static terrain layers

    @property
    def day_of_year(self) -> int:
        return self.time.timetuple().tm_yday

    @property
    def utc_hour(self) -> float:
        t = self.time
        return t.hour + t.minute / 60 + t.second / 3600


@dataclass(frozen=True)
class DayParams:
    date: dt.date
    products: tuple[str, ...]
    needs: Needs
    shortwave_daylight_mean: bool = False   # shortwave given as a mean over daylight hours [W m-2]
    terrain: str = "none"                   # none | slope | shading (model/terrain.py)
    terrain_layers: str = ""                # identity (settings hash) of the static terrain layers

    @property
    def day_of_year(self) -> int:
        return self.date.timetuple().tm_yday
