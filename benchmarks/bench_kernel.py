"""Per-pixel arithmetic only: net radiation kernels on in-memory arrays.

    python benchmarks/bench_kernel.py [--size 4096] [--chunk 1024] [--repeat 5] [--json FILE]

Times, on N x N float32 inputs already in memory (no I/O):

* ``numpy``          the plain NumPy expression with temporaries (as in plain_script.py)
* ``numpy-inplace``  the same in place into preallocated buffers, ``x*x*x*x`` for the 4th power
* ``scene_kernel``   ``radledger.model.kernels.scene_kernel`` on one chunk x chunk block, called
                     (N / chunk)^2 times so it covers the same number of pixels
* ``scene_kernel-whole``  the same function called once on the whole N x N arrays
* ``scene_kernel-numpy``  scene_kernel's NumPy path (its fused dispatch switched off), if it has one
* ``fused_scene``    ``radledger.model.fused.fused_scene`` (the Numba loop scene_kernel dispatches to;
                     either signature (arrays, params) or (arrays, eps_s, params)),
                     emissivity lookup included, on the chunk block like scene_kernel
* ``fused_scene-reuse``  the same with ``reuse=True`` (output buffers reused), when it has that flag

Each is reported as a ratio against the memory-bandwidth bound measured in the
same run: the time of ``np.copyto`` moving as many bytes (read + write) as the
kernel must at least move (5 float32 inputs + uint8 land cover in, one float32
out = 25 bytes per pixel).  Single-threaded NumPy; the fused kernel may use
threads.
"""

from __future__ import annotations

import argparse
import gc
import inspect
import json
import os
import statistics
import sys
import time
from datetime import datetime, timezone

import numpy as np

SIGMA = 5.670374419e-8
CLASSES = (10, 20, 30, 40, 50, 60, 80, 90)
EMISSIVITY = {10: 0.985, 20: 0.975, 30: 0.970, 40: 0.965, 50: 0.940, 60: 0.920, 80: 0.990, 90: 0.980}
BYTES_PER_PX = 5 * 4 + 1 + 4          # five float32 in, uint8 class in, float32 out


def make_inputs(n, seed=0):
    rng = np.random.default_rng(seed)

    def u(lo, hi):
        return (lo + (hi - lo) * rng.random((n, n), dtype=np.float32)).astype(np.float32)

    return {
        "albedo": u(0.10, 0.30),
        "surface_temperature": u(290.0, 320.0),
        "air_temperature": u(285.0, 305.0),
        "vapour_pressure": u(0.8, 2.0),
        "shortwave_down": u(700.0, 900.0),
        "land_cover_u8": rng.choice(np.array(CLASSES, dtype=np.uint8), size=(n, n)),
    }


def lut32():
    lut = np.full(256, np.nan, dtype=np.float32)
    for c, e in EMISSIVITY.items():
        lut[c] = e
    return lut


def rn_numpy(x, lut):
    a, ts, ta, ea, rs = (x[k] for k in ("albedo", "surface_temperature", "air_temperature",
                                        "vapour_pressure", "shortwave_down"))
    eps = lut[x["land_cover_u8"]]
    eps_sky = 1.24 * (10 * ea / ta) ** (1 / 7)
    return (1 - a) * rs - eps * SIGMA * ts**4 + eps * eps_sky * SIGMA * ta**4


def rn_inplace(x, lut, out, t1, t2):
    a, ts, ta, ea, rs = (x[k] for k in ("albedo", "surface_temperature", "air_temperature",
                                        "vapour_pressure", "shortwave_down"))
    np.take(lut, x["land_cover_u8"], out=t1)           # eps
    np.multiply(ea, 10, out=out)
    np.divide(out, ta, out=out)
    np.power(out, 1 / 7, out=out)
    out *= 1.24                                         # eps_sky
    np.multiply(ta, ta, out=t2)
    t2 *= t2
    out *= t2                                           # eps_sky Ta^4
    np.multiply(ts, ts, out=t2)
    t2 *= t2
    out -= t2                                           # eps_sky Ta^4 - Ts^4
    out *= t1
    out *= SIGMA                                        # eps sigma (...)
    np.subtract(1, a, out=t2)
    t2 *= rs
    out += t2                                           # + (1 - a) Rs
    return out


