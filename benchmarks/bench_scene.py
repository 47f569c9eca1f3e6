"""End-to-end benchmark: `radledger run` against a hand-written plain script.

    python benchmarks/bench_scene.py --size 4096 [--size2 8192] [--repeat 3] [--chunk 1024]
                                     [--products {net_radiation,all}] [--keep] [--json FILE]

For each size it makes (once; cached under benchmarks/_work/N/) a synthetic
N x N six-layer scene on one UTM grid, writes a radledger config for it, then
times `radledger run --quiet --overwrite CONFIG` and `python plain_script.py`
as separate processes under `/usr/bin/time -v` (wall time and peak RSS): one
warm-up of each, then --repeat rounds, alternating which goes first.  It
reports medians, the ratios, the output sizes and the largest difference
between the two net-radiation maps.  With --products all both programs write
the four default products (net radiation, net shortwave, net longwave,
quality) and the maps are compared product by product.  See
benchmarks/README.md.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import re
import shutil
import statistics
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import rasterio
from rasterio.transform import from_origin
from rasterio.windows import Window

HERE = Path(__file__).resolve().parent
WORK = HERE / "_work"
PLAIN = HERE / "plain_script.py"
GEN_VERSION = 1                     # bump to regenerate cached scenes

CRS = "EPSG:32611"
RES = 30.0
ORIGIN = (300000.0, 4300000.0)      # upper-left corner, UTM 11N
BLOCK = 512
SCENE_TIME = "2026-07-14T18:10:00Z"
SCENE_STAMP = "20260714T1810"
PRODUCT_SETS = {
    "net_radiation": ("net_radiation",),
    "all": ("net_radiation", "net_shortwave", "net_longwave", "quality"),
}
FLOAT_PRODUCTS = ("net_radiation", "net_shortwave", "net_longwave")
QUALITY_MISSING = 1                 # quality bit "an input is nodata" (both programs)
QUALITY_NODATA = 255

# layer file -> (range, seed); float32, smooth synthetic fields
FLOAT_LAYERS = {
    "albedo": ((0.10, 0.30), 11),
    "lst": ((290.0, 320.0), 12),
    "ta": ((285.0, 305.0), 13),
    "ea": ((0.8, 2.0), 14),
    "rs": ((700.0, 900.0), 15),
}
CLASSES = (10, 20, 30, 40, 50, 60, 80, 90)
# Invented fixture values (benchmark inputs only, not a recommendation).
EMISSIVITY = {10: 0.985, 20: 0.975, 30: 0.970, 40: 0.965, 50: 0.940, 60: 0.920, 80: 0.990, 90: 0.980}


# --------------------------------------------------------------------------- scene generation

def _coarse(rng, n, factor):
    """Low-resolution uniform noise, one value per factor x factor pixels."""
    m = max(1, -(-n // factor))
    return rng.random((m, m), dtype=np.float32)


def _upsample_rows(coarse, factor, r0, r1, n):
    """Rows r0:r1 (all columns) of the coarse grid, upsampled by np.repeat."""
    rows = coarse[r0 // factor:(r1 - 1) // factor + 1]
    up = np.repeat(np.repeat(rows, factor, axis=0), factor, axis=1)
    off = r0 - (r0 // factor) * factor
    return up[off:off + (r1 - r0), :n]


class SmoothField:
    """A smooth field in [0, 1]: outer products of sines + upsampled coarse noise + a little pixel noise."""

    def __init__(self, n, seed, pixel_noise=0.01):
        self.n, self.seed, self.pixel_noise = n, seed, pixel_noise
        rng = np.random.default_rng(seed)
        self.k = rng.uniform(0.5, 3.0, 4)
        self.phase = rng.uniform(0, 2 * np.pi, 4)
        self.c128 = _coarse(rng, n, 128)
        self.c16 = _coarse(rng, n, 16)

    def rows(self, r0, r1):
        n = self.n
        y = (np.arange(r0, r1, dtype=np.float32) / n)[:, None]
        x = (np.arange(n, dtype=np.float32) / n)[None, :]
        k, ph = self.k, self.phase
        sy1, sx1 = np.sin(2 * np.pi * k[0] * y + ph[0]), np.sin(2 * np.pi * k[1] * x + ph[1])
        sy2, sx2 = np.cos(2 * np.pi * k[2] * y + ph[2]), np.cos(2 * np.pi * k[3] * x + ph[3])
        v = 0.5 + 0.15 * (sy1 + sx1) + 0.1 * (sy2 * sx2)          # outer products, in [0.1, 0.9]
        v = v + 0.12 * (_upsample_rows(self.c128, 128, r0, r1, n) - 0.5)
        v = v + 0.06 * (_upsample_rows(self.c16, 16, r0, r1, n) - 0.5)
        if self.pixel_noise:
            rng = np.random.default_rng((self.seed, r0))
            v = v + self.pixel_noise * rng.standard_normal(v.shape, dtype=np.float32)
        return np.clip(v, 0.0, 1.0).astype(np.float32, copy=False)


def _profile(n, dtype, predictor):
    return {"driver": "GTiff", "width": n, "height": n, "count": 1, "dtype": dtype, "crs": CRS,
            "transform": from_origin(ORIGIN[0], ORIGIN[1], RES, RES), "tiled": True,
            "blockxsize": BLOCK, "blockysize": BLOCK, "compress": "zstd", "predictor": predictor,
            "num_threads": "ALL_CPUS", "BIGTIFF": "IF_SAFER"}


def make_scene(n: int, log=print) -> Path:
    """The N x N scene directory, generated once (strip by strip) and cached."""
    d = WORK / str(n)
    marker = d / "scene.json"
    names = [*FLOAT_LAYERS, "land_cover"]
    if marker.exists():
        meta = json.loads(marker.read_text())
        if meta.get("version") == GEN_VERSION and all((d / f"{k}.tif").exists() for k in names):
            return d
    d.mkdir(parents=True, exist_ok=True)
    log(f"making the {n} x {n} scene in {d} ...")
    t0 = time.perf_counter()
    with rasterio.Env(GDAL_CACHEMAX=64):
        for name, ((lo, hi), seed) in FLOAT_LAYERS.items():
            field = SmoothField(n, seed)
            with rasterio.open(d / f"{name}.tif", "w", **_profile(n, "float32", 3)) as dst:
                for r0 in range(0, n, BLOCK):
                    r1 = min(n, r0 + BLOCK)
                    v = field.rows(r0, r1)
                    dst.write(np.float32(lo) + np.float32(hi - lo) * v, 1, window=Window(0, r0, n, r1 - r0))
        field = SmoothField(n, 21, pixel_noise=0.0)
        rng = np.random.default_rng(22)
        c8 = _coarse(rng, n, 8)                      # 240 m patches
        codes = np.array(CLASSES, dtype=np.uint8)
        edges = np.linspace(0, 1, len(CLASSES) + 1)[1:-1]
        with rasterio.open(d / "land_cover.tif", "w", **_profile(n, "uint8", 2)) as dst:
            for r0 in range(0, n, BLOCK):
                r1 = min(n, r0 + BLOCK)
                v = 0.55 * field.rows(r0, r1) + 0.45 * _upsample_rows(c8, 8, r0, r1, n)
                v = (v - 0.1) / 0.8
                dst.write(codes[np.digitize(v, edges)], 1, window=Window(0, r0, n, r1 - r0))
    with open(d / "emissivity.csv", "w") as f:
        f.write("class,emissivity\n")
        for c, e in EMISSIVITY.items():
            f.write(f"{c},{e}\n")
    marker.write_text(json.dumps({"version": GEN_VERSION, "size": n}))
    log(f"  made in {time.perf_counter() - t0:.1f} s")
    return d


def write_config(d: Path, chunk: int, products=PRODUCT_SETS["net_radiation"]) -> Path:
    cfg = d / "config.yaml"
    cfg.write_text(f"""\
