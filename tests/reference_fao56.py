"""FAO-56 daily net radiation written out from the standard, independently of radledger's physics.

Allen, Pereira, Raes & Smith (1998), FAO Irrigation and Drainage Paper 56, chapter 3: eqs. 21-25
(extraterrestrial radiation), 37 (clear-sky shortwave), 38 (net shortwave), 39 (net longwave) and
40 (net radiation), with sigma = 4.903e-9 MJ K-4 m-2 day-1 and Gsc = 0.0820 MJ m-2 min-1.
Rs/Rso is held within 0.3..1.0 as ASCE-EWRI (2005) does for its cloudiness function (from memory).
Temperatures in K, vapour pressure in kPa, latitude in degrees, elevation in metres.
"""

from __future__ import annotations

import numpy as np

SIGMA_DAY = 4.903e-9
GSC = 0.0820


def extraterrestrial_daily(lat_deg, doy):
    phi = np.radians(lat_deg)
    dr = 1 + 0.033 * np.cos(2 * np.pi / 365 * doy)                      # eq. 23
    delta = 0.409 * np.sin(2 * np.pi / 365 * doy - 1.39)                 # eq. 24
    ws = np.arccos(np.clip(-np.tan(phi) * np.tan(delta), -1, 1))         # eq. 25
    return 24 * 60 / np.pi * GSC * dr * (ws * np.sin(phi) * np.sin(delta)
                                         + np.cos(phi) * np.cos(delta) * np.sin(ws))   # eq. 21


def daily_net_radiation(rs, tmax_k, tmin_k, ea, lat_deg, doy, z, albedo=0.23):
    ra = extraterrestrial_daily(lat_deg, doy)
    rso = (0.75 + 2e-5 * z) * ra                                          # eq. 37
    rns = (1 - albedo) * rs                                               # eq. 38
    ratio = np.clip(rs / rso, 0.3, 1.0)
    rnl = SIGMA_DAY * (tmax_k ** 4 + tmin_k ** 4) / 2 * (0.34 - 0.14 * np.sqrt(ea)) * (1.35 * ratio - 0.35)  # eq. 39
    return rns - rnl                                                      # eq. 40
