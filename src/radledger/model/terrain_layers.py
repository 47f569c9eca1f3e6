"""The static terrain layers of one chunk: slope, aspect, sky-view factor and horizon angles.

Computed once per grid and DEM (stages/terrain.py writes them under ``DIR/terrain/``), chunk by
chunk: each task reads its window of the DEM plus a halo, so rays toward the horizon see the
terrain around the chunk, and keeps the results for the chunk's own pixels only.

* Slope and aspect: Horn's (1981) 3 x 3 differences, which need a halo of one pixel.  At the
  grid's edge, where the DEM has no data beyond it, the missing ring is continued linearly from
  the two pixels inside (``2 z_0 - z_1``, exact for a plane), so edge pixels get a slope too.
* Horizon angles (``shading``): :data:`HORIZON_AZIMUTHS` directions, every 10 deg clockwise from
  north, marched over the DEM as :func:`radledger.physics.horizon_angles` does (Dozier & Frew
  1990), for the chunk's pixels only.  The halo comes from the DEM's relief
  (:func:`radledger.physics.halo_pixels`): terrain at most ``relief`` metres above a pixel shades
  it from a sun at elevation e only within ``relief / tan(e)``, so a halo of
  ``relief / tan(5 deg)`` (capped at :data:`MAX_HALO` pixels) finds every cast shadow of a sun at
  least :data:`MIN_SUN_ELEVATION` high; horizons farther out are below 5 deg and change a sky-view
  factor by less than sin^2(5 deg) = 0.008.
* Sky-view factor: Dozier & Frew (1990) from the horizons and the pixel's own slope (``shading``),
  or the plane's ``(1 + cos slope) / 2`` (``slope``; Liu & Jordan 1963).
* Directions are true (geographic) north: on a projected grid, grid north and true north differ by
  the meridian convergence (1.4 deg at 119.3 W in UTM zone 11, growing away from the zone's
  central meridian), so the aspect is turned by it pixel by pixel (exact on a lattice every 32
  pixels, bilinear in between), and each chunk marches its rays along the true azimuths (turned by
  the convergence at its centre; it changes by about 0.2 deg over a 30-km chunk).

Where the DEM extends beyond the grid, the halo reads it there (warped to the grid's pixels), so
mountains just outside a basin's grid still cast their shadows into it.
"""

from __future__ import annotations

import math

import numpy as np
from rasterio.windows import Window

from .. import physics as ph
from ..grid import TargetGrid
from ..physics._jit import jit
from ..physics.horizon import _dem, _ray_max_tangent, _ray_step

__all__ = ["HORIZON_AZIMUTHS", "MIN_SUN_ELEVATION", "MAX_HALO", "terrain_halo", "read_dem_with_halo",
           "chunk_terrain", "horizon_angles_inside", "horizon_name", "pixel_metres", "grid_north_offset",
           "terrain_blocks", "TERRAIN_BLOCK"]

#: directions of the stored horizon angles, clockwise from north [deg]
HORIZON_AZIMUTHS = tuple(float(a) for a in range(0, 360, 10))
#: lowest sun whose cast shadows the halo keeps complete [deg]
MIN_SUN_ELEVATION = 5.0
#: the halo's upper limit [pixel] (a low sun over high relief would otherwise ask for tens of km)
MAX_HALO = 1000


def horizon_name(azimuth: float) -> str:
    """The layer (and file stem) of the horizon angles toward ``azimuth``: ``horizon_010``."""
    return f"horizon_{int(round(azimuth)) % 360:03d}"


def pixel_metres(grid: TargetGrid, window: Window | None = None) -> tuple[float, float]:
    """Pixel size (east-west, north-south) on the ground [m] at the centre of ``window``.

    Projected grids: the CRS's units in metres.  Geographic grids: the geodesic lengths of the
    pixel's sides on the WGS84 ellipsoid at the window's centre (``None``: the grid's corner pixel
    nearest a pole, the smallest of the grid).
    """
    rx, ry = grid.resolution
    if not grid.crs.is_geographic:
        factor = grid.crs.linear_units_factor[1]
        return rx * factor, ry * factor
    from pyproj import Geod
    t = grid.transform
    if window is None:
        lats = [t.f + 0.5 * t.e, t.f + (grid.height - 0.5) * t.e]
        lat, lon = max(lats, key=abs), t.c
    else:
        lon = t.c + (window.col_off + window.width / 2) * t.a
        lat = t.f + (window.row_off + window.height / 2) * t.e
    geod = Geod(ellps="WGS84")
    dx = geod.inv(lon - rx / 2, lat, lon + rx / 2, lat)[2]
    dy = geod.inv(lon, lat - ry / 2, lon, lat + ry / 2)[2]
    return float(dx), float(dy)


