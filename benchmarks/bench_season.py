"""Season benchmark: `radledger run` over a season against a hand-written per-day loop.

    python benchmarks/bench_season.py [--size 2048] [--days 92] [--days2 184] [--repeat 2] [--chunk 1024]
                                      [--radledger-env KEY=VALUE] [--json FILE]

It makes (once; cached under benchmarks/_work/season-N/) a synthetic basin: an N x N DEM at 30 m
in UTM 11N, and daily weather as CF NetCDF stacks on a 0.01 deg lon/lat grid covering it (Tmax,
Tmin in degC, vapour pressure in kPa, shortwave in MJ m-2 day-1; invented smooth fields), for up
to --days2 days.  radledger runs a config with one `dates:` range over the stacks, the net
radiation product and a season mean composite; `plain_season.py` does the same by hand (warp each
day's four grids, FAO-56 in NumPy, one COG per day with ALL_CPUS, a running mean).  Both run as
separate processes under `/usr/bin/time -v` (wall time, peak RSS): one warm-up each, then
--repeat rounds alternating which goes first.  It prints medians, the ratios, the growth of peak
memory and time from --days to --days2, and the largest difference between the two composites.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import rasterio
import xarray as xr
import yaml
from pyproj import Transformer
from rasterio.transform import from_origin

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
from bench_scene import RunFailed, loadavg, max_abs_diff, source_state, timed  # noqa: E402

WORK = HERE / "_work"
PLAIN = HERE / "plain_season.py"
GEN_VERSION = 1
CRS, RES, ORIGIN = "EPSG:32611", 30.0, (300000.0, 4300000.0)
STEP = 0.01        # weather grid [deg]
START = "2026-06-01"


def make_basin(n: int, days: int, log=print) -> Path:
    d = WORK / f"season-{n}"
    marker = d / "basin.json"
    if marker.exists():
        meta = json.loads(marker.read_text())
        if meta.get("version") == GEN_VERSION and meta.get("days", 0) >= days:
            return d
    d.mkdir(parents=True, exist_ok=True)
    log(f"making the {n} x {n} basin and {days} days of weather in {d} ...")
    yy, xx = np.mgrid[0:n, 0:n].astype(np.float32) / n
    dem = 1200 + 900 * np.sin(3 * xx) * np.cos(2 * yy) + 400 * yy                # invented relief [m]
    profile = {"driver": "GTiff", "width": n, "height": n, "count": 1, "dtype": "float32", "crs": CRS,
               "transform": from_origin(*ORIGIN, RES, RES), "tiled": True, "blockxsize": 512, "blockysize": 512,
               "compress": "zstd", "predictor": 3}
    with rasterio.open(d / "dem.tif", "w", **profile) as dst:
        dst.write(dem.astype(np.float32), 1)
    tr = Transformer.from_crs(CRS, "EPSG:4326", always_xy=True)
    x0, y0 = ORIGIN
    lon, lat = tr.transform([x0, x0 + n * RES, x0, x0 + n * RES], [y0, y0, y0 - n * RES, y0 - n * RES])
    lon0 = np.floor(min(lon) / STEP) * STEP - 2 * STEP
    lat1 = np.ceil(max(lat) / STEP) * STEP + 2 * STEP
    nx = int(np.ceil((max(lon) - lon0) / STEP)) + 4
    ny = int(np.ceil((lat1 - min(lat)) / STEP)) + 4
    lons = lon0 + STEP * (np.arange(nx) + 0.5)
    lats = lat1 - STEP * (np.arange(ny) + 0.5)
    times = pd.date_range(START, periods=days, freq="D")
    k = np.arange(days)[:, None, None]
    gy, gx = np.meshgrid(np.arange(ny), np.arange(nx), indexing="ij")
    season = np.sin(np.pi * k / max(days, 1))
    fields = {"tmax": 24 + 6 * season + 0.05 * gx - 0.04 * gy + 2 * np.sin(k / 3.0),
              "tmin": 9 + 5 * season + 0.03 * gx - 0.02 * gy + 1.5 * np.cos(k / 4.0),
              "vp": 1.1 + 0.4 * season + 0.002 * gx + 0.001 * gy,
              "rs": 22 + 6 * season + 0.02 * gx - 0.03 * gy - 4 * (np.sin(k * 1.7) > 0.8)}
    units = {"tmax": "degC", "tmin": "degC", "vp": "kPa", "rs": "MJ m-2 day-1"}
    for v, a in fields.items():
        ds = xr.Dataset({v: (("time", "lat", "lon"), a.astype(np.float32), {"units": units[v]})},
                        coords={"time": times, "lat": ("lat", lats, {"units": "degrees_north"}),
                                "lon": ("lon", lons, {"units": "degrees_east"})})
        ds.to_netcdf(d / f"{v}.nc", engine="h5netcdf")
    marker.write_text(json.dumps({"version": GEN_VERSION, "days": days}))
    return d


def write_config(d: Path, days: int, chunk: int) -> Path:
    end = (pd.Timestamp(START) + pd.Timedelta(days=days - 1)).strftime("%Y-%m-%d")
    cfg = {"title": "season benchmark (invented basin)",
           "grid": {"like": "elevation", "chunk": chunk}, "static": {"elevation": "dem.tif"},
           "days": [{"dates": {"start": START, "end": end},
                     "shortwave_down": {"path": "rs.nc", "variable": "rs"},
                     "air_temperature_max": {"path": "tmax.nc", "variable": "tmax"},
                     "air_temperature_min": {"path": "tmin.nc", "variable": "tmin"},
                     "vapour_pressure": {"path": "vp.nc", "variable": "vp"}}],
           "composites": [{"name": "season", "from": "days", "start": START, "end": end, "statistics": ["mean"]}],
           "output": {"directory": f"out_radledger_{days}", "products": ["net_radiation"]}}
    path = d / f"season_{days}.yaml"
    path.write_text(yaml.safe_dump(cfg, sort_keys=False))
    return path


def bench_days(d: Path, days: int, args, radledger_cmd, env, log=print) -> dict:
    cfg = write_config(d, days, args.chunk)
    plain_out = d / f"out_plain_{days}"
    cmds = {"radledger": [*radledger_cmd, "run", "--quiet", "--overwrite", str(cfg)],
            "plain": [sys.executable, str(PLAIN), str(d), str(plain_out), str(days)]}
    tmp = d / "times"
    tmp.mkdir(exist_ok=True)
    runs = {"radledger": [], "plain": []}
    log(f"{days} days: warm-up ...")
    for name in cmds:
        timed(cmds[name], f"{name}-warm", tmp, env=env if name == "radledger" else None)
    for r in range(args.repeat):
        order = ["radledger", "plain"] if r % 2 == 0 else ["plain", "radledger"]
        for name in order:
            t = timed(cmds[name], f"{name}-{r}", tmp, env=env if name == "radledger" else None)
            runs[name].append(t)
            log(f"  round {r + 1} {name:9s} {t['wall_s']:7.2f} s wall {t['cpu_s']:7.2f} s cpu "
                f"{t['peak_mb']:7.0f} MB (load {t['load_before']:.1f})")
    med = {n: {k: statistics.median(x[k] for x in v) for k in ("wall_s", "cpu_s", "peak_mb")}
           for n, v in runs.items()}
    diff = max_abs_diff(d / f"out_radledger_{days}" / "composites" / "season_mean.tif",
                        plain_out / "season_mean.tif")
    return {"days": days, "median": med, "runs": runs, "max_abs_diff": diff[0], "nan_mismatch": diff[1]}


def report(r: dict) -> str:
    m = r["median"]
    rl, pl = m["radledger"], m["plain"]
    return "\n".join([
        f"{r['days']} days:", "                 wall s   cpu s   peak MB",
        f"  radledger     {rl['wall_s']:7.2f} {rl['cpu_s']:7.2f} {rl['peak_mb']:9.0f}",
        f"  plain         {pl['wall_s']:7.2f} {pl['cpu_s']:7.2f} {pl['peak_mb']:9.0f}",
        f"  time ratio plain / radledger      {pl['wall_s'] / rl['wall_s']:.2f}  (>1: radledger faster)",
        f"  peak-memory ratio radledger/plain {rl['peak_mb'] / pl['peak_mb']:.2f}",
        f"  max |composite mean difference|   {r['max_abs_diff']:.2e} MJ m-2 day-1 "
        f"(NaN in one only: {r['nan_mismatch']} px)"])


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--size", type=int, default=2048)
    ap.add_argument("--days", type=int, default=92)
    ap.add_argument("--days2", type=int, default=184, help="a longer season for the growth figures (0: none)")
    ap.add_argument("--repeat", type=int, default=2)
    ap.add_argument("--chunk", type=int, default=1024)
    ap.add_argument("--radledger-env", metavar="KEY=VALUE", action="append", default=[])
    ap.add_argument("--json", metavar="FILE")
    args = ap.parse_args(argv)
    env = {**os.environ, **dict(kv.split("=", 1) for kv in args.radledger_env)}
    radledger_cmd = [sys.executable, "-m", "radledger.cli"]
    print(f"radledger {source_state()}; {os.cpu_count()} CPUs; 1-min load {loadavg():.1f}")
    d = make_basin(args.size, max(args.days, args.days2))
    results = []
    for days in [args.days] + ([args.days2] if args.days2 else []):
        try:
            results.append(bench_days(d, days, args, radledger_cmd, env))
        except RunFailed as exc:
            print(exc, file=sys.stderr)
            return 1
        print(report(results[-1]))
    if len(results) == 2:
        a, b = (r["median"]["radledger"] for r in results)
        print(f"growth {args.days} -> {args.days2} days (radledger): time x{b['wall_s'] / a['wall_s']:.2f}, "
              f"peak memory x{b['peak_mb'] / a['peak_mb']:.2f}")
    if args.json:
        Path(args.json).write_text(json.dumps(results, indent=1, default=str))
    return 0


if __name__ == "__main__":
    sys.exit(main())
