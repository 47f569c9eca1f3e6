"""Terrain in the kernels: the static layers a job reads, and the shortwave on each pixel's slope.

``methods.terrain``:

* ``none``: every pixel is level ground; ``incident_shortwave`` is the given (or modelled)
  horizontal shortwave.
* ``slope``: slope and aspect from the DEM (Horn 1981); the beam falls on the tilted pixel by the
  cosine of its angle of incidence (Duffie & Beckman 2013, eq. 1.6.3) with the sun from NREL's
  SPA; the sky's diffuse is isotropic and weighted by the sky-view factor V of a plane,
  ``(1 + cos s) / 2``; the terrain in view reflects ``albedo x R_s x (1 - V)`` (Liu & Jordan
  1963, the isotropic tilted-surface model).
* ``shading``: ``slope`` plus cast shadows (no beam where the DEM's horizon toward the sun's
  azimuth, interpolated linearly between the stored 10-deg azimuths, stands above the sun) and V
  from the horizons in 36 directions (Dozier & Frew 1990).

A given shortwave is split into beam and diffuse by Erbs, Klein & Duffie (1982)
(``methods.diffuse_fraction: erbs``); a modelled clear-sky one (App. D of ASCE-EWRI 2005) keeps
its own beam and diffuse terms (FAO-56 eq. 37 has none: Erbs splits it too).

Longwave (scenes): ``L = V L_sky + (1 - V) eps sigma Ts^4``, Pluess & Ohmura (1997) simplified:
the surrounding terrain radiates at the pixel's own surface temperature and emissivity, and the sky
longwave it reflects is neglected.

Days: the day's shortwave on the slope is the given horizontal daily total times the ratio of the
clear-sky shortwave on the slope to that on flat ground, both summed over the day in 5-minute steps
from the App. D beam and diffuse terms (:func:`radledger.physics.clear_sky_slope_ratio_daily`).
Pixels share the sun's path when their latitudes round to the same :data:`LATITUDE_STEP`
(0.05 deg): the ratio then moves by at most 0.12 % (0.2 % at 60 deg N in December), measured for
30-60 deg slopes facing north, east and south, latitudes 0-60 deg, at the solstices and equinox.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import os
from dataclasses import dataclass

import numpy as np
from rasterio.windows import Window

from .. import physics as ph
from ..grid import TargetGrid
from ..io.rasters import LayerSource
from .sun import SunGeometry
from .terrain_layers import HORIZON_AZIMUTHS, horizon_name

__all__ = ["TerrainLayers", "TerrainSource", "LATITUDE_STEP", "TERRAIN_LAYER_NAMES", "terrain_inputs",
           "scene_incident_shortwave", "daily_slope_ratio", "horizon_toward"]

#: latitude step [deg] within which day pixels share the sun's path (see the module's docstring)
LATITUDE_STEP = 0.05
#: the static layers every terrain method writes
TERRAIN_LAYER_NAMES = ("slope", "aspect", "sky_view_factor")
_STEP = 360.0 / len(HORIZON_AZIMUTHS)


@dataclass(frozen=True)
class TerrainLayers:
    """The static terrain layers of a run: which, where, from which DEM, and their settings hashes."""
    method: str                              # slope | shading
    directory: str                           # DIR/terrain
    dem: LayerSource                         # static.elevation
    hashes: tuple[tuple[str, str], ...]      # (layer, settings hash) of every file

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(n for n, _ in self.hashes)

    def path(self, name: str) -> str:
        """``DIR/terrain/slope.tif``, ..., ``DIR/terrain/horizons/horizon_AAA.tif``."""
        sub = ("horizons",) if name.startswith("horizon_") else ()
        return os.path.join(self.directory, *sub, f"{name}.tif")

    @property
    def identity(self) -> str:
        """One hash of every layer's settings: what a job's own settings hash depends on."""
        return hashlib.sha256(repr(self.hashes).encode()).hexdigest()[:20]


@dataclass(frozen=True)
class TerrainSource:
    """A job's view of the static terrain layers (read like any input, one chunk window at a time).

    A scene (``time`` given) reads only the horizons around the sun's azimuth over the chunk (two
    files where it lies within one 10-deg interval); a day reads all of them.
    """
    terrain: TerrainLayers
    time: dt.datetime | None = None
    layer: str = "terrain"
    units: str = ""

    @property
    def path(self) -> str:
        return self.terrain.directory

    def _file(self, name: str) -> LayerSource:
        return LayerSource(layer=name, path=self.terrain.path(name), resampling="nearest")

    def read_layers(self, grid: TargetGrid, window: Window) -> dict[str, np.ndarray]:
        out = {n: self._file(n).read(grid, window) for n in TERRAIN_LAYER_NAMES}
        if self.terrain.method == "shading":
            wanted = HORIZON_AZIMUTHS if self.time is None else _azimuths_near_sun(grid, window, self.time)
            out.update({horizon_name(a): self._file(horizon_name(a)).read(grid, window) for a in wanted})
        return out


def _azimuths_near_sun(grid: TargetGrid, window: Window, time: dt.datetime) -> tuple[float, ...]:
    """The stored azimuths that bracket the sun's azimuth anywhere over ``window`` (all near zenith).

    The sun is placed at 3 x 3 points of the chunk; its azimuth varies smoothly between them unless
    it stands near the zenith (above 80 deg, or spread over more than 90 deg): then every azimuth.
    """
    t = grid.window_transform(window)
    cols = np.array([0.5, window.width / 2, window.width - 0.5])
    rows = np.array([0.5, window.height / 2, window.height - 0.5])
    x, y = np.meshgrid(t.c + t.a * cols, t.f + t.e * rows)
    lon, lat = (x, y) if grid.crs.is_geographic else grid.to_lonlat(x, y)
    zenith, azimuth = ph.sun_position(np.asarray(lat), np.asarray(lon), time)
    if np.all(np.asarray(zenith) >= 90.0):
        return ()                           # night over the whole chunk: no beam to shade
    az = np.sort(np.mod(np.asarray(azimuth, dtype=float).ravel(), 360.0))
    gaps = np.diff(np.append(az, az[0] + 360.0))
    widest = int(np.argmax(gaps))
    start = az[(widest + 1) % az.size] - 1.0          # the arc covering every azimuth, +-1 deg
    span = 360.0 - gaps[widest] + 2.0
    if np.min(zenith) < 10.0 or span > 90.0:
        return HORIZON_AZIMUTHS
    first = int(np.floor(start / _STEP))
    last = int(np.floor((start + span) / _STEP)) + 1
    return tuple(HORIZON_AZIMUTHS[k % len(HORIZON_AZIMUTHS)] for k in range(first, last + 1))


def horizon_toward(arrays: dict[str, np.ndarray], azimuth: np.ndarray) -> np.ndarray:
    """Horizon angle [deg] toward ``azimuth`` [deg] per pixel, linear between the stored azimuths.

    Uses the ``horizon_AAA`` arrays present; a pixel whose bracketing azimuths were not read gets
    NaN (no shadow).
    """
    n = len(HORIZON_AZIMUTHS)
    t = np.mod(azimuth, 360.0) / _STEP
    i0 = np.floor(t).astype(np.int64) % n
    w = t - np.floor(t)
    out = np.zeros(np.shape(azimuth))
    seen = np.zeros(np.shape(azimuth), dtype=np.int8)
    for k, a in enumerate(HORIZON_AZIMUTHS):
        h = arrays.get(horizon_name(a))
        if h is None:
            continue
        low, high = i0 == k, (i0 + 1) % n == k
        out += np.where(low, (1.0 - w) * h, 0.0) + np.where(high, w * h, 0.0)
        seen += low.astype(np.int8) + high
    return np.where(seen == 2, out, np.nan)


def terrain_inputs(arrays: dict[str, np.ndarray], quality: np.ndarray, missing_bit: int):
    """Slope, aspect and sky-view factor of a chunk; NaN slope or view factor flags the pixel."""
    slope, aspect, svf = (arrays[n] for n in TERRAIN_LAYER_NAMES)
    quality[np.isnan(slope) | np.isnan(svf)] |= missing_bit
    return slope, aspect, svf


def scene_incident_shortwave(arrays: dict[str, np.ndarray], sun: SunGeometry, shortwave: np.ndarray,
                             albedo: np.ndarray, terrain_layers, method: str, *, clear_sky_terms=None
                             ) -> np.ndarray:
    """Shortwave on each pixel's slope at the scene's instant [W m-2].

    ``shortwave``: horizontal global shortwave R_s (given, or modelled); ``clear_sky_terms``:
    the modelled clear sky's (beam index K_B, diffuse index K_D) of ASCE-EWRI App. D, used instead
    of the Erbs split when R_s is that model.  ``terrain_layers``: (slope, aspect, sky-view factor).
    """
    slope, aspect, svf = terrain_layers
    cos_z = sun.cos_zenith
    zenith = np.degrees(np.arccos(np.clip(cos_z, -1.0, 1.0)))
    up = cos_z > 0.0
    normal = np.where(up, sun.extraterrestrial / np.where(up, cos_z, 1.0), ph.SOLAR_CONSTANT_W)  # G_on
    if clear_sky_terms is not None:
        k_beam, k_diffuse = clear_sky_terms
        beam, diffuse = k_beam * normal, k_diffuse * sun.extraterrestrial
    else:
        beam, diffuse = ph.erbs_1982(shortwave, zenith, normal)
    cos_i = ph.cos_incidence(slope, aspect, zenith, sun.azimuth)
    sunlit = 1.0
    if method == "shading":
        sunlit = ~ph.cast_shadow(horizon_toward(arrays, sun.azimuth), 90.0 - zenith)
    return ph.incident_shortwave_isotropic(beam, diffuse, shortwave, cos_i, svf, albedo, sunlit)


def daily_slope_ratio(arrays: dict[str, np.ndarray], terrain_layers, latitude: np.ndarray, day_of_year: int,
                      pressure, water, albedo, method: str) -> np.ndarray:
    """Ratio of a day's clear-sky shortwave on each pixel's slope to that on flat ground [1].

    ``pressure`` [kPa] and ``water`` (precipitable water) [mm] per pixel; NaN where an input is.
    """
    slope, aspect, svf = terrain_layers
    shape = slope.shape
    pressure, water, albedo = (np.broadcast_to(np.asarray(a, dtype=np.float64), shape)
                               for a in (pressure, water, albedo))
    horizons = None
    if method == "shading":
        horizons = np.stack([arrays[horizon_name(a)] for a in HORIZON_AZIMUTHS])
    ok = np.isfinite(slope) & np.isfinite(svf) & np.isfinite(pressure) & np.isfinite(water) & np.isfinite(albedo)
    ratio = np.full(shape, np.nan)
    band = np.round(np.asarray(latitude) / LATITUDE_STEP).astype(np.int64)
    for b in np.unique(band[ok]):
        m = ok & (band == b)
        ratio[m] = ph.clear_sky_slope_ratio_daily(
            b * LATITUDE_STEP, day_of_year, slope[m], aspect[m], pressure[m], water[m], svf[m], albedo[m],
            None if horizons is None else horizons[:, m], None if horizons is None else HORIZON_AZIMUTHS)
    return ratio