def grid_north_offset(grid: TargetGrid, window: Window, *, step: int = 32) -> np.ndarray:
    """Grid azimuth of true north at each pixel of ``window`` [deg] (0 on a geographic grid).

    A direction's true azimuth is its grid azimuth minus this.  Evaluated from the projection on a
    lattice every ``step`` pixels (a step of 1e-4 deg north from each point) and interpolated.
    """
    h, w = int(window.height), int(window.width)
    if grid.crs.is_geographic:
        return np.zeros((h, w))
    points = grid.lattice(window, step=step)
    return points.spread(_north_of(grid, *points.xy()))


def _north_of(grid: TargetGrid, x, y) -> np.ndarray:
    """Grid azimuth of true north [deg] at projected coordinates: toward a point 1e-4 deg north."""
    from pyproj import Transformer
    x, y = np.asarray(x, dtype=np.float64), np.asarray(y, dtype=np.float64)
    lon, lat = grid.to_lonlat(x, y)
    x1, y1 = Transformer.from_crs("EPSG:4326", grid.crs, always_xy=True).transform(lon, np.asarray(lat) + 1e-4)
    return np.degrees(np.arctan2(np.asarray(x1) - x, np.asarray(y1) - y))


#: edge of the grid-aligned blocks that share one ray turn and one ground pixel size [pixel]
TERRAIN_BLOCK = 512


