"""A fused per-pixel loop for the common scene case (Numba).

The NumPy kernel in :mod:`radledger.model.kernels` makes about a dozen full-size
temporaries per chunk and runs the ``(e/T)**(1/7)`` power through NumPy's
generic pow; this loop reads each input once, keeps everything in registers
and writes the products directly (benchmarks/bench_kernel.py measures both).
It covers the configuration most runs use (model/needs.py decides where it
applies, in one place): Brutsaert sky emissivity, no cloud correction,
shortwave given, humidity as vapour pressure, emissivity from a table or a
constant, products among net radiation / shortwave / longwave / quality /
incident shortwave, on level ground or on terrain (the shortwave on each
slope from model/terrain_fast.py, the sky-view factor in the longwave).
Everything else goes through the NumPy kernel, which is the reference:
tests/test_fused.py checks that the two agree, product by product and bit by
bit.

``nogil=True`` so Dask's threads run chunks truly in parallel; no
``parallel=True`` (Dask already uses every core).  ``cache=True`` keeps the
compiled code between runs (in ``__pycache__``).
"""

from __future__ import annotations

import threading

from ..physics._jit import jit
import numpy as np

from ..physics.constants import STEFAN_BOLTZMANN
from .layers import PHYSICAL_RANGES
from .products import SCENE_QUALITY_BITS as QUALITY_BITS
from .surface import chunk_emissivity
from .terrain_fast import incident_shortwave_fast

__all__ = ["fused_scene", "FUSED_INPUTS"]

_R = PHYSICAL_RANGES
_MISSING = QUALITY_BITS["input_missing"]
_RANGE = QUALITY_BITS["out_of_range"]
_DEFAULT = QUALITY_BITS["emissivity_default"]
# 1.24 (e_hPa / T)^(1/7) with e in kPa: 1.24 * 10^(1/7) (e_kPa / T)^(1/7)  (Brutsaert 1975, eq. 11)
_BRUTSAERT = 1.24 * 10.0 ** (1.0 / 7.0)


#: the inputs of the loop, in the order of its ``inputs`` tuple and ``limits`` rows
FUSED_INPUTS = ("albedo", "surface_temperature", "air_temperature", "vapour_pressure", "shortwave_down")
_LIMITS = np.array([_R[name] for name in FUSED_INPUTS], dtype=np.float32)


def _loop(inputs, classes, lut, unknown_value, outputs, limits, sigma, k, terrain, with_terrain):
    """One pass over a chunk; returns the number of pixels whose class the table lacks.

    ``inputs``: flat float32 arrays in :data:`FUSED_INPUTS` order; ``limits``:
    their (low, high) physical ranges; ``outputs``: net radiation, net
    shortwave, net longwave, incident shortwave (float32) and quality (uint8).
    ``terrain`` (used ``with_terrain``): the shortwave on each slope, the slope
    (for its gaps) and the sky-view factor V; the downwelling longwave is then
    ``V L_sky + (1 - V) eps sigma Ts^4`` (model/terrain.py).

    float32 arithmetic throughout (inputs are float32; the products are written
    as float32): the error against the float64 NumPy kernel stays below
    1e-3 W m-2 (tests/test_fused.py) and the 1/7 power is about twice as fast.
    Range checks are selects, not branches (a NaN fails every comparison, so
    it is both "missing" and kept NaN without a test of its own).
    """
    albedo, ts, ta, ea, rs = inputs
    rn, rns, rnl, inc, q = outputs
    incident, slope, svf = terrain
    n = albedo.size
    nan = np.float32(np.nan)
    one = np.float32(1.0)
    seventh = np.float32(1.0 / 7.0)
    sig = np.float32(sigma)
    kk = np.float32(k)
    alo, ahi, tlo, thi = limits[0, 0], limits[0, 1], limits[1, 0], limits[1, 1]
    talo, tahi, elo, ehi = limits[2, 0], limits[2, 1], limits[3, 0], limits[3, 1]
    rlo, rhi = limits[4, 0], limits[4, 1]
    nlut = lut.size
    unknown = 0
    for i in range(n):
        a = albedo[i]
        t = ts[i]
        tair = ta[i]
        e = ea[i]
        s = rs[i]
        c = classes[i]
        missing = (a != a) | (t != t) | (tair != tair) | (e != e) | (s != s) | (c != c)
        ok_a = (a >= alo) & (a <= ahi)
        ok_t = (t >= tlo) & (t <= thi)
        ok_ta = (tair >= talo) & (tair <= tahi)
        ok_e = (e >= elo) & (e <= ehi)
        ok_s = (s >= rlo) & (s <= rhi)
        # out of range: present (not NaN) but failing its check
        bad = (((a == a) & ~ok_a) | ((t == t) & ~ok_t) | ((tair == tair) & ~ok_ta)
               | ((e == e) & ~ok_e) | ((s == s) & ~ok_s))
        a = a if ok_a else nan
        t = t if ok_t else nan
        tair = tair if ok_ta else nan
        e = e if ok_e else nan
        s = s if ok_s else nan
        v = one
        s_in = s
        if with_terrain:
            v = svf[i]
            missing = missing | (slope[i] != slope[i]) | (v != v)
            s_in = incident[i] if (ok_s & ok_a) else nan
        flag = (_MISSING if missing else 0) | (_RANGE if bad else 0)
        em = nan
        if c == c:
            ci = int(c)
            if 0 <= ci < nlut:
                em = lut[ci]
            if em != em:
                unknown += 1
                em = unknown_value
                flag |= _DEFAULT
        net_sw = (one - a) * s_in
        t2 = t * t
        ta2 = tair * tair
        sky = kk * (e / tair) ** seventh * (ta2 * ta2)
        if with_terrain:   # sky in view, the rest terrain at the pixel's own Ts and emissivity
            sky = v * sky + (one - v) * em * (t2 * t2)
        net_lw = em * sig * (t2 * t2 - sky)
        rn[i] = net_sw - net_lw
        rns[i] = net_sw
        rnl[i] = net_lw
        inc[i] = s_in
        q[i] = flag
    return unknown


