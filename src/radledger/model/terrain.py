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
from the App. D beam and diffuse terms (:func:`radledger.physics.clear_sky_slope_ratio_daily`,
evaluated for many pixels at once by :mod:`radledger.model.terrain_daily`).
Pixels share the sun's path when their latitudes round to the same :data:`LATITUDE_STEP`
(0.05 deg), i.e. are at most 0.025 deg off: a shift of 0.05 deg moved the ratio by at most 0.24 %
(0.41 % at 60 deg N in December) for 20-60 deg slopes facing north, east, south and west-north-west,
latitudes 0-60 deg, at the solstices and the equinox, so rounding costs about half of that.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import math
import os
from dataclasses import dataclass

import numpy as np
from rasterio.windows import Window

from .. import physics as ph
from ..grid import Lattice, TargetGrid
from ..io.rasters import LayerSource
from .sun import SunGeometry
from .terrain_daily import clear_sky_slope_ratio_fast
from .terrain_layers import HORIZON_AZIMUTHS, horizon_name

__all__ = ["TerrainLayers", "TerrainSource", "LATITUDE_STEP", "TERRAIN_LAYER_NAMES", "terrain_inputs",
           "scene_incident_shortwave", "daily_slope_ratio", "horizon_toward", "sun_lattice", "sun_from_lattice"]

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

    ``when``: a scene's time - it also gets the sun over the chunk (``sun_lattice``, see
    :func:`sun_lattice`) and reads only the horizons around the sun's azimuth there (two files
    where it lies within one 10-deg interval); or a day's date - it reads the horizons of the
    azimuths its sun sweeps past over the chunk.
    """
    terrain: TerrainLayers
    when: dt.date | None = None
    layer: str = "terrain"
    units: str = ""

    @property
    def path(self) -> str:
        return self.terrain.directory

    def identity(self) -> list:
        """What a product depends on here: the layers' settings (the run writes the files first)."""
        return ["terrain", self.terrain.identity, str(self.when)]

    def _file(self, name: str) -> LayerSource:
        return LayerSource(layer=name, path=self.terrain.path(name), resampling="nearest")

    def read_layers(self, grid: TargetGrid, window: Window, memo=None) -> dict[str, np.ndarray]:
        out = {n: self._file(n).read(grid, window, memo) for n in TERRAIN_LAYER_NAMES}
        wanted = HORIZON_AZIMUTHS
        if isinstance(self.when, dt.datetime):
            out["sun_lattice"], azimuths = sun_lattice(grid, window, self.when)
            wanted = _azimuths_near(azimuths)
        elif self.when is not None:
            wanted = _azimuths_of_day(grid.lonlat_corners(window)[1], self.when)
        if self.terrain.method == "shading":
            out.update({horizon_name(a): self._file(horizon_name(a)).read(grid, window, memo) for a in wanted})
        return out


def sun_lattice(grid: TargetGrid, window: Window, time: dt.datetime) -> tuple[np.ndarray, np.ndarray]:
    """The sun over ``window`` on the lattice of :mod:`radledger.model.sun` (SPA every 16 pixels).

    Returns ``(lattice, azimuths)``.  ``lattice`` planes: 0-2 the unit vector toward the sun (east,
    north, up), 3 the extraterrestrial irradiance normal to the beam [W m-2], 4 the sun's azimuth
    [deg] unwrapped across the chunk (so it interpolates linearly; meaningless only with the sun
    near the zenith, where no horizon shades), 5 its elevation [deg].  ``azimuths``: the sun's
    azimuth [deg] at the points where it is up.
    """
    lon, lat = grid.lattice(window).lonlat()
    zenith, azimuth = (np.asarray(v, dtype=np.float64) for v in ph.sun_position(lat, lon, time))
    z, a = np.radians(zenith), np.radians(azimuth)
    normal = np.full(z.shape, ph.SOLAR_CONSTANT_W / ph.sun_distance(time) ** 2)
    first = azimuth.flat[0]
    unwrapped = first + np.mod(azimuth - first + 180.0, 360.0) - 180.0
    lattice = np.stack([np.sin(z) * np.sin(a), np.sin(z) * np.cos(a), np.cos(z), normal, unwrapped,
                        90.0 - zenith])
    return lattice, azimuth[zenith < 90.0]


def sun_from_lattice(lattice: np.ndarray, shape: tuple[int, int]) -> SunGeometry:
    """The sun per pixel from :func:`sun_lattice` (bilinear, as :func:`radledger.model.sun.sun_geometry`)."""
    spread = Lattice.of_shape(shape).spread
    up, azimuth = spread(lattice[2]), spread(lattice[4])
    return SunGeometry(cos_zenith=up, azimuth=np.mod(azimuth, 360.0),
                       extraterrestrial=lattice[3, 0, 0] * np.maximum(up, 0.0))