def timeit(fn, repeat):
    fn()                                                # warm-up (JIT, first touch)
    ts = []
    for _ in range(repeat):
        gc.collect()
        t0 = time.perf_counter()
        fn()
        ts.append(time.perf_counter() - t0)
    return statistics.median(ts), min(ts)


def copy_bound(n, repeat):
    """Time np.copyto moving n*n*BYTES_PER_PX bytes (half read, half written)."""
    nbytes = n * n * BYTES_PER_PX // 2
    src = np.ones(nbytes, dtype=np.uint8)
    dst = np.zeros(nbytes, dtype=np.uint8)
    med, best = timeit(lambda: np.copyto(dst, src), max(repeat, 5))
    return best, 2 * nbytes / best


_ALIASES = {
    "albedo": ("albedo", "a", "alb"),
    "surface_temperature": ("surface_temperature", "ts", "lst", "t_s"),
    "air_temperature": ("air_temperature", "ta", "t_a"),
    "vapour_pressure": ("vapour_pressure", "ea", "e_a", "vapor_pressure"),
    "shortwave_down": ("shortwave_down", "rs", "r_s", "sw"),
    "land_cover": ("land_cover", "lc", "classes", "land_cover_classes"),
    "lut": ("emissivity_lut", "lut", "lookup", "emissivity_lookup", "table"),
}