def terrain_blocks(grid: TargetGrid, window: Window, edge: int | None = None) -> list[tuple]:
    """The parts of ``window`` in each ``edge``-pixel block of the grid, with what is held constant there.

    ``(part, dx, dy, turn)`` per block: ``part`` the window's share of it; ``dx``, ``dy`` the ground
    pixel size [m] and ``turn`` the grid azimuth of true north [deg], both at the centre of the whole
    block, so a pixel gets the same values whatever the chunk edge (a chunk's own centre would make
    the horizons depend on it).
    """
    edge = edge or TERRAIN_BLOCK
    r0, c0 = int(window.row_off), int(window.col_off)
    r1, c1 = r0 + int(window.height), c0 + int(window.width)
    parts = []
    for br in range(r0 // edge * edge, r1, edge):
        for bc in range(c0 // edge * edge, c1, edge):
            top, left = max(br, r0), max(bc, c0)
            part = Window(left, top, min(bc + edge, c1) - left, min(br + edge, r1) - top)
            dx, dy = pixel_metres(grid, Window(bc, br, edge, edge))
            parts.append((part, dx, dy, (br + edge / 2, bc + edge / 2)))
    turns = _north_at(grid, [p[3] for p in parts])
    return [(part, dx, dy, turn) for (part, dx, dy, _), turn in zip(parts, turns)]


def _north_at(grid: TargetGrid, points: list[tuple[float, float]]) -> list[float]:
    """Grid azimuth of true north [deg] at (row, column) positions (as :func:`grid_north_offset`)."""
    if grid.crs.is_geographic or not points:
        return [0.0] * len(points)
    t = grid.transform
    x = [t.c + c * t.a + r * t.b for r, c in points]
    y = [t.f + c * t.d + r * t.e for r, c in points]
    return [float(v) for v in _north_of(grid, x, y)]


def terrain_halo(relief: float, grid: TargetGrid, method: str) -> int:
    """Halo [pixel] of a chunk: 1 for slope and aspect, from the relief for horizons (shading)."""
    if method != "shading":
        return 1
    return ph.halo_pixels(relief, min(pixel_metres(grid)), min_sun_elevation=MIN_SUN_ELEVATION,
                          max_pixels=MAX_HALO)


def read_dem_with_halo(dem, grid: TargetGrid, window: Window, halo: int) -> tuple[np.ndarray, np.ndarray]:
    """The DEM over ``window`` plus ``halo`` pixels on every side [m].

    Returns ``(z, filled)``: ``z`` with NaN where the DEM has no data (beyond its extent);
    ``filled`` the same with the ring just outside the grid's edge continued linearly from inside,
    for the 3 x 3 differences of the slope.
    """
    r0, c0, h, w = int(window.row_off), int(window.col_off), int(window.height), int(window.width)
    top, left, bottom, right = r0 - halo, c0 - halo, r0 + h + halo, c0 + w + halo
    ir0, ic0 = max(top, 0), max(left, 0)
    ir1, ic1 = min(bottom, grid.height), min(right, grid.width)
    inside = dem.read(grid, Window(ic0, ir0, ic1 - ic0, ir1 - ir0))
    shape = (bottom - top, right - left)
    if (top, left, bottom, right) == (ir0, ic0, ir1, ic1):
        z = inside.astype(np.float64)
    else:
        # beyond the grid's edge: the DEM's own values where it reaches further (NaN elsewhere)
        around = TargetGrid(grid.crs, grid.window_transform(Window(left, top, shape[1], shape[0])),
                            shape[1], shape[0], chunk=grid.chunk)
        z = dem.read(around, Window(0, 0, shape[1], shape[0])).astype(np.float64)
        z[ir0 - top:ir1 - top, ic0 - left:ic1 - left] = inside
    filled = _continue_edges(z, (ir0 - top, ir1 - top), (ic0 - left, ic1 - left))
    return z, filled


def _continue_edges(z: np.ndarray, rows: tuple[int, int], cols: tuple[int, int]) -> np.ndarray:
    """``z`` with the NaN ring just outside the grid's rows/cols continued as ``2 z_0 - z_1``."""
    out = z.copy()
    (a, b), (c, d) = rows, cols
    if b - a >= 2:
        if a > 0:
            out[a - 1] = np.where(np.isnan(out[a - 1]), 2.0 * out[a] - out[a + 1], out[a - 1])
        if b < out.shape[0]:
            out[b] = np.where(np.isnan(out[b]), 2.0 * out[b - 1] - out[b - 2], out[b])
    if d - c >= 2:
        if c > 0:
            out[:, c - 1] = np.where(np.isnan(out[:, c - 1]), 2.0 * out[:, c] - out[:, c + 1], out[:, c - 1])
        if d < out.shape[1]:
            out[:, d] = np.where(np.isnan(out[:, d]), 2.0 * out[:, d - 1] - out[:, d - 2], out[:, d])
    return out


@jit(nogil=True, cache=True)
def _inside_kernel(zp, zwin, steps, drows, dcols, nsteps, zmax, r0, c0, out):
    n, h, w = out.shape
    for a in range(n):
        for i in range(h):
            for j in range(w):
                r, c = r0 + i, c0 + j
                if np.isnan(zp[r, c]):
                    out[a, i, j] = np.nan
                    continue
                t = _ray_max_tangent(zp, zwin, r, c, steps[a], drows[a], dcols[a], nsteps[a], zmax,
                                     -np.inf, np.inf)
                out[a, i, j] = math.degrees(math.atan(t))


def horizon_angles_inside(z: np.ndarray, halo: int, dx: float, dy: float, azimuths, max_distance: float
                          ) -> np.ndarray:
    """Horizon angles [deg] of the pixels of ``z`` more than ``halo`` pixels inside its edge.

    The same rays as :func:`radledger.physics.horizon_angles` over all of ``z`` (so the result
    equals its inner part), without spending them on the halo's own pixels.  Shape
    ``(len(azimuths), rows - 2 halo, cols - 2 halo)``, float32.
    """
    zp, zwin, zmax = _dem(z, dx, dy, max_distance)
    az = np.asarray(azimuths, dtype=np.float64)
    steps, drows, dcols = (np.array(v) for v in zip(*(_ray_step(a, dx, dy) for a in az)))
    nsteps = np.floor(max_distance / steps).astype(np.int64)
    out = np.empty((az.size, z.shape[0] - 2 * halo, z.shape[1] - 2 * halo), dtype=np.float32)
    _inside_kernel(zp, zwin, steps, drows, dcols, nsteps, zmax, halo, halo, out)
    return out


def chunk_terrain(z: np.ndarray, filled: np.ndarray, halo: int, dx: float, dy: float, method: str,
                  north: np.ndarray | float = 0.0, turn: float | None = None) -> dict[str, np.ndarray]:
    """Every static terrain layer of the chunk inside a DEM read with :func:`read_dem_with_halo`.

    ``slope`` [deg], ``aspect`` [deg clockwise from true north, NaN where flat],
    ``sky_view_factor`` [1] and, for ``shading``, ``horizon_AAA`` [deg] toward each of
    :data:`HORIZON_AZIMUTHS` (true north); float32, shaped like the chunk.  ``north``: the grid
    azimuth of true north over the chunk [deg] (:func:`grid_north_offset`); ``turn``: the one
    grid azimuth of true north the rays are turned by [deg] (None: ``north`` at the chunk's centre).
    """
    inner = (slice(halo, z.shape[0] - halo), slice(halo, z.shape[1] - halo))
    ring = (slice(halo - 1, z.shape[0] - halo + 1), slice(halo - 1, z.shape[1] - halo + 1))
    slope, aspect = ph.horn_1981_slope_aspect(filled[ring], dx, dy)
    slope, aspect = slope[1:-1, 1:-1], np.mod(aspect[1:-1, 1:-1] - north, 360.0)
    nodata = np.isnan(z[inner])          # a continued edge value is not data of its own
    slope[nodata] = np.nan
    aspect[nodata] = np.nan
    out = {"slope": slope.astype(np.float32), "aspect": aspect.astype(np.float32)}
    if method == "shading":
        # rays along the true azimuths: turned by the convergence at the chunk's centre
        if turn is None:
            north = np.asarray(north, dtype=np.float64)
            turn = float(north[north.shape[0] // 2, north.shape[1] // 2]) if north.ndim == 2 else float(north)
        rays = [a + turn for a in HORIZON_AZIMUTHS]
        horizons = horizon_angles_inside(z, halo, dx, dy, rays, halo * min(dx, dy))
        svf = ph.dozier_frew_1990_sky_view_factor(horizons, HORIZON_AZIMUTHS, slope, aspect)
        out.update({horizon_name(a): horizons[k] for k, a in enumerate(HORIZON_AZIMUTHS)})
    else:
        svf = ph.sky_view_factor_plane(slope)
    out["sky_view_factor"] = np.asarray(svf, dtype=np.float32)
    return out
