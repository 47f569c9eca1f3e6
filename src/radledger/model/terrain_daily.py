"""A day's clear-sky ratio slope / flat for many pixels at once: the day kernel's fast path.

The model is :func:`radledger.physics.clear_sky_slope_ratio_daily` (ASCE-EWRI 2005 App. D beam
and diffuse indices, the day swept in hour angle with the same midpoint steps, isotropic diffuse
times the sky-view factor V, ``albedo (1 - V)`` reflected), evaluated so that its cost per pixel
no longer grows with the number of time steps; tests/test_terrain_kernels.py checks that the two
agree within 0.1 %.

* The pixels of one call share one latitude (callers group them), so the sun's path, and the
  steps, are the same for all.
* The indices K_B and K_D depend on a pixel only through its pressure P and precipitable water W,
  and ln K_B is linear in P and in W^c (c = 0.4, eq. D.2).  They are evaluated (by the physics
  function) at every step on a lattice of nodes 1 kPa apart in P and 0.05 apart in W^c, with the
  day's flat-ground sums and running sums of K_B times the sun's direction at each node; a pixel
  takes the bilinear interpolation of its four nodes (error below 3e-5 of K_B for a sun 6 deg
  high, less for a higher one).
* A plane sees the sun where ``n . s(omega) = A + B cos(omega) + C sin(omega) > 0``, one arc of hour
  angle found in closed form, so its beam is the difference of two running sums (at most two
  pieces).  With horizons (``shading``) the steps where the sun stands above the pixel's highest
  horizon are lit for sure (one interval around noon, again running sums); only the remaining
  steps of the arc are tested against the horizon toward the sun, interpolated between the stored
  azimuths as :func:`radledger.physics.horizon_at` does.
"""

from __future__ import annotations

import math

import numpy as np

from .. import physics as ph
from ..physics._jit import jit
from ..physics.shortwave import BEAM_DIFFUSE_COEFFICIENTS

__all__ = ["clear_sky_slope_ratio_fast", "PRESSURE_STEP", "WATER_POWER_STEP"]

PRESSURE_STEP = 1.0          # kPa: lattice of the clear-sky indices
WATER_POWER_STEP = 0.05      # in W^c, W in mm
_MINUTES_PER_RADIAN = 1440.0 / (2.0 * math.pi)


@jit(nogil=True, cache=True)
def _arc(a, b, c, omega0, delta, n, k):
    """Steps j0..j1 (inclusive; j0 > j1 if none) where A + B cos(w) + C sin(w) > 0, w_j = omega0 + j delta,
    within the k-th turn (-1, 0, 1) of the positive arc."""
    r = math.hypot(b, c)
    if r == 0.0 or -a / r <= -1.0:      # positive everywhere (or, with r = 0 and a <= 0, nowhere)
        if k == 0 and (a > 0.0 or r > 0.0):
            return 0, n - 1
        return 0, -1
    if -a / r >= 1.0:
        return 0, -1
    psi = math.atan2(c, b)
    theta = math.acos(-a / r)
    lo = psi - theta + 2.0 * math.pi * k
    hi = psi + theta + 2.0 * math.pi * k
    return max(0, int(math.floor((lo - omega0) / delta)) + 1), min(n - 1, int(math.ceil((hi - omega0) / delta)) - 1)


