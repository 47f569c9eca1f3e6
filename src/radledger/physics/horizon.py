"""Terrain horizons from a DEM: horizon angles, cast shadows, sky-view factor.

Grids are 2-D NumPy arrays, north up: row 0 is the northern edge, rows run
southward and columns eastward.  ``dx`` (east-west) and ``dy`` (north-south)
are the pixel sizes in metres.  Azimuths are degrees clockwise from north,
elevation angles degrees above the horizontal.

The functions that look along rays (:func:`horizon_angles`,
:func:`shadow_mask`) work on NumPy arrays only.  To run them chunk by chunk
give each chunk a halo of :func:`halo_pixels` pixels and crop the result: a
ray stops at the array's edge, and terrain beyond it is taken as not
obstructing.  Their loops are compiled with Numba and release the GIL, so
Dask's threads can run chunks side by side.

References
----------
.. [1] Dozier, J., Frew, J. (1990). Rapid calculation of terrain parameters
   for radiation modeling from digital elevation data. IEEE Transactions on
   Geoscience and Remote Sensing 28(5), 963-969.
   https://doi.org/10.1109/36.58986
"""

from __future__ import annotations

import math

from ._jit import jit
import numpy as np

__all__ = [
    "horizon_angles",
    "horizon_at",
    "cast_shadow",
    "shadow_mask",
    "dozier_frew_1990_sky_view_factor",
    "halo_pixels",
]


def _ray_step(azimuth_deg, dx, dy):
    """Step along a ray that moves exactly one row or one column per step.

    Returns (metres per step, rows per step, columns per step); one of the
    two per-step moves is exactly +-1.
    """
    az = math.radians(azimuth_deg)
    east, north = math.sin(az), math.cos(az)
    # sin(pi) and cos(pi/2) are ~1e-16, not 0: snap them so that a ray along
    # a grid axis stays exactly on it.
    east = 0.0 if abs(east) < 1e-12 else east
    north = 0.0 if abs(north) < 1e-12 else north
    cols_per_metre, rows_per_metre = abs(east) / dx, abs(north) / dy
    step = 1.0 / max(cols_per_metre, rows_per_metre)
    if rows_per_metre >= cols_per_metre:
        return step, (-1.0 if north > 0 else 1.0), east * step / dx
    return step, -north * step / dy, (1.0 if east > 0 else -1.0)


# Rays are marched in segments of _SEGMENT steps.  Before sampling a
# segment, the largest elevation within _RADIUS pixels of its middle sample
# (which holds every sample of the segment and its interpolation partner)
# says whether any of them could raise the horizon; if not, the segment is
# skipped.  This only saves work: the result is the same as sampling all.
_SEGMENT = 16
_RADIUS = _SEGMENT // 2 + 1


@jit(nogil=True, cache=True)
def _window_max(z, radius):
    """Largest value within +-radius rows and columns (NaN ignored, -inf if none)."""
    rows, cols = z.shape
    across = np.full((rows, cols), -np.inf)
    for r in range(rows):
        for c in range(cols):
            m = -np.inf
            for cc in range(max(c - radius, 0), min(c + radius + 1, cols)):
                if z[r, cc] > m:
                    m = z[r, cc]
            across[r, c] = m
    out = np.full((rows, cols), -np.inf)
    for r in range(rows):
        for c in range(cols):
            m = -np.inf
            for rr in range(max(r - radius, 0), min(r + radius + 1, rows)):
                if across[rr, c] > m:
                    m = across[rr, c]
            out[r, c] = m
    return out