_loop_jit = jit(nogil=True, cache=True, error_model="numpy")(_loop)


_local = threading.local()


def _fresh(n: int):
    return (np.empty(n, np.float32), np.empty(n, np.float32), np.empty(n, np.float32), np.empty(n, np.float32),
            np.empty(n, np.uint8))


def _scratch(n: int):
    """Output buffers reused by this thread's next call.

    Fresh memory costs a page fault per 4 KiB on first touch (about half the
    time of the whole loop here); chunk tasks write their products out before
    the thread computes the next chunk, so they can reuse the same buffers.
    """
    bufs = getattr(_local, "bufs", None)
    if bufs is None or bufs[0].size != n:
        bufs = _local.bufs = _fresh(n)
    return bufs


def fused_scene(arrays: dict[str, np.ndarray], params, *, reuse: bool = False) -> dict[str, np.ndarray]:
    """The fused products of one chunk (where ``params.needs.fused``, see model/needs.py).

    ``reuse=True`` returns views of per-thread buffers that the thread's next
    call overwrites (for chunk tasks that write the products out at once).
    """
    shape = arrays["albedo"].shape
    flat = {k: np.ascontiguousarray(arrays[k], dtype=np.float32).ravel() for k in FUSED_INPUTS}
    if params.emissivity_constant is not None:
        classes = np.zeros(flat["albedo"].size, np.float32)
        lut = np.array([params.emissivity_constant], np.float32)
    else:
        classes = np.ascontiguousarray(arrays["land_cover"], dtype=np.float32).ravel()
        lut = np.ascontiguousarray(params.emissivity_lut, dtype=np.float32)
    default = params.emissivity_unknown
    n = flat["albedo"].size
    rn, rns, rnl, inc, q = _scratch(n) if reuse else _fresh(n)
    with_terrain = params.terrain != "none"
    if with_terrain:
        terrain = (incident_shortwave_fast(arrays, params.terrain).ravel(),
                   np.ascontiguousarray(arrays["slope"], dtype=np.float32).ravel(),
                   np.ascontiguousarray(arrays["sky_view_factor"], dtype=np.float32).ravel())
    else:
        terrain = (np.empty(0, np.float32),) * 3
    unknown = _loop_jit(tuple(flat[k] for k in FUSED_INPUTS), classes, lut,
                        np.float32(np.nan if default is None else default), (rn, rns, rnl, inc, q),
                        _LIMITS, STEFAN_BOLTZMANN, _BRUTSAERT, terrain, with_terrain)
    if unknown and default is None:
        # the loop only counts them; the NumPy lookup names the classes and raises
        chunk_emissivity(arrays, params, np.zeros(shape, np.uint8))
    return {"net_radiation": rn.reshape(shape), "net_shortwave": rns.reshape(shape),
            "net_longwave": rnl.reshape(shape), "incident_shortwave": inc.reshape(shape),
            "quality": q.reshape(shape)}
