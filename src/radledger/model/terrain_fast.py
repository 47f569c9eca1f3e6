"""The shortwave on each pixel's slope in one compiled pass: the fused loop's terrain twin.

The same model as :func:`radledger.model.terrain.scene_incident_shortwave` (the NumPy reference;
tests/test_terrain_kernels.py checks that the two agree): the Erbs, Klein & Duffie (1982) split of
the given shortwave, the beam on the tilted pixel by its angle of incidence, no beam in a cast
shadow (the horizon toward the sun, linear between the stored azimuths, above the sun), isotropic
diffuse times the sky-view factor V, and ``albedo R_s (1 - V)`` from the terrain in view.

The sun comes as its direction (east, north, up), azimuth and elevation on the lattice of
:mod:`radledger.model.sun` (NREL SPA every 16 pixels) and is interpolated bilinearly inside the
loop, so no full-size sun arrays are made.  ``nogil`` so Dask's threads run chunks side by side.
"""

from __future__ import annotations

import math

import numpy as np

from ..physics._jit import jit

from ..grid import Lattice
from .terrain_layers import HORIZON_AZIMUTHS, horizon_name

__all__ = ["incident_shortwave_fast"]

_COS_MAX_ZENITH = math.cos(math.radians(87.0))   # no beam beyond 87 deg of zenith (as erbs_1982)
_MIN_COS_ZENITH = 0.065                          # lower limit of cos z in the clearness index (erbs_1982)
_RAD = np.float32(math.pi / 180.0)


@jit(nogil=True, cache=True)
def _incident_loop(rs, albedo, slope, aspect, svf, lattice, rows, cols, g_on, horizons, slot, shading, out):
    h, w = out.shape
    n_az = slot.size
    step = 360.0 / n_az
    nr, nc = rows.size, cols.size
    planes = 6 if shading else 3
    jc = np.empty(w, np.int64)
    fc = np.empty(w)
    j = 0
    for c in range(w):
        while j < nc - 2 and cols[j + 1] <= c:
            j += 1
        jc[c] = j
        fc[c] = (c - cols[j]) / (cols[j + 1] - cols[j])
    line = np.empty((6, nc))          # the lattice interpolated to the current row
    i = 0
    for r in range(h):
        while i < nr - 2 and rows[i + 1] <= r:
            i += 1
        fr = (r - rows[i]) / (rows[i + 1] - rows[i])
        for k in range(planes):
            for q in range(nc):
                line[k, q] = (1.0 - fr) * lattice[k, i, q] + fr * lattice[k, i + 1, q]
        for c in range(w):
            j, f = jc[c], fc[c]
            east = line[0, j] + f * (line[0, j + 1] - line[0, j])
            north = line[1, j] + f * (line[1, j + 1] - line[1, j])
            up = line[2, j] + f * (line[2, j + 1] - line[2, j])
            s = np.float64(rs[r, c])
            # Erbs et al. (1982): clearness index, diffuse fraction, beam normal
            beam = 0.0
            diffuse = s
            if up >= _COS_MAX_ZENITH and s >= 0.0:
                kt = s / (g_on * max(up, _MIN_COS_ZENITH))
                kt = min(max(kt, 0.0), 1.0)
                if kt <= 0.22:
                    frac = 1.0 - 0.09 * kt
                elif kt <= 0.8:
                    frac = 0.9511 + kt * (-0.1604 + kt * (4.388 + kt * (-16.638 + kt * 12.336)))
                else:
                    frac = 0.165
                d = frac * s
                b = (s - d) / up
                if b >= 0.0:
                    beam, diffuse = b, d
            elif s != s:
                beam = s
            sl = slope[r, c]
            if sl == 0.0:
                cos_i = up
            else:   # float32 trigonometry: 1e-7 of a unit vector
                sr = sl * _RAD
                ar = aspect[r, c] * _RAD
                ss = math.sin(sr)
                cos_i = ss * (math.sin(ar) * east + math.cos(ar) * north) + math.cos(sr) * up
            if sl != sl:
                cos_i = np.float64(sl)
            direct = beam * max(cos_i, 0.0) if cos_i == cos_i else cos_i
            if shading and direct > 0.0:
                # azimuth and elevation interpolated from the lattice like the sun's direction
                t = line[4, j] + f * (line[4, j + 1] - line[4, j])      # unwrapped: within -180..540
                t = (t + 360.0 if t < 0.0 else t - 360.0 if t >= 360.0 else t) / step
                k0 = int(t)
                wt = t - k0
                s0, s1 = slot[k0 % n_az], slot[(k0 + 1) % n_az]
                if s0 >= 0 and s1 >= 0:
                    horizon = (1.0 - wt) * horizons[s0, r, c] + wt * horizons[s1, r, c]
                    if horizon > line[5, j] + f * (line[5, j + 1] - line[5, j]):
                        direct = 0.0
            v = np.float64(svf[r, c])
            out[r, c] = direct + diffuse * v + np.float64(albedo[r, c]) * s * (1.0 - v)


def incident_shortwave_fast(arrays: dict[str, np.ndarray], method: str) -> np.ndarray:
    """Shortwave on each pixel's slope [W m-2] (float32, the chunk's shape).

    ``arrays``: the chunk's ``shortwave_down``, ``albedo``, the static terrain layers and the
    ``sun_lattice`` (and ``horizon_AAA`` near the sun's azimuth) a scene's terrain source reads.
    Out-of-range inputs are the caller's business (the fused loop masks them).
    """
    rs = arrays["shortwave_down"]
    h, w = rs.shape
    points = Lattice.of_shape((h, w))
    rows, cols = points.rows, points.cols
    lattice = arrays["sun_lattice"]
    if rows.size == 1:           # a chunk one pixel high or wide: repeat the lattice line
        rows, lattice = np.array([0, 1]), np.concatenate([lattice, lattice], axis=1)
    if cols.size == 1:
        cols, lattice = np.array([0, 1]), np.concatenate([lattice, lattice], axis=2)
    slot = np.full(len(HORIZON_AZIMUTHS), -1, np.int64)
    stack = []
    if method == "shading":
        for k, a in enumerate(HORIZON_AZIMUTHS):
            if horizon_name(a) in arrays:
                slot[k] = len(stack)
                stack.append(arrays[horizon_name(a)])
    horizons = np.stack(stack) if stack else np.zeros((1, 1, 1), np.float32)
    out = np.empty((h, w), np.float32)
    f32 = lambda name: np.ascontiguousarray(arrays[name], dtype=np.float32)  # noqa: E731
    _incident_loop(f32("shortwave_down"), f32("albedo"), f32("slope"), f32("aspect"), f32("sky_view_factor"),
                   np.ascontiguousarray(lattice, dtype=np.float64), rows.astype(np.float64),
                   cols.astype(np.float64), float(lattice[3, 0, 0]), horizons, slot, method == "shading", out)
    return out