@jit(nogil=True, cache=True)
def _ray_max_tangent(zp, zwin, r, c, step, drow, dcol, nsteps, zmax, floor, stop):
    """Largest (z_k - z_0) / d_k along one ray (-inf if no sample).

    ``zp`` is the DEM with one extra row and column (edge values repeated)
    so that interpolation never reads past the array.  One of ``drow`` and
    ``dcol`` is exactly +-1: the ray advances one whole row (or column) per
    step and the DEM is interpolated linearly along the other axis.
    Marching stops at the DEM's edge, after ``nsteps`` steps, as soon as the
    tangent exceeds ``stop``, or once no terrain (at most ``zmax``) could
    raise the result above ``max(best, floor)``.
    """
    rows, cols = zp.shape[0] - 1, zp.shape[1] - 1
    z0 = zp[r, c]
    along_rows = abs(drow) == 1.0
    # Steps until the ray leaves the DEM, along the whole-pixel axis ...
    if along_rows:
        kmax = r if drow < 0 else rows - 1 - r
        minor0, dminor, nminor = float(c), dcol, cols
    else:
        kmax = c if dcol < 0 else cols - 1 - c
        minor0, dminor, nminor = float(r), drow, rows
    # ... and along the interpolated one.
    if dminor > 0.0:
        kmax = min(kmax, int((nminor - 1 - minor0) / dminor))
    elif dminor < 0.0:
        kmax = min(kmax, int(minor0 / -dminor))
    kmax = min(kmax, nsteps)
    best = -np.inf
    for k0 in range(1, kmax + 1, _SEGMENT):
        k1 = min(k0 + _SEGMENT - 1, kmax)
        beat = max(best, floor)
        if zmax - z0 <= beat * (k0 * step):
            break
        # Skip the segment if even the highest point near it cannot beat the
        # horizon so far: a rise >= 0 is steepest at the nearest sample, a
        # negative one at the farthest.
        mid = 0.5 * (k0 + k1)
        rise = zwin[int(round(r + mid * drow)), int(round(c + mid * dcol))] - z0
        if rise <= beat * ((k0 if rise >= 0.0 else k1) * step):
            continue
        for k in range(k0, k1 + 1):
            d = k * step
            if along_rows:
                rr = r + k * int(drow)
                cf = c + k * dcol
                c0 = int(cf)
                zk = zp[rr, c0] + (cf - c0) * (zp[rr, c0 + 1] - zp[rr, c0])
            else:
                cc = c + k * int(dcol)
                rf = r + k * drow
                r0 = int(rf)
                zk = zp[r0, cc] + (rf - r0) * (zp[r0 + 1, cc] - zp[r0, cc])
            # Compare rises, not tangents, to divide only when the horizon
            # rises; NaN samples compare False and are skipped.
            if zk - z0 > best * d:
                best = (zk - z0) / d
                if best > stop:
                    return best
    return best


@jit(nogil=True, cache=True)
def _horizons_kernel(zp, zwin, steps, drows, dcols, nsteps, zmax, out):
    rows, cols = zp.shape[0] - 1, zp.shape[1] - 1
    for a in range(steps.shape[0]):
        for r in range(rows):
            for c in range(cols):
                if np.isnan(zp[r, c]):
                    out[a, r, c] = np.nan
                    continue
                t = _ray_max_tangent(
                    zp, zwin, r, c, steps[a], drows[a], dcols[a], nsteps[a], zmax,
                    -np.inf, np.inf,
                )
                out[a, r, c] = math.degrees(math.atan(t))


@jit(nogil=True, cache=True)
def _shadow_kernel(zp, zwin, step, drow, dcol, nsteps, zmax, tan_sun, out):
    rows, cols = zp.shape[0] - 1, zp.shape[1] - 1
    for r in range(rows):
        for c in range(cols):
            if np.isnan(zp[r, c]):
                continue
            t = _ray_max_tangent(zp, zwin, r, c, step, drow, dcol, nsteps, zmax, tan_sun, tan_sun)
            out[r, c] = t > tan_sun


def _dem(elevation, dx, dy, max_distance):
    """The DEM padded for the kernels, its window maxima, and its maximum."""
    z = np.asarray(elevation, dtype=np.float64)
    if z.ndim != 2:
        raise ValueError(f"elevation must be a 2-D array, not {z.ndim}-D")
    if not (dx > 0 and dy > 0 and max_distance > 0):
        raise ValueError("dx, dy and max_distance must be positive")
    zmax = float(np.nanmax(z)) if np.isfinite(z).any() else 0.0
    zp = np.pad(z, ((0, 1), (0, 1)), mode="edge")
    return zp, _window_max(z, _RADIUS), zmax


def horizon_angles(elevation, dx, dy, azimuths, max_distance):
    """Horizon elevation angle of every pixel in each of several directions.

    For each pixel and azimuth a ray is marched outward, one row or one
    column per step (whichever the ray crosses faster), interpolating the
    DEM linearly across the other axis; the horizon is the largest
    ``atan((z_k - z_0) / d_k)`` over the samples, d_k the horizontal
    distance.  Angles are *not* floored at zero: a peak or a slope looking
    downhill has a negative horizon, which a tilted surface's sky-view
    factor needs (:func:`dozier_frew_1990_sky_view_factor`).  A direction
    with no sample at all (the ray leaves the array at once) gets -90 deg,
    i.e. nothing obstructs.  Cost: at most pixels x azimuths x
    ``max_distance / min(dx, dy)`` samples; a ray stops early once even the
    highest point of the array could not raise its horizon.

    Parameters
    ----------
    elevation : numpy.ndarray
        2-D DEM, north up, including any halo; NaN for no data [m].
    dx : float
        Pixel size east-west [m].
    dy : float
        Pixel size north-south [m].
    azimuths : array_like
        1-D directions to look in, clockwise from north [deg].
    max_distance : float
        How far to look along each ray [m].

    Returns
    -------
    numpy.ndarray
        float32 array of shape ``(len(azimuths), rows, cols)``: horizon
        elevation angles [deg]; NaN where the DEM is NaN.
    """
    zp, zwin, zmax = _dem(elevation, dx, dy, max_distance)
    az = np.atleast_1d(np.asarray(azimuths, dtype=np.float64))
    steps, drows, dcols = (np.array(v) for v in zip(*(_ray_step(a, dx, dy) for a in az)))
    out = np.empty((az.size,) + zwin.shape, dtype=np.float32)
    nsteps = np.floor(max_distance / steps).astype(np.int64)
    _horizons_kernel(zp, zwin, steps, drows, dcols, nsteps, zmax, out)
    return out