def _azimuths_near(azimuths: np.ndarray) -> tuple[float, ...]:
    """The stored azimuths that bracket every one of the sun's ``azimuths`` over a chunk [deg].

    The sun's azimuth varies smoothly between the lattice points (1 deg of margin) unless it
    stands near the zenith: spread over more than 90 deg, every azimuth.  None if it is down.
    """
    if azimuths.size == 0:
        return ()                           # night over the whole chunk: no beam to shade
    az = np.sort(np.mod(azimuths.ravel(), 360.0))
    gaps = np.diff(np.append(az, az[0] + 360.0))
    widest = int(np.argmax(gaps))
    span = 360.0 - gaps[widest] + 2.0
    return HORIZON_AZIMUTHS if span > 90.0 else _bracketing(az[(widest + 1) % az.size] - 1.0, span)


def _bracketing(start: float, span: float) -> tuple[float, ...]:
    """The stored azimuths around every direction from ``start`` clockwise over ``span`` [deg]."""
    first = int(np.floor(start / _STEP))
    last = int(np.floor((start + span) / _STEP)) + 1
    n = len(HORIZON_AZIMUTHS)
    return tuple(HORIZON_AZIMUTHS[k % n] for k in range(first, min(last, first + n - 1) + 1))


def _azimuths_of_day(latitudes: np.ndarray, day: dt.date) -> tuple[float, ...]:
    """The stored azimuths a day's sun passes over latitudes ``latitudes`` [deg] (rise to set).

    Sunrise is at azimuth arccos(sin(decl) / cos(lat)) from north (the spherical triangle with the
    sun on the horizon); the sun crosses the south between rise and set where it culminates south
    of the zenith (lat > decl), the north otherwise.  Where |lat| < |decl| its azimuth swings past
    the rise azimuth before turning (its diurnal circle leaves zenith and nadir on one side), and
    with the sun never setting it goes round: every azimuth (2 deg of margin); with the sun never
    rising, none.
    """
    decl = math.degrees(float(ph.solar_declination(day.timetuple().tm_yday)))
    lat = np.asarray(latitudes, dtype=np.float64).ravel()
    if np.any(np.abs(lat) < abs(decl) + 2.0) or (np.any(lat > decl) and np.any(lat < decl)):
        return HORIZON_AZIMUTHS
    ratio = math.sin(math.radians(decl)) / np.cos(np.radians(lat))
    if np.all(np.abs(ratio) >= 1.0) and np.all(lat * decl < 0):
        return ()                           # polar night over the whole chunk
    if np.any(np.abs(ratio) >= 1.0):
        return HORIZON_AZIMUTHS             # polar day somewhere: the sun goes round
    rise = float(np.min(np.degrees(np.arccos(ratio))) if lat[0] > decl else np.max(np.degrees(np.arccos(ratio))))
    if lat[0] > decl:                       # rise -> south -> set
        return _bracketing(rise - 2.0, 360.0 - 2.0 * rise + 4.0)
    return _bracketing(-rise - 2.0, 2.0 * rise + 4.0)     # set side -> north -> rise side


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
    Pixels are grouped by latitude (:data:`LATITUDE_STEP`); the horizons present in ``arrays``
    (those the day's sun sweeps past) are used.
    """
    slope, aspect, svf = terrain_layers
    shape = slope.shape
    pixels = [np.broadcast_to(np.asarray(a, dtype=np.float64), shape).ravel()
              for a in (slope, aspect, pressure, water, svf, albedo)]
    band = np.round(np.asarray(latitude) / LATITUDE_STEP).astype(np.int64).ravel()
    order = np.argsort(band, kind="stable")
    band = band[order]
    pixels = [a[order] for a in pixels]
    slots = present = None
    if method == "shading":
        slots = np.full(len(HORIZON_AZIMUTHS), -1, np.int64)
        present = [arrays[horizon_name(a)].ravel() for a in HORIZON_AZIMUTHS if horizon_name(a) in arrays]
        slots[[k for k, a in enumerate(HORIZON_AZIMUTHS) if horizon_name(a) in arrays]] = np.arange(len(present))
    ratio = np.empty(band.size)
    edges = np.flatnonzero(np.diff(band)) + 1
    for start, end in zip(np.r_[0, edges], np.r_[edges, band.size]):
        part = slice(start, end)
        horizons = None
        if present is not None:   # (pixels, azimuths) of this band only: memory stays a band's
            take = order[part]
            horizons = (np.stack([h[take] for h in present], axis=1) if present
                        else np.zeros((end - start, 1), np.float32))
        ratio[part] = clear_sky_slope_ratio_fast(
            band[start] * LATITUDE_STEP, day_of_year, *(a[part] for a in pixels), horizons, slots)
    out = np.empty(band.size)
    out[order] = ratio
    return out.reshape(shape)