title: radledger benchmark scene {d.name} x {d.name} (synthetic)
grid:
  like: land_cover
  chunk: {chunk}
layers:
  surface_temperature: {{units: K}}
  air_temperature: {{units: K}}
  vapour_pressure: {{units: kPa}}
  shortwave_down: {{units: W m-2}}
static:
  land_cover: land_cover.tif
emissivity:
  table: emissivity.csv
methods:
  sky_emissivity: brutsaert
  clouds: none
scenes:
  - time: {SCENE_TIME}
    albedo: albedo.tif
    surface_temperature: lst.tif
    air_temperature: ta.tif
    vapour_pressure: ea.tif
    shortwave_down: rs.tif
output:
  directory: out_radledger
  products: [{", ".join(products)}]
  compression: zstd
""")
    return cfg


# --------------------------------------------------------------------------- timing

_WALL = re.compile(r"Elapsed \(wall clock\) time.*?:\s*(\S+)\s*$", re.M)
_RSS = re.compile(r"Maximum resident set size \(kbytes\):\s*(\d+)")
_USER = re.compile(r"User time \(seconds\):\s*([\d.]+)")
_SYS = re.compile(r"System time \(seconds\):\s*([\d.]+)")


def loadavg():
    """1-minute load average (other work on the machine skews wall times)."""
    try:
        return float(Path("/proc/loadavg").read_text().split()[0])
    except OSError:
        return float("nan")


def _seconds(text):
    parts = [float(p) for p in text.split(":")]
    s = 0.0
    for p in parts:
        s = s * 60 + p
    return s


class RunFailed(RuntimeError):
    pass


def timed(cmd, label, tmp: Path, env=None):
    """Run cmd under /usr/bin/time -v; {wall_s, cpu_s, peak_mb, load}."""
    tfile = tmp / f"time_{label}.txt"
    load = loadavg()
    proc = subprocess.run(["/usr/bin/time", "-v", "-o", str(tfile), *cmd],
                          capture_output=True, text=True, env=env)
    if proc.returncode != 0:
        raise RunFailed(f"{label} failed (exit {proc.returncode}): {' '.join(cmd)}\n"
                        f"--- stdout ---\n{proc.stdout}\n--- stderr ---\n{proc.stderr}")
    out = tfile.read_text()
    return {"wall_s": _seconds(_WALL.search(out).group(1)),
            "cpu_s": float(_USER.search(out).group(1)) + float(_SYS.search(out).group(1)),
            "peak_mb": int(_RSS.search(out).group(1)) / 1024.0,      # kB -> MiB
            "load_before": load}


def max_abs_diff(a_path, b_path, rows=BLOCK):
    """Largest |a - b| over pixels valid in both, and how many pixels are NaN in only one.

    Reads both files strip by strip (one row of 512 x 512 tiles at a time)."""
    worst, nan_mismatch, nan_both = 0.0, 0, 0
    with rasterio.open(a_path) as a, rasterio.open(b_path) as b:
        if (a.width, a.height) != (b.width, b.height):
            raise RunFailed(f"shapes differ: {a.shape} vs {b.shape}")
        for r0 in range(0, a.height, rows):
            w = Window(0, r0, a.width, min(rows, a.height - r0))
            x = a.read(1, window=w).astype(np.float64)
            y = b.read(1, window=w).astype(np.float64)
            nx, ny = np.isnan(x), np.isnan(y)
            nan_mismatch += int(np.count_nonzero(nx != ny))
            nan_both += int(np.count_nonzero(nx & ny))
            ok = ~(nx | ny)
            if ok.any():
                worst = max(worst, float(np.max(np.abs(x[ok] - y[ok]))))
    return worst, nan_mismatch, nan_both


def quality_diff(a_path, b_path, bit=QUALITY_MISSING, rows=BLOCK):
    """Pixels (both not nodata) where ``bit`` differs, and pixels that are nodata (255) in only one."""
    differ, nodata_mismatch = 0, 0
    with rasterio.open(a_path) as a, rasterio.open(b_path) as b:
        if (a.width, a.height) != (b.width, b.height):
            raise RunFailed(f"shapes differ: {a.shape} vs {b.shape}")
        for r0 in range(0, a.height, rows):
            w = Window(0, r0, a.width, min(rows, a.height - r0))
            x, y = a.read(1, window=w), b.read(1, window=w)
            nx, ny = x == QUALITY_NODATA, y == QUALITY_NODATA
            nodata_mismatch += int(np.count_nonzero(nx != ny))
            ok = ~(nx | ny)
            differ += int(np.count_nonzero(((x & bit) != (y & bit)) & ok))
    return differ, nodata_mismatch


def bench_size(n, args, radledger_cmd, log=print):
    d = make_scene(n, log)
    products = PRODUCT_SETS[args.products]
    cfg = write_config(d, args.chunk, products)
    rl_outs = {p: d / "out_radledger" / "scenes" / f"{p}_{SCENE_STAMP}.tif" for p in products}
    plain_dir = d / "plain"
    plain_dir.mkdir(exist_ok=True)
    plain_outs = {p: plain_dir / f"{p}.tif" for p in products}
    if args.products == "all":
        plain_cmd = [sys.executable, str(PLAIN), "--all-products", str(d), str(plain_dir)]
    else:
        plain_cmd = [sys.executable, str(PLAIN), str(d), str(plain_outs["net_radiation"])]
    cmds = {
        "radledger": [*radledger_cmd, "run", "--quiet", "--overwrite", str(cfg)],
        "plain": plain_cmd,
    }
    runs = {"radledger": [], "plain": []}
    log(f"{n} x {n}: warm-up ...")
    def show(what, name, t):
        log(f"  {what} {name:9s} {t['wall_s']:7.2f} s wall {t['cpu_s']:7.2f} s cpu {t['peak_mb']:7.0f} MB"
            f"   (load {t['load_before']:.1f})")

    envs = {"radledger": {**os.environ, **args.radledger_env} if args.radledger_env else None, "plain": None}
    for name in ("radledger", "plain"):
        show("warm-up", name, timed(cmds[name], name, d, envs[name]))
    for i in range(args.repeat):
        order = ("radledger", "plain") if i % 2 == 0 else ("plain", "radledger")
        for name in order:
            t = timed(cmds[name], name, d, envs[name])
            runs[name].append(t)
            show(f"round {i + 1}", name, t)
    for name, outs in (("radledger", rl_outs), ("plain", plain_outs)):
        for path in outs.values():
            if not path.exists():
                raise RunFailed(f"{name} exited 0 but {path} does not exist")
    med = {k: {"wall_s": statistics.median(r["wall_s"] for r in v),
               "cpu_s": statistics.median(r["cpu_s"] for r in v),
               "peak_mb": statistics.median(r["peak_mb"] for r in v),
               "wall_min": min(r["wall_s"] for r in v), "wall_max": max(r["wall_s"] for r in v)}
           for k, v in runs.items()}
    compare = {}
    for p in products:
        if p == "quality":
            differ, nodata_mismatch = quality_diff(rl_outs[p], plain_outs[p])
            compare[p] = {"bit": QUALITY_MISSING, "bit_differs_pixels": differ,
                          "nodata_mismatch_pixels": nodata_mismatch}
        else:
            diff, nan_mismatch, nan_both = max_abs_diff(rl_outs[p], plain_outs[p])
            compare[p] = {"max_abs_diff_w_m2": diff, "nan_mismatch_pixels": nan_mismatch,
                          "nan_both_pixels": nan_both}
    sizes = {p: {"radledger": rl_outs[p].stat().st_size, "plain": plain_outs[p].stat().st_size}
             for p in products}
    size_rl = sum(s["radledger"] for s in sizes.values())
    size_plain = sum(s["plain"] for s in sizes.values())
    rn = compare["net_radiation"]
    res = {
        "size": n, "pixels": n * n, "chunk": args.chunk, "repeat": args.repeat,
        "products": list(products),
        "radledger_env": args.radledger_env,
        "runs": runs, "median": med,
        "max_load_before": max(r["load_before"] for v in runs.values() for r in v),
        "time_ratio_plain_over_radledger": med["plain"]["wall_s"] / med["radledger"]["wall_s"],
        "peak_ratio_radledger_over_plain": med["radledger"]["peak_mb"] / med["plain"]["peak_mb"],
        "output_bytes": {"radledger": size_rl, "plain": size_plain},
        "output_bytes_per_product": sizes,
        "output_size_ratio_radledger_over_plain": size_rl / size_plain,
        "max_abs_diff_w_m2": rn["max_abs_diff_w_m2"], "nan_mismatch_pixels": rn["nan_mismatch_pixels"],
        "nan_both_pixels": rn["nan_both_pixels"],
        "compare": compare,
    }
    if not args.keep:
        shutil.rmtree(d / "out_radledger", ignore_errors=True)
        shutil.rmtree(plain_dir, ignore_errors=True)
    return res


def table(r):
    m = r["median"]
    n = r["size"]
    lines = [
        f"scene {n} x {n} ({n * n / 1e6:.1f} Mpx), chunk {r['chunk']}, median of {r['repeat']} "
        f"(after one warm-up each); 1-min load average before runs <= {r['max_load_before']:.1f}"
        f"\n  products: {', '.join(r['products'])}"
        + (f"\n  radledger run with extra environment {r['radledger_env']}" if r["radledger_env"] else ""),
        f"  {'':22s} {'wall s':>8s} {'(min-max)':>15s} {'cpu s':>8s} {'peak MB':>9s}",
    ]
    for k in ("radledger", "plain"):
        lines.append(f"  {k:22s} {m[k]['wall_s']:8.2f} {m[k]['wall_min']:7.2f}-{m[k]['wall_max']:<7.2f}"
                     f" {m[k]['cpu_s']:8.2f} {m[k]['peak_mb']:9.0f}")
    ob = r["output_bytes"]
    several = len(r["products"]) > 1
    lines += [
        f"  time ratio plain / radledger      {r['time_ratio_plain_over_radledger']:6.2f}  (>1: radledger faster)",
        f"  peak-memory ratio radledger/plain {r['peak_ratio_radledger_over_plain']:6.2f}",
        f"  output-size ratio radledger/plain {r['output_size_ratio_radledger_over_plain']:6.3f}"
        f"  ({ob['radledger'] / 2**20:.1f} MB vs {ob['plain'] / 2**20:.1f} MB"
        + (f", {len(r['products'])} files each)" if several else ")"),
    ]
    symbols = {"net_radiation": "Rn", "net_shortwave": "Rns", "net_longwave": "Rnl"}
    for p in r["products"]:
        c = r["compare"][p]
        if p == "quality":
            lines.append(f"  quality bit {c['bit']} differs             {c['bit_differs_pixels']} px"
                         f"  (nodata 255 in one only: {c['nodata_mismatch_pixels']} px)")
            continue
        s = symbols[p]
        label = f"max |{s}_radledger - {s}_plain|"
        lines.append(f"  {label:33s} {c['max_abs_diff_w_m2']:.3g} W m-2"
                     f"  (NaN in one only: {c['nan_mismatch_pixels']} px, in both: {c['nan_both_pixels']} px)")
    return "\n".join(lines)


def growth(r1, r2):
    px = r2["pixels"] / r1["pixels"]
    g = {"pixels": px}
    lines = [f"growth {r1['size']} -> {r2['size']} (x{px:.0f} pixels)"]
    for k in ("radledger", "plain"):
        gt = r2["median"][k]["wall_s"] / r1["median"][k]["wall_s"]
        gm = r2["median"][k]["peak_mb"] / r1["median"][k]["peak_mb"]
        g[k] = {"time": gt, "peak": gm}
        lines.append(f"  {k:22s} time x{gt:5.2f}   peak memory x{gm:5.2f}")
    return "\n".join(lines), g


def source_state():
    """The radledger commit benchmarked, and whether src/ had uncommitted changes."""
    repo = HERE.parent
    try:
        head = subprocess.run(["git", "-C", str(repo), "rev-parse", "--short", "HEAD"],
                              capture_output=True, text=True).stdout.strip()
        dirty = subprocess.run(["git", "-C", str(repo), "status", "--porcelain", "--", "src"],
                               capture_output=True, text=True).stdout.strip()
    except OSError:
        return {"commit": None, "src_dirty": None}
    return {"commit": head or None, "src_dirty": bool(dirty)}


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--size", type=int, default=4096, help="scene edge, pixels (default 4096)")
    ap.add_argument("--size2", type=int, default=None, help="a second, larger scene edge (e.g. 8192)")
    ap.add_argument("--repeat", type=int, default=3, help="timed rounds after the warm-up (default 3)")
    ap.add_argument("--chunk", type=int, default=1024, help="grid.chunk in the radledger config (default 1024)")
    ap.add_argument("--products", choices=sorted(PRODUCT_SETS), default="net_radiation",
                    help="net_radiation (default): one COG each; all: the four default products "
                         "(net_radiation, net_shortwave, net_longwave, quality), the plain script "
                         "run with --all-products")
    ap.add_argument("--keep", action="store_true", help="keep both outputs under benchmarks/_work/N/")
    ap.add_argument("--json", metavar="FILE", help="also write the numbers as JSON")
    ap.add_argument("--radledger-env", metavar="KEY=VALUE", action="append", default=[],
                    help="extra environment for the radledger runs only (repeatable), "
                         "e.g. GDAL_CACHEMAX=134217728 to try another GDAL setting")
    args = ap.parse_args(argv)
    try:
        args.radledger_env = dict(kv.split("=", 1) for kv in args.radledger_env)
    except ValueError:
        ap.error("--radledger-env takes KEY=VALUE")
    if args.repeat < 1:
        ap.error("--repeat must be at least 1")
    if not Path("/usr/bin/time").exists():
        sys.exit("bench_scene: needs GNU time at /usr/bin/time")

    exe = Path(sys.executable).parent / "radledger"
    radledger_cmd = [str(exe)] if exe.exists() else [shutil.which("radledger") or "radledger"]
    gdal_env = {k: v for k, v in os.environ.items() if k.startswith(("GDAL_", "CPL_", "VSI_"))}
    if gdal_env:
        print(f"note: GDAL settings in the environment apply to both runs: {gdal_env}")

    src_before = source_state()
    print(f"radledger source: commit {src_before['commit']}"
          + (" with uncommitted changes under src/" if src_before["src_dirty"] else ""))
    sizes = [args.size] + ([args.size2] if args.size2 else [])
    results = []
    try:
        for n in sizes:
            results.append(bench_size(n, args, radledger_cmd))
    except RunFailed as e:
        print(f"\nFAILED: {e}", file=sys.stderr)
        if args.json:
            Path(args.json).write_text(json.dumps({"error": str(e), "results": results}, indent=2))
        return 1

    src_after = source_state()
    if src_after != src_before:
        print(f"WARNING: radledger's source changed during the benchmark ({src_before} -> {src_after}); "
              f"the numbers mix versions - rerun", file=sys.stderr)
    print()
    print(f"radledger commit {src_before['commit']}" + (" + uncommitted src/ changes" if src_before["src_dirty"] else ""))
    for r in results:
        print(table(r))
        print()
    out = {"machine": {"cpus": os.cpu_count(), "python": platform.python_version(),
                       "rasterio": rasterio.__version__, "gdal": rasterio.__gdal_version__,
                       "numpy": np.__version__},
           "radledger_source": src_before, "radledger_source_after": src_after,
           "results": results}
    if len(results) == 2:
        text, g = growth(*results)
        print(text)
        out["growth"] = g
    if args.json:
        Path(args.json).write_text(json.dumps(out, indent=2))
        print(f"\nwrote {args.json}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
