"""Terrain benchmark: the static layers of an N x N DEM, and what terrain adds to a scene and a day.

    python benchmarks/bench_terrain.py --size 4096 [--repeat 3] [--chunk 1024] [--skip-static]

Uses the synthetic scene of bench_scene.py (cached under benchmarks/_work/N/) plus a synthetic
mountain DEM on the same 30 m UTM grid (ridges 5-9 km apart, ~2400 m of relief, slopes up to
~45 deg; cached as dem.tif).  It times, in this process:

1. the static terrain layers (``methods.terrain: shading``: slope, aspect, sky-view factor and 36
   horizon angles) once, from scratch;
2. one scene with the four default products: ``terrain: none`` (the fused loop) against
   ``terrain: slope`` and ``terrain: shading`` with the static layers already written, alternating,
   median of --repeat rounds (the scene's job only, after one warm-up each);
3. one FAO-56 day the same way.

Prints the times and ratios; nothing is asserted.  The figures measured so far are in the
README's section on mountain basins.
"""

from __future__ import annotations

import argparse
import shutil
import statistics
import sys
import time
from pathlib import Path

import numpy as np
import rasterio
from rasterio.windows import Window

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
from bench_scene import BLOCK, SCENE_TIME, _profile, make_scene  # noqa: E402

from radledger.config import load_config  # noqa: E402
from radledger.execution.events import RunEvents  # noqa: E402
from radledger.runner import run_config  # noqa: E402

DAY = SCENE_TIME[:10]


def make_dem(d: Path, n: int) -> Path:
    """A mountain DEM (float32 metres): crossing ridges plus smaller spurs, generated strip by strip."""
    path = d / "dem.tif"
    if path.exists():
        return path
    res = 30.0
    x = np.arange(n) * res
    with rasterio.open(path, "w", **_profile(n, "float32", 3)) as dst:
        for r0 in range(0, n, BLOCK):
            y = (np.arange(r0, min(n, r0 + BLOCK)) * res)[:, None]
            z = (2000.0 + 700.0 * np.sin(2 * np.pi * x / 9000.0) * np.cos(2 * np.pi * y / 7000.0)
                 + 400.0 * np.sin(2 * np.pi * (x + 0.6 * y) / 5200.0)
                 + 120.0 * np.cos(2 * np.pi * (0.8 * x - y) / 1900.0))
            dst.write(z.astype(np.float32), 1, window=Window(0, r0, n, z.shape[0]))
    return path


def write_config(d: Path, terrain: str, chunk: int, out: str, *, day: bool) -> Path:
    cfg = d / f"terrain_{terrain}_{'day' if day else 'scene'}.yaml"
    dated = (f"""\
days:
  - date: {DAY}
    shortwave_down: {{path: rs.tif, scale: 0.03}}
    air_temperature_max: {{path: ta.tif, offset: 5}}
    air_temperature_min: {{path: ta.tif, offset: -10}}
    vapour_pressure: ea.tif
    albedo: albedo.tif
""" if day else f"""\
scenes:
  - time: {SCENE_TIME}
    albedo: albedo.tif
    surface_temperature: lst.tif
    air_temperature: ta.tif
    vapour_pressure: ea.tif
    shortwave_down: rs.tif
""")
    cfg.write_text(f"""\
title: radledger terrain benchmark {d.name} x {d.name} (synthetic)
grid: {{like: land_cover, chunk: {chunk}}}
layers:
  surface_temperature: {{units: K}}
  air_temperature: {{units: K}}
  vapour_pressure: {{units: kPa}}
  shortwave_down: {{units: W m-2}}
static: {{land_cover: land_cover.tif, elevation: dem.tif}}
emissivity: {{table: emissivity.csv}}
methods: {{sky_emissivity: brutsaert, clouds: none, terrain: {terrain}}}
{dated}output: {{directory: {out}, products: [net_radiation, net_shortwave, net_longwave, quality]}}
""")
    return cfg


class Timer(RunEvents):
    def __init__(self):
        self.t0 = time.perf_counter()
        self.stages, self.jobs = {}, []

    def started(self, plan, engine):
        self.t0 = self.mark = time.perf_counter()

    def stage_done(self, stage, written, skipped=0):
        now = time.perf_counter()
        self.stages[stage] = now - self.mark
        self.mark = now

    def job_done(self, result):
        now = time.perf_counter()
        self.jobs.append(now - self.mark)
        self.mark = now


def job_time(cfg: Path, out: Path) -> float:
    """Wall time of the config's one job, its static terrain layers (if any) already written."""
    for kind in ("scenes", "days"):
        shutil.rmtree(out / kind, ignore_errors=True)
    t = Timer()
    run_config(load_config(cfg), events=t)
    return t.jobs[0]


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--size", type=int, default=4096)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--chunk", type=int, default=1024)
    ap.add_argument("--skip-static", action="store_true", help="reuse static layers written before")
    args = ap.parse_args(argv)
    n = args.size
    d = make_scene(n)
    make_dem(d, n)
    out = {t: d / f"out_terrain_{t}" for t in ("none", "slope", "shading")}
    if not args.skip_static:
        shutil.rmtree(out["shading"] / "terrain", ignore_errors=True)
        cfg = write_config(d, "shading", args.chunk, out["shading"].name, day=False)
        timer = Timer()
        t0 = time.perf_counter()
        run_config(load_config(cfg), events=timer)
        print(f"static terrain layers (shading) of a {n} x {n} DEM, chunk {args.chunk}: "
              f"{timer.stages['terrain']:.1f} s wall (whole first run {time.perf_counter() - t0:.1f} s)")
    for day in (False, True):
        what = "day" if day else "scene"
        cfgs = {t: write_config(d, t, args.chunk, out[t].name, day=day) for t in out}
        for t, c in cfgs.items():     # warm-up (and the static layers of `slope`)
            run_config(load_config(c))
        times = {t: [] for t in cfgs}
        for i in range(args.repeat):
            order = list(cfgs) if i % 2 == 0 else list(cfgs)[::-1]
            for t in order:
                times[t].append(job_time(cfgs[t], out[t]))
        med = {t: statistics.median(v) for t, v in times.items()}
        print(f"one {what} ({n} x {n}, four products), median of {args.repeat}:")
        for t in cfgs:
            print(f"  terrain {t:8s} {med[t]:7.2f} s  x{med[t] / med['none']:.2f}  "
                  f"(runs: {', '.join(f'{v:.2f}' for v in times[t])})")


if __name__ == "__main__":
    main()
