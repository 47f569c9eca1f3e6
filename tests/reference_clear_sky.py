"""An independent instantaneous clear-sky shortwave for the map-versus-point tests.

Written here from the published equations, not with radledger's functions:
the sun's position and the Earth-Sun distance from NREL SPA as pvlib
implements it (Reda & Andreas 2004; ``pvlib.solarposition``), and the
ASCE-EWRI (2005) Appendix D / FAO-56 Annex 3 clear-sky model:

* P = 101.3 ((293 - 0.0065 z) / 293)^5.26                       FAO-56 eq. 7
* W = 0.14 e_a P + 2.1                                          ASCE-EWRI eq. D.3
* K_B = 0.98 exp(-0.00146 P / (K_t sin b) - 0.075 (W / sin b)^0.4)   ASCE-EWRI eq. D.2
* K_D = 0.35 - 0.36 K_B (K_B >= 0.15), 0.18 + 0.82 K_B otherwise     ASCE-EWRI eq. D.4
* R_so = (K_B + K_D) R_a, R_a = G_sc / r^2 sin b, G_sc = 0.0820 MJ m-2 min-1 = 1366.7 W m-2
  (FAO-56 eq. 28's constant), sin b floored at 0.01 inside K_B (common practice, as in RefET)

(coefficients as quoted by the open-source RefET package, from memory of ASCE-EWRI 2005)
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from pvlib import solarposition

G_SC = 0.0820 * 1e6 / 60.0


def spa_sun(lat, lon, time):
    """(cos zenith, Earth-Sun distance [AU]) from pvlib's NREL SPA, geometric zenith."""
    lat, lon = np.broadcast_arrays(np.asarray(lat, float), np.asarray(lon, float))
    ts = pd.DatetimeIndex([pd.Timestamp(time).tz_convert("UTC") if pd.Timestamp(time).tzinfo
                           else pd.Timestamp(time, tz="UTC")])
    cosz = np.empty(lat.shape)
    flat_lat, flat_lon, out = lat.ravel(), lon.ravel(), cosz.ravel()
    # SPA per point (pvlib takes one site per call); subsample the identical-time grid by rows
    for i in range(flat_lat.size):
        sp = solarposition.get_solarposition(ts, flat_lat[i], flat_lon[i], method="nrel_numpy")
        out[i] = np.cos(np.radians(sp["zenith"].values[0]))
    r = float(solarposition.nrel_earthsun_distance(ts).values[0])
    return cosz, r


def appendix_d(cos_zenith, r, elevation, vapour_pressure, turbidity=1.0):
    """ASCE-EWRI (2005) App. D clear-sky shortwave [W m-2] at an instant."""
    p = 101.3 * ((293.0 - 0.0065 * elevation) / 293.0) ** 5.26
    w = 0.14 * vapour_pressure * p + 2.1
    sin_b = np.maximum(cos_zenith, 0.01)
    kb = 0.98 * np.exp(-0.00146 * p / (turbidity * sin_b) - 0.075 * (w / sin_b) ** 0.4)
    kd = np.where(kb >= 0.15, 0.35 - 0.36 * kb, 0.18 + 0.82 * kb)
    ra = G_SC / r ** 2 * np.maximum(cos_zenith, 0.0)
    return np.where(cos_zenith > 0, (kb + kd) * ra, 0.0)
