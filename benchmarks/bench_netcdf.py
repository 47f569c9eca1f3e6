"""NetCDF stack benchmark: radledger's chunk-pool writer against xarray writing the Dask stack.

    python benchmarks/bench_netcdf.py [--size 2048] [--dates 48] [--kind float32 | uint8 | both]
                                      [--chunk 1024] [--repeat 3] [--keep] [--json FILE]

It makes (once; cached under benchmarks/_work/netcdf-N-D-KIND/) D synthetic product COGs of
N x N pixels on one UTM grid, written as radledger writes its products (ZSTD level 1, predictor,
512 px tiles, overviews): daily net radiation in MJ m-2 day-1 (float32, invented smooth fields
with 1 % pixel noise and NaN patches) or a quality bit-flag map (uint8, patches, nodata 255).
Then it stacks them into one CF-NetCDF file two ways, each in its own process under
`/usr/bin/time -v` (wall time, peak RSS):

* ``xarray``: the writer before the chunk pool, the baseline: the same dataset and encoding
  (``radledger.outputs.netcdf.stack_layout``) with the data variable a Dask stack of the COGs
  (``radledger.io.lazy.read_product``, one task per grid chunk), written by
  ``Dataset.to_netcdf(engine="h5netcdf")`` under ``atomic_output``;
* ``radledger``: ``radledger.outputs.netcdf.write_stack``.

One warm-up of each, then --repeat rounds alternating which goes first.  It prints medians, the
time ratio xarray / radledger, peak memory, the time inside the process spent writing (without
the imports), and checks the two files: decoded values bit for bit (h5py, chunk by chunk), how
many stored chunks have identical bytes, and their sizes.  See benchmarks/README.md.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import statistics
import sys
import time
from datetime import date, timedelta
from pathlib import Path

import numpy as np
import rasterio
from rasterio.transform import from_origin

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
from bench_scene import RunFailed, SmoothField, loadavg, source_state, timed  # noqa: E402

WORK = HERE / "_work"
GEN_VERSION = 1
CRS = "EPSG:32611"
RES = 30.0
ORIGIN = (300000.0, 4300000.0)
FIRST_DAY = date(2026, 6, 1)
WRITERS = ("xarray", "radledger")


# --------------------------------------------------------------------------- synthetic products

def _net_radiation(n: int, day: int) -> np.ndarray:
    """An invented daily net radiation field, 4-18 MJ m-2 day-1, with NaN patches (clouds)."""
    v = SmoothField(n, 100 + day).rows(0, n)
    out = np.float32(4.0) + np.float32(14.0) * v
    rng = np.random.default_rng(1000 + day)
    for _ in range(3):
        r, c = rng.integers(0, n, 2)
        h, w = rng.integers(n // 32, n // 8, 2)
        out[r:r + h, c:c + w] = np.nan
    return out


def _quality(n: int, day: int) -> np.ndarray:
    """An invented quality map: a few bit flags in 240 m patches, some nodata (255)."""
    rng = np.random.default_rng(2000 + day)
    m = -(-n // 8)
    coarse = rng.choice(np.array([0, 0, 0, 4, 16, 32, 36, 128], np.uint8), (m, m))
    q = np.repeat(np.repeat(coarse, 8, axis=0), 8, axis=1)[:n, :n].copy()
    q[: n // 10, :] = 255
    return q


def make_products(n: int, dates: int, kind: str, log=print) -> Path:
    """The folder of D COGs, generated once and cached."""
    from radledger.io.cog import cog_options

    d = WORK / f"netcdf-{n}-{dates}-{kind}"
    marker = d / "products.json"
    names = [f"p{i:03d}.tif" for i in range(dates)]
    if marker.exists():
        meta = json.loads(marker.read_text())
        if meta.get("version") == GEN_VERSION and all((d / x).exists() for x in names):
            return d
    d.mkdir(parents=True, exist_ok=True)
    log(f"making {dates} {kind} COGs of {n} x {n} in {d} ...")
    t0 = time.perf_counter()
    profile = {"driver": "COG", "width": n, "height": n, "count": 1, "dtype": kind, "crs": CRS,
               "transform": from_origin(ORIGIN[0], ORIGIN[1], RES, RES),
               "nodata": float("nan") if kind == "float32" else 255,
               **cog_options("zstd", categorical=kind != "float32")}
    for i, name in enumerate(names):
        data = _net_radiation(n, i) if kind == "float32" else _quality(n, i)
        with rasterio.open(d / name, "w", **profile) as dst:
            dst.write(data, 1)
    marker.write_text(json.dumps({"version": GEN_VERSION, "size": n, "dates": dates, "kind": kind}))
    log(f"  made in {time.perf_counter() - t0:.1f} s")
    return d


# --------------------------------------------------------------------------- one write (child process)

def _stack_args(d: Path, kind: str, chunk: int):
    from radledger.grid import TargetGrid
    from radledger.model.products import SCENE_QUALITY_BITS, product_info

    paths = sorted(str(p) for p in d.glob("p*.tif"))
    with rasterio.open(paths[0]) as src:
        grid = TargetGrid.from_dataset(src, chunk=chunk)
    days = [FIRST_DAY + timedelta(days=i) for i in range(len(paths))]
    if kind == "float32":
        kw = dict(product=product_info("net_radiation", "days"), cell_methods="time: mean",
                  time_bounds=[(t, t + timedelta(days=1)) for t in days])
    else:
        kw = dict(product=product_info("quality", "scenes"), cell_methods="time: point", flags=SCENE_QUALITY_BITS)
    return paths, days, dict(grid=grid, attrs={"title": "radledger benchmark stack"}, **kw)


def write_once(writer: str, d: Path, out: Path, kind: str, chunk: int) -> float:
    """Write the stack with one writer; seconds spent (imports excluded)."""
    from radledger.io.atomic import atomic_output
    from radledger.io.lazy import read_product
    from radledger.outputs.netcdf import stack_layout, write_stack

    t0 = time.perf_counter()
    paths, times, kw = _stack_args(d, kind, chunk)
    if writer == "radledger":
        write_stack(paths, times, out, **kw)
    else:  # the writer before the chunk pool, as it was: xarray computes the Dask stack and writes it
        import dask.array as da

        ds, encoding, readers = stack_layout(paths, times, **kw)
        name = kw["product"].name
        ds[name] = ds[name].copy(data=da.stack([read_product(r.path, kw["grid"], dtype=kind) for r in readers]))
        with atomic_output(out) as tmp:
            ds.to_netcdf(tmp, engine="h5netcdf", encoding=encoding, format="NETCDF4")
    return time.perf_counter() - t0


# --------------------------------------------------------------------------- comparing the two files

def compare(a_path: Path, b_path: Path, name: str) -> dict:
    """Decoded values bit for bit, chunk by chunk; stored chunk bytes; the layouts' summaries."""
    import h5py

    res = {"values_identical": True, "chunks": 0, "chunks_same_bytes": 0}
    with h5py.File(a_path, "r") as fa, h5py.File(b_path, "r") as fb:
        a, b = fa[name], fb[name]
        for what in ("shape", "dtype", "chunks", "compression", "compression_opts", "shuffle", "fillvalue"):
            va, vb = getattr(a, what), getattr(b, what)
            same = va == vb if isinstance(va, (str, tuple, bool, np.dtype, type(None))) else \
                np.array_equal(np.asarray(va), np.asarray(vb), equal_nan=np.asarray(va).dtype.kind == "f")
            if not same:
                res.setdefault("layout_differs", []).append(f"{what}: {va} vs {vb}")
        u = f"u{a.dtype.itemsize}"
        ct, cy, cx = a.chunks
        for t in range(0, a.shape[0], ct):
            for y in range(0, a.shape[1], cy):
                for x in range(0, a.shape[2], cx):
                    sl = np.s_[t:t + ct, y:y + cy, x:x + cx]
                    if not np.array_equal(a[sl].view(u), b[sl].view(u)):
                        res["values_identical"] = False
                    res["chunks"] += 1
                    res["chunks_same_bytes"] += a.id.read_direct_chunk((t, y, x)) == b.id.read_direct_chunk((t, y, x))
    res["bytes"] = {"xarray": a_path.stat().st_size, "radledger": b_path.stat().st_size}
    return res