@jit(nogil=True, cache=True)
def _beam_sums(normals, cells, sums, k_beam, sun, steps, horizons, lit_from, shading, geometry, out):
    """Sum over the day of K_B max(n . s, 0) (times lit) per pixel, in the units of the node sums.

    ``horizons``: (pixels, stored azimuths); ``steps[j]``: the columns of the two stored azimuths
    around the sun (-1: not stored, no shadow), the weight of the second, the sun's elevation.
    """
    a_coef, b_coef, c_coef, omega0, delta = geometry
    n = steps.shape[0]
    n_az = horizons.shape[1]
    for p in range(normals.shape[1]):
        ne, nn, nu = normals[0, p], normals[1, p], normals[2, p]
        if ne != ne or nn != nn or nu != nu:
            out[p] = np.nan
            continue
        ip, iw = int(cells[0, p]), int(cells[1, p])
        fp, fw = cells[2, p], cells[3, p]
        weights = ((1.0 - fp) * (1.0 - fw), (1.0 - fp) * fw, fp * (1.0 - fw), fp * fw)
        nodes = ((ip, iw), (ip, iw + 1), (ip + 1, iw), (ip + 1, iw + 1))
        # steps with the sun above every horizon of the pixel: [first, n - 1 - first]
        first = 0
        if shading:
            top = -90.0
            for k in range(n_az):
                h = horizons[p, k]
                if not h <= top:       # NaN: no step is surely lit
                    top = h if h == h else 90.0
            first = lit_from[min(int(math.floor(min(top, 90.0) * 10.0)) + 901, lit_from.size - 1)]
        last = n - 1 - first
        a = a_coef[0] * nn + a_coef[1] * nu
        b = b_coef[0] * nu + b_coef[1] * nn
        c = c_coef * ne
        total = 0.0
        for turn in (-1, 0, 1):
            j0, j1 = _arc(a, b, c, omega0, delta, n, turn)
            if j0 > j1:
                continue
            s0, s1 = max(j0, first), min(j1, last)
            if s0 <= s1:
                for q in range(4):
                    x, y = nodes[q]
                    total += weights[q] * (ne * (sums[x, y, 0, s1 + 1] - sums[x, y, 0, s0])
                                           + nn * (sums[x, y, 1, s1 + 1] - sums[x, y, 1, s0])
                                           + nu * (sums[x, y, 2, s1 + 1] - sums[x, y, 2, s0]))
            if not shading:
                continue
            for j in range(j0, j1 + 1):
                if s0 <= j <= s1:
                    continue
                i0, i1 = int(steps[j, 0]), int(steps[j, 1])
                w = steps[j, 2]
                horizon = -90.0
                if i0 >= 0 and i1 >= 0:
                    horizon = (1.0 - w) * horizons[p, i0] + w * horizons[p, i1]
                if steps[j, 3] > horizon:
                    dot = ne * sun[j, 0] + nn * sun[j, 1] + nu * sun[j, 2]
                    if dot > 0.0:
                        kb = (weights[0] * k_beam[ip, iw, j] + weights[1] * k_beam[ip, iw + 1, j]
                              + weights[2] * k_beam[ip + 1, iw, j] + weights[3] * k_beam[ip + 1, iw + 1, j])
                        total += kb * dot
        out[p] = total