def horizon_at(horizon_angles, azimuths, azimuth):
    """Horizon angle in one direction, interpolated between stored azimuths.

    Linear in azimuth, wrapping round north, so horizons stored once per DEM
    (e.g. every 10 deg) give each scene's sun direction cheaply.

    Parameters
    ----------
    horizon_angles : numpy.ndarray
        Horizon angles of shape ``(n_azimuths, ...)`` [deg].
    azimuths : array_like
        The ``n_azimuths`` directions of ``horizon_angles``, clockwise from
        north, strictly increasing within one turn [deg].
    azimuth : float or numpy.ndarray
        The wanted direction, a scalar or an array shaped like one slice
        ``horizon_angles[0]`` [deg].

    Returns
    -------
    numpy.ndarray
        Horizon angles shaped like ``horizon_angles[0]`` [deg].
    """
    h = np.asarray(horizon_angles)
    az = np.mod(np.asarray(azimuths, dtype=np.float64), 360.0)
    if az.ndim != 1 or az.size != h.shape[0] or np.any(np.diff(az) <= 0):
        raise ValueError("azimuths must be 1-D, strictly increasing and one per horizon slice")
    n = az.size
    if n == 1:
        return h[0].copy()
    t = np.mod(np.asarray(azimuth, dtype=np.float64), 360.0)
    i1 = np.searchsorted(az, t, side="right") % n
    i0 = (i1 - 1) % n
    gap = np.mod(az[i1] - az[i0], 360.0)
    w = np.mod(t - az[i0], 360.0) / gap
    if t.ndim == 0:
        return (1.0 - w) * h[i0] + w * h[i1]
    i0 = np.broadcast_to(i0, h.shape[1:])[None]
    i1 = np.broadcast_to(i1, h.shape[1:])[None]
    h0 = np.take_along_axis(h, i0, axis=0)[0]
    h1 = np.take_along_axis(h, i1, axis=0)[0]
    return (1.0 - w) * h0 + w * h1


def cast_shadow(horizon_in_sun_direction, sun_elevation):
    """Whether terrain hides the sun: horizon above the sun's elevation.

    Parameters
    ----------
    horizon_in_sun_direction : float or array_like
        Horizon elevation angle in the sun's azimuth (see :func:`horizon_at`)
        [deg].
    sun_elevation : float or array_like
        Sun elevation above the horizontal, 90 - zenith [deg].

    Returns
    -------
    bool or array of bool
        True where the pixel lies in a cast shadow [1]; False where the
        horizon is NaN.
    """
    return horizon_in_sun_direction > sun_elevation