# --------------------------------------------------------------------------- driver

def bench_kind(kind: str, args, log=print) -> dict:
    d = make_products(args.size, args.dates, kind, log)
    outs = {w: d / f"stack_{w}.nc" for w in WRITERS}
    cmds = {w: [sys.executable, str(Path(__file__).resolve()), "--write", w, "--dir", str(d), "--out", str(outs[w]),
                "--kind", kind, "--chunk", str(args.chunk), "--inner", str(d / f"inner_{w}.json")]
            for w in WRITERS}
    runs = {w: [] for w in WRITERS}

    def run(w, what):
        t = timed(cmds[w], w, d)
        t["write_s"] = json.loads((d / f"inner_{w}.json").read_text())["write_s"]
        log(f"  {what} {w:9s} {t['wall_s']:7.2f} s wall {t['write_s']:7.2f} s write {t['cpu_s']:7.2f} s cpu "
            f"{t['peak_mb']:7.0f} MB   (load {t['load_before']:.1f})")
        return t

    log(f"{kind}: {args.dates} dates of {args.size} x {args.size}, chunk {args.chunk}: warm-up ...")
    for w in WRITERS:
        run(w, "warm-up")
    for i in range(args.repeat):
        for w in (WRITERS if i % 2 == 0 else WRITERS[::-1]):
            runs[w].append(run(w, f"round {i + 1}"))
    name = "net_radiation" if kind == "float32" else "quality"
    check = compare(outs["xarray"], outs["radledger"], name)
    med = {w: {k: statistics.median(r[k] for r in v) for k in ("wall_s", "write_s", "cpu_s", "peak_mb")}
           | {"wall_min": min(r["wall_s"] for r in v), "wall_max": max(r["wall_s"] for r in v)}
           for w, v in runs.items()}
    if not args.keep:
        for p in outs.values():
            p.unlink(missing_ok=True)
    return {"kind": kind, "size": args.size, "dates": args.dates, "chunk": args.chunk, "repeat": args.repeat,
            "runs": runs, "median": med, "check": check,
            "max_load_before": max(r["load_before"] for v in runs.values() for r in v),
            "time_ratio_xarray_over_radledger": med["xarray"]["wall_s"] / med["radledger"]["wall_s"],
            "write_ratio_xarray_over_radledger": med["xarray"]["write_s"] / med["radledger"]["write_s"],
            "peak_ratio_radledger_over_xarray": med["radledger"]["peak_mb"] / med["xarray"]["peak_mb"]}