def _nodes(values: np.ndarray, step: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Lattice nodes (every ``step``, at least two) covering ``values``; each value's cell and fraction."""
    lo = math.floor(float(np.min(values)) / step)
    hi = max(math.ceil(float(np.max(values)) / step), lo + 1)
    nodes = np.arange(lo, hi + 1) * step
    t = values / step - lo
    cell = np.minimum(np.floor(t), hi - lo - 1)
    return nodes, cell, t - cell


def clear_sky_slope_ratio_fast(latitude: float, day_of_year: int, slope, aspect, pressure, water,
                               sky_view_factor, albedo, horizons=None, slots=None, *,
                               coefficients="asce-ewri-2005", step_minutes=5.0) -> np.ndarray:
    """Daily clear-sky ratio slope / flat [1] of 1-D pixel arrays sharing one ``latitude`` [deg].

    Same model and result as :func:`radledger.physics.clear_sky_slope_ratio_daily` (see its
    docstring): ``slope``, ``aspect`` [deg], ``pressure`` [kPa], ``water`` (precipitable water)
    [mm], ``sky_view_factor``, ``albedo`` [1].  Horizons [deg] come as ``horizons`` of shape
    ``(pixels, m)`` with ``slots``: for each of N azimuths evenly spaced from north (``360 / N``
    apart), its column in ``horizons`` or -1 where it was not read (the sun never stands there
    that day).  NaN where an input is.
    """
    slope, aspect, pressure, water, svf, albedo = (a.ravel() for a in np.broadcast_arrays(
        *(np.asarray(v, dtype=np.float64) for v in (slope, aspect, pressure, water, sky_view_factor, albedo))))
    declination = float(ph.solar_declination(day_of_year))
    omega_s = float(ph.sunset_hour_angle(latitude, declination))
    ok = (np.isfinite(slope) & np.isfinite(pressure) & np.isfinite(water) & (water >= 0) & np.isfinite(svf)
          & np.isfinite(albedo))
    if omega_s <= 0.0 or not ok.any():       # polar night: no sun on flat ground, ratio 1
        return np.where(ok, 1.0, np.nan)
    n = max(1, math.ceil(2.0 * omega_s * _MINUTES_PER_RADIAN / step_minutes))
    delta = 2.0 * omega_s / n
    omega = -omega_s + delta * (np.arange(n) + 0.5)
    phi = math.radians(latitude)
    sin_p, cos_p, sin_d, cos_d = math.sin(phi), math.cos(phi), math.sin(declination), math.cos(declination)
    up = sin_p * sin_d + cos_p * cos_d * np.cos(omega)           # FAO-56 Annex 3 eq. 3-15
    east = -cos_d * np.sin(omega)
    north = cos_p * sin_d - sin_p * cos_d * np.cos(omega)
    # K_B, K_D at every step on the (P, W^c) lattice, from the physics; their sums over the day
    c = BEAM_DIFFUSE_COEFFICIENTS[coefficients]["c"]
    p_nodes, p_cell, p_frac = _nodes(np.where(ok, pressure, np.nanmin(pressure[ok])), PRESSURE_STEP)
    powered = np.where(ok, water, np.nanmin(water[ok])) ** c
    w_nodes, w_cell, w_frac = _nodes(powered, WATER_POWER_STEP)
    k_beam, k_diffuse = ph.clear_sky_beam_diffuse_indices(
        up[None, None, :], p_nodes[:, None, None], (w_nodes ** (1.0 / c))[None, :, None], coefficients=coefficients)
    k_beam, k_diffuse = (np.ascontiguousarray(np.broadcast_to(k, (p_nodes.size, w_nodes.size, n)), dtype=np.float64)
                         for k in (k_beam, k_diffuse))
    sums = np.zeros((p_nodes.size, w_nodes.size, 3, n + 1))
    for k, v in enumerate((east, north, up)):
        sums[:, :, k, 1:] = np.cumsum(k_beam * v, axis=2)
    cells = np.stack([p_cell, w_cell, p_frac, w_frac])
    ip, iw = p_cell.astype(np.int64), w_cell.astype(np.int64)

    def at_pixels(node_values):   # bilinear in the pixel's cell
        v = node_values
        return ((1 - p_frac) * ((1 - w_frac) * v[ip, iw] + w_frac * v[ip, iw + 1])
                + p_frac * ((1 - w_frac) * v[ip + 1, iw] + w_frac * v[ip + 1, iw + 1]))

    flat_beam, flat_diffuse = at_pixels((k_beam * up).sum(axis=2)), at_pixels((k_diffuse * up).sum(axis=2))
    # the sun at each step: azimuth -> stored horizons and weight, elevation
    elevation = np.degrees(np.arcsin(np.clip(up, -1.0, 1.0)))
    shading = horizons is not None
    if shading:
        horizons = np.ascontiguousarray(horizons, dtype=np.float32).reshape(slope.size, -1)
        slots = np.asarray(slots, dtype=np.int64)
        t = np.mod(np.degrees(np.arctan2(east, north)), 360.0) / (360.0 / slots.size)
        i0 = np.floor(t).astype(np.int64) % slots.size
        steps = np.stack([slots[i0], slots[(i0 + 1) % slots.size], t - np.floor(t), elevation], axis=1)
    else:
        horizons = np.zeros((1, 1), np.float32)
        steps = np.zeros((n, 4))
    # the first step whose sun stands above a horizon h, tabulated every 0.1 deg of h
    half = elevation[: (n + 1) // 2]
    lit_from = np.searchsorted(half, np.arange(-900, 902) / 10.0, side="right").astype(np.int64)
    lit_from = np.where(lit_from >= half.size, n, lit_from)
    s = np.radians(slope)
    a = np.radians(np.where(slope == 0.0, 0.0, aspect))
    normals = np.ascontiguousarray(np.stack([np.sin(s) * np.sin(a), np.sin(s) * np.cos(a), np.cos(s)]))
    # n . s = A + B cos(w) + C sin(w): A, B from (n_north, n_up), C from n_east
    geometry = (np.array([sin_d * cos_p, sin_d * sin_p]), np.array([cos_d * cos_p, -cos_d * sin_p]), -cos_d,
                float(omega[0]), delta)
    beam = np.empty(slope.size)
    _beam_sums(normals, np.ascontiguousarray(cells), sums, k_beam, np.stack([east, north, up], axis=1), steps,
               horizons, lit_from, shading, geometry, beam)
    flat = flat_beam + flat_diffuse
    ratio = np.divide(beam + svf * flat_diffuse + albedo * (1.0 - svf) * flat, flat,
                      out=np.ones_like(flat), where=flat > 0.0)
    return np.where(ok & ~np.isnan(beam), ratio, np.nan)