def shadow_mask(elevation, dx, dy, sun_azimuth, sun_elevation, max_distance):
    """Cast shadows for one sun position, marching straight toward the sun.

    The same rays as :func:`horizon_angles` in the exact sun direction; a
    ray stops as soon as terrain rises above the sun, or once no terrain in
    the array could.  Pixels whose own slope turns away from the sun
    (self-shading, ``cos_incidence <= 0``) are not marked here.

    Parameters
    ----------
    elevation : numpy.ndarray
        2-D DEM, north up, including any halo; NaN for no data [m].
    dx : float
        Pixel size east-west [m].
    dy : float
        Pixel size north-south [m].
    sun_azimuth : float
        Sun azimuth, clockwise from north [deg].
    sun_elevation : float
        Sun elevation above the horizontal [deg].
    max_distance : float
        How far to look toward the sun [m].

    Returns
    -------
    numpy.ndarray
        Boolean array shaped like ``elevation``: True in cast shadow [1];
        False where the DEM is NaN.
    """
    zp, zwin, zmax = _dem(elevation, dx, dy, max_distance)
    step, drow, dcol = _ray_step(float(sun_azimuth), dx, dy)
    out = np.zeros(zwin.shape, dtype=bool)
    tan_sun = math.tan(math.radians(float(sun_elevation)))
    nsteps = int(max_distance // step)
    _shadow_kernel(zp, zwin, step, drow, dcol, nsteps, zmax, tan_sun, out)
    return out


def dozier_frew_1990_sky_view_factor(horizon_angles, azimuths, slope=0.0, aspect=np.nan):
    """Sky-view factor of a (tilted) pixel from its horizons, Dozier & Frew (1990).

    ``V = 1/(2 pi) int [cos S sin^2 H + sin S cos(phi - A) (H - sin H cos H)] dphi``
    with H the horizon's *zenith* angle in direction phi (Dozier & Frew
    1990, eq. 7 [1], equation number from memory).  It is the share of an
    isotropic sky's diffuse irradiance that the surface receives, relative
    to an unobstructed horizontal one, and ``1 - V`` is the view factor to
    the surrounding terrain.  In each direction the horizon is the higher
    of the terrain's and the pixel's own plane's (``atan(-tan S cos(phi -
    A))``), so that no sky behind the surface counts.  On flat ground this
    is the mean of ``cos^2`` of the horizon elevation.  A tilted facet whose
    horizon is the horizontal gets ``(1 + cos S) / 2``; a pixel inside a
    uniform slope, whose horizon is its own plane, sees the whole sky (1).
    The integral over phi is the periodic trapezoid rule over the stored
    azimuths.

    Parameters
    ----------
    horizon_angles : numpy.ndarray
        Horizon elevation angles of shape ``(n_azimuths, ...)``, may be
        negative (see :func:`horizon_angles`) [deg].
    azimuths : array_like
        The ``n_azimuths`` directions, clockwise from north, strictly
        increasing within one turn [deg].
    slope : float or numpy.ndarray, optional
        Surface slope, 0 = horizontal [deg].
    aspect : float or numpy.ndarray, optional
        Downslope direction, clockwise from north; NaN allowed where
        ``slope == 0`` [deg].

    Returns
    -------
    numpy.ndarray
        Sky-view factor, 0..1, shaped like ``horizon_angles[0]`` [1].
    """
    h = np.asarray(horizon_angles)
    az = np.mod(np.asarray(azimuths, dtype=np.float64), 360.0)
    if az.ndim != 1 or az.size != h.shape[0] or np.any(np.diff(az) <= 0):
        raise ValueError("azimuths must be 1-D, strictly increasing and one per horizon slice")
    # Periodic trapezoid weights: half the gap on either side of each azimuth.
    gaps = np.diff(np.append(az, az[0] + 360.0))
    weights = 0.5 * (gaps + np.roll(gaps, 1))
    s = np.radians(slope)
    sin_s, cos_s, tan_s = np.sin(s), np.cos(s), np.tan(s)
    a = np.radians(np.where(np.asarray(slope) == 0.0, 0.0, aspect))
    total = np.zeros(h.shape[1:])
    weight_sum = 0.0
    for phi, w, h_phi in zip(np.radians(az), weights, h):
        cos_rel = np.cos(phi - a)
        elevation = np.maximum(np.radians(h_phi, dtype=np.float64), -np.arctan(tan_s * cos_rel))
        zen = 0.5 * np.pi - elevation
        sin_z = np.sin(zen)
        total = total + w * (cos_s * sin_z * sin_z + sin_s * cos_rel * (zen - sin_z * np.cos(zen)))
        weight_sum = weight_sum + w
    return total / weight_sum


def halo_pixels(relief, resolution, min_sun_elevation=5.0, max_pixels=1000):
    """How many pixels of halo a chunk needs for horizons and shadows.

    Terrain at most ``relief`` metres above a pixel shades it from a sun at
    elevation e only within ``relief / tan(e)`` metres, so with this halo
    every cast shadow of a sun at least ``min_sun_elevation`` high is found
    (closed-form geometry).  A horizon beyond that distance is lower than
    ``min_sun_elevation``; missing it changes a flat pixel's sky-view factor
    by at most ``sin^2(min_sun_elevation)`` (0.008 for 5 deg).  The result
    is capped at ``max_pixels`` (low sun over high relief would otherwise ask
    for tens of kilometres) and is at least 1, the 3 x 3 window of the
    slope and aspect.

    Parameters
    ----------
    relief : float
        Elevation range of the DEM, ``max - min`` [m].
    resolution : float
        Pixel size; use the smaller of dx and dy [m].
    min_sun_elevation : float, optional
        Lowest sun elevation whose shadows must be complete [deg].
    max_pixels : int, optional
        Upper limit of the halo [1].

    Returns
    -------
    int
        Halo width [1] (pixels); pass ``halo * resolution`` as
        ``max_distance`` to :func:`horizon_angles` / :func:`shadow_mask`.
    """
    if not (resolution > 0 and 0.0 < min_sun_elevation < 90.0):
        raise ValueError("resolution must be positive and min_sun_elevation in (0, 90) deg")
    reach = max(float(relief), 0.0) / math.tan(math.radians(min_sun_elevation)) / resolution
    return int(min(max(math.ceil(reach), 1), max_pixels))