def table(r: dict) -> str:
    m, c = r["median"], r["check"]
    mb = r["size"] ** 2 * r["dates"] * (4 if r["kind"] == "float32" else 1) / 2**20
    lines = [f"{r['kind']} stack: {r['dates']} dates x {r['size']} x {r['size']} ({mb:.0f} MB of values), "
             f"chunk {r['chunk']}, median of {r['repeat']} (after one warm-up each); "
             f"1-min load average before runs <= {r['max_load_before']:.1f}",
             f"  {'':22s} {'wall s':>8s} {'(min-max)':>15s} {'write s':>8s} {'cpu s':>8s} {'peak MB':>9s}"]
    for w in WRITERS:
        lines.append(f"  {w:22s} {m[w]['wall_s']:8.2f} {m[w]['wall_min']:7.2f}-{m[w]['wall_max']:<7.2f}"
                     f" {m[w]['write_s']:8.2f} {m[w]['cpu_s']:8.2f} {m[w]['peak_mb']:9.0f}")
    b = c["bytes"]
    lines += [
        f"  time ratio xarray / radledger      {r['time_ratio_xarray_over_radledger']:6.2f}  (whole process; "
        f"write only: {r['write_ratio_xarray_over_radledger']:.2f}; >1: radledger faster)",
        f"  peak-memory ratio radledger/xarray {r['peak_ratio_radledger_over_xarray']:6.2f}",
        f"  decoded values identical (bits)    {'yes' if c['values_identical'] else 'NO'}"
        f"   layout: {'same' if 'layout_differs' not in c else c['layout_differs']}",
        f"  stored chunks with identical bytes {c['chunks_same_bytes']} of {c['chunks']}"
        f"   file sizes {b['xarray'] / 2**20:.1f} MB vs {b['radledger'] / 2**20:.1f} MB",
    ]
    return "\n".join(lines)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--size", type=int, default=2048, help="grid edge, pixels (default 2048)")
    ap.add_argument("--dates", type=int, default=48, help="products (dates) in the stack (default 48)")
    ap.add_argument("--kind", choices=["float32", "uint8", "both"], default="both")
    ap.add_argument("--chunk", type=int, default=1024, help="grid.chunk: the stack's chunk edge (default 1024)")
    ap.add_argument("--repeat", type=int, default=3, help="timed rounds after the warm-up (default 3)")
    ap.add_argument("--keep", action="store_true", help="keep both stacks under benchmarks/_work/")
    ap.add_argument("--json", metavar="FILE", help="also write the numbers as JSON")
    ap.add_argument("--write", choices=WRITERS, help=argparse.SUPPRESS)   # child process: one write
    ap.add_argument("--dir", help=argparse.SUPPRESS)
    ap.add_argument("--out", help=argparse.SUPPRESS)
    ap.add_argument("--inner", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.write:
        seconds = write_once(args.write, Path(args.dir), Path(args.out), args.kind, args.chunk)
        Path(args.inner).write_text(json.dumps({"write_s": seconds}))
        return 0
    if args.repeat < 1:
        ap.error("--repeat must be at least 1")
    if not Path("/usr/bin/time").exists():
        sys.exit("bench_netcdf: needs GNU time at /usr/bin/time")

    src_before = source_state()
    print(f"radledger source: commit {src_before['commit']}"
          + (" with uncommitted changes under src/" if src_before["src_dirty"] else "")
          + f"; 1-min load average now {loadavg():.2f}")
    results = []
    try:
        for kind in (["float32", "uint8"] if args.kind == "both" else [args.kind]):
            results.append(bench_kind(kind, args))
    except RunFailed as e:
        print(f"\nFAILED: {e}", file=sys.stderr)
        return 1
    if source_state() != src_before:
        print("WARNING: radledger's source changed during the benchmark; the numbers mix versions - rerun",
              file=sys.stderr)
    print()
    print(f"radledger commit {src_before['commit']}" + (" + uncommitted src/ changes" if src_before["src_dirty"] else "")
          + f", {os.cpu_count()} CPUs")
    for r in results:
        print(table(r))
        print()
    if args.json:
        import h5py

        machine = {"cpus": os.cpu_count(), "python": platform.python_version(), "h5py": h5py.__version__,
                   "hdf5": h5py.version.hdf5_version, "rasterio": rasterio.__version__}
        Path(args.json).write_text(json.dumps({"machine": machine, "source": src_before, "results": results},
                                              indent=2, default=str))
    return 0 if all(r["check"]["values_identical"] for r in results) else 1


if __name__ == "__main__":
    sys.exit(main())