def _rn(result):
    if isinstance(result, dict):
        result = result["net_radiation"]
    return np.asarray(result)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--size", type=int, default=4096)
    ap.add_argument("--chunk", type=int, default=1024)
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--json", metavar="FILE")
    args = ap.parse_args(argv)
    n, c = args.size, min(args.chunk, args.size)
    if n % c:
        ap.error("--size must be a multiple of --chunk")

    x = make_inputs(n)
    lut = lut32()
    # float64 reference for accuracy
    ref = rn_numpy({k: (v.astype(np.float64) if v.dtype == np.float32 else v) for k, v in x.items()},
                   lut.astype(np.float64))

    bound, bw = copy_bound(n, args.repeat)
    rows = []

    def add(name, fn, pixels_per_call, get, note=""):
        med, best = timeit(fn, args.repeat)
        scale = n * n / pixels_per_call                 # calls to cover n*n pixels
        med, best = med * scale, best * scale
        res = get()
        diff = float(np.nanmax(np.abs(res.astype(np.float64) - ref[tuple(slice(0, s) for s in res.shape)])))
        rows.append({"kernel": name, "median_s": med, "best_s": best, "x_bound": med / bound,
                     "mpx_per_s": n * n / med / 1e6, "max_abs_diff_vs_float64": diff, "note": note})

    state = {}
    add("numpy", lambda: state.__setitem__("np", rn_numpy(x, lut)), n * n, lambda: state["np"])
    out, t1, t2 = (np.empty((n, n), np.float32) for _ in range(3))
    add("numpy-inplace", lambda: rn_inplace(x, lut, out, t1, t2), n * n, lambda: out)
    del out, t1, t2
    gc.collect()

    try:
        from radledger.model.kernels import scene_kernel
        from radledger.model.params import SceneParams
        from radledger.physics.emissivity import build_lookup
    except Exception as exc:   # noqa: BLE001 - report and carry on
        print(f"radledger.model.kernels not importable: {exc}", file=sys.stderr)
        scene_kernel = None
    rl_lut = None
    if scene_kernel is not None:
        rl_lut = build_lookup(EMISSIVITY)
        params = SceneParams(time=datetime(2026, 7, 14, 18, 10, tzinfo=timezone.utc),
                             products=("net_radiation",), emissivity_lut=rl_lut)
        names = ("albedo", "surface_temperature", "air_temperature", "vapour_pressure", "shortwave_down")
        block = {k: np.ascontiguousarray(x[k][:c, :c]) for k in names}
        block["land_cover"] = x["land_cover_u8"][:c, :c].astype(np.float32)
        add("scene_kernel", lambda: state.__setitem__("sk", scene_kernel(block, None, None, params)),
            c * c, lambda: state["sk"]["net_radiation"], f"one {c}x{c} block x {(n // c) ** 2}")
        whole = {k: x[k] for k in names}
        whole["land_cover"] = x["land_cover_u8"].astype(np.float32)
        add("scene_kernel-whole", lambda: state.__setitem__("skw", scene_kernel(whole, None, None, params)),
            n * n, lambda: state["skw"]["net_radiation"], f"one call on {n}x{n}")
        state.pop("skw", None)
        del whole
        gc.collect()
        import radledger.model.kernels as rk
        if hasattr(rk, "fused_applies"):
            # the same function with its fused dispatch switched off: the NumPy path alone
            saved = rk.fused_applies
            rk.fused_applies = lambda *a, **k: False
            try:
                add("scene_kernel-numpy", lambda: state.__setitem__("skn", scene_kernel(block, None, None, params)),
                    c * c, lambda: state["skn"]["net_radiation"], f"fused dispatch off; {c}x{c} x {(n // c) ** 2}")
            finally:
                rk.fused_applies = saved

    fused_notes = []
    # radledger.model.fused.fused_scene(arrays, eps_s, params): the Numba loop scene_kernel dispatches to
    try:
        from radledger.model.fused import fused_scene
        from radledger.physics.emissivity import emissivity_from_classes
    except Exception as exc:   # noqa: BLE001
        fused_notes.append(f"fused_scene skipped: not importable ({type(exc).__name__}: {exc})")
    else:
        if scene_kernel is None:
            fused_notes.append("fused_scene skipped: needs radledger.model.kernels.SceneParams")
        else:
            try:
                positional = [q.name for q in inspect.signature(fused_scene).parameters.values()
                              if q.kind in (q.POSITIONAL_ONLY, q.POSITIONAL_OR_KEYWORD)
                              and q.default is inspect.Parameter.empty]
                if len(positional) >= 3:                                    # fused_scene(arrays, eps_s, params)
                    def call_fs():
                        eps_s = emissivity_from_classes(block["land_cover"], rl_lut)
                        state["fs"] = fused_scene(block, eps_s, params)
                else:                                                       # fused_scene(arrays, params)
                    def call_fs():
                        state["fs"] = fused_scene(block, params)
                t0 = time.perf_counter()
                call_fs()
                first = time.perf_counter() - t0
                add("fused_scene", call_fs, c * c, lambda: state["fs"]["net_radiation"],
                    f"incl. LUT; {c}x{c} x {(n // c) ** 2}; first call {first:.2f} s")
                if "reuse" in inspect.signature(fused_scene).parameters and len(positional) < 3:
                    add("fused_scene-reuse", lambda: state.__setitem__("fr", fused_scene(block, params, reuse=True)),
                        c * c, lambda: state["fr"]["net_radiation"], "reuse=True (per-thread output buffers)")
            except Exception as exc:   # noqa: BLE001
                fused_notes.append(f"fused_scene skipped: calling it failed ({type(exc).__name__}: {exc})")

    print(f"kernel benchmark, {n} x {n} float32 ({n * n / 1e6:.1f} Mpx), median of {args.repeat}, "
          f"{os.cpu_count()} CPUs")
    print(f"memory-bandwidth bound: {bound * 1e3:.1f} ms for {BYTES_PER_PX} B/px "
          f"(np.copyto at {bw / 1e9:.1f} GB/s read+write)")
    print(f"  {'kernel':20s} {'median s':>9s} {'x bound':>8s} {'Mpx/s':>7s} {'max|d| vs f64':>14s}  note")
    for r in rows:
        print(f"  {r['kernel']:20s} {r['median_s']:9.3f} {r['x_bound']:8.1f} {r['mpx_per_s']:7.0f} "
              f"{r['max_abs_diff_vs_float64']:14.2e}  {r['note']}")
    for note in fused_notes:
        print(f"  {note}")
    if args.json:
        with open(args.json, "w") as f:
            json.dump({"size": n, "chunk": c, "repeat": args.repeat, "bound_s": bound,
                       "copy_bandwidth_bytes_per_s": bw, "kernels": rows, "notes": fused_notes}, f, indent=2)
    return 0


if __name__ == "__main__":
    sys.exit(main())
