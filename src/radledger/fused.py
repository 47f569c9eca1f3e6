"""A fused per-pixel loop for the common scene case (Numba).

The NumPy kernel in :mod:`radledger.kernels` makes about a dozen full-size
temporaries per chunk and runs the ``(e/T)**(1/7)`` power through NumPy's
generic pow; this loop reads each input once, keeps everything in registers
and writes the products directly (benchmarks/bench_kernel.py measures both).
It covers the configuration most runs use: Brutsaert sky emissivity, no
cloud correction, shortwave given, humidity as vapour pressure, emissivity
from a table or a constant, products among net radiation / shortwave /
longwave / quality.  Everything else goes through the NumPy kernel, which is
the reference: tests/test_fused.py checks that the two agree.

``nogil=True`` so Dask's threads run chunks truly in parallel; no
``parallel=True`` (Dask already uses every core).  ``cache=True`` keeps the
compiled code between runs (in ``__pycache__``).
"""

from __future__ import annotations

import numpy as np

from .kernels import PHYSICAL_RANGES
from .physics.constants import STEFAN_BOLTZMANN
from .products import QUALITY_BITS

__all__ = ["fused_applies", "fused_scene", "FUSED_PRODUCTS"]

FUSED_PRODUCTS = ("net_radiation", "net_shortwave", "net_longwave", "quality")

try:  # Numba is a dependency, but keep the NumPy path working without it
    import numba
except ImportError:  # pragma: no cover
    numba = None


def fused_applies(params, layers) -> bool:
    """True when the fused loop computes exactly what the NumPy kernel would."""
    return (numba is not None and params.sky_model == "brutsaert" and params.clouds == "none"
            and "shortwave_down" in layers and "vapour_pressure" in layers
            and set(params.products) <= set(FUSED_PRODUCTS))


_R = PHYSICAL_RANGES
_MISSING = QUALITY_BITS["input_missing"]
_RANGE = QUALITY_BITS["out_of_range"]
# 1.24 (e_hPa / T)^(1/7) with e in kPa: 1.24 * 10^(1/7) (e_kPa / T)^(1/7)  (Brutsaert 1975, eq. 11)
_BRUTSAERT = 1.24 * 10.0 ** (1.0 / 7.0)


def _loop(albedo, ts, ta, ea, rs, eps_s, rn, rns, rnl, q,
          a_lo, a_hi, t_lo, t_hi, ta_lo, ta_hi, e_lo, e_hi, r_lo, r_hi, sigma, k):
    n = albedo.size
    nan = np.float32(np.nan)
    for i in range(n):
        a = albedo[i]
        t = ts[i]
        tair = ta[i]
        e = ea[i]
        s = rs[i]
        em = eps_s[i]
        flag = 0
        if a != a or t != t or tair != tair or e != e or s != s or em != em:
            flag |= _MISSING
        bad = False
        if a < a_lo or a > a_hi:
            bad = True
            a = nan
        if t < t_lo or t > t_hi:
            bad = True
            t = nan
        if tair < ta_lo or tair > ta_hi:
            bad = True
            tair = nan
        if e < e_lo or e > e_hi:
            bad = True
            e = nan
        if s < r_lo or s > r_hi:
            bad = True
            s = nan
        if bad:
            flag |= _RANGE
        net_sw = (1.0 - a) * s
        t2 = t * t
        ta2 = tair * tair
        eps_sky = k * (e / tair) ** (1.0 / 7.0)
        net_lw = em * sigma * (t2 * t2 - eps_sky * ta2 * ta2)
        rn[i] = net_sw - net_lw
        rns[i] = net_sw
        rnl[i] = net_lw
        q[i] = flag


if numba is not None:
    _loop_jit = numba.njit(nogil=True, cache=True, fastmath=False, error_model="numpy")(_loop)
else:  # pragma: no cover
    _loop_jit = None


def fused_scene(arrays: dict[str, np.ndarray], eps_s: np.ndarray, params) -> dict[str, np.ndarray]:
    """The fused products of one chunk (see :func:`fused_applies`)."""
    shape = arrays["albedo"].shape
    flat = {k: np.ascontiguousarray(arrays[k], dtype=np.float32).ravel()
            for k in ("albedo", "surface_temperature", "air_temperature", "vapour_pressure", "shortwave_down")}
    eps = np.ascontiguousarray(np.broadcast_to(eps_s, shape), dtype=np.float32).ravel()
    n = flat["albedo"].size
    rn = np.empty(n, np.float32)
    rns = np.empty(n, np.float32)
    rnl = np.empty(n, np.float32)
    q = np.empty(n, np.uint8)
    _loop_jit(flat["albedo"], flat["surface_temperature"], flat["air_temperature"], flat["vapour_pressure"],
              flat["shortwave_down"], eps, rn, rns, rnl, q,
              *_R["albedo"], *_R["surface_temperature"], *_R["air_temperature"], *_R["vapour_pressure"],
              *_R["shortwave_down"], STEFAN_BOLTZMANN, _BRUTSAERT)
    return {"net_radiation": rn.reshape(shape), "net_shortwave": rns.reshape(shape),
            "net_longwave": rnl.reshape(shape), "quality": q.reshape(shape)}
