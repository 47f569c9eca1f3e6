"""Lazy products for scenes and days, and the run that stores them.

For each job the graph has one task per chunk: it reads every input window
once, runs the kernel, and returns all products of that chunk stacked; one
``dask.compute`` stores every product and the summary statistics from the
same tasks.  Nothing is computed while the graph is built.
"""

from __future__ import annotations

import datetime as dt
import sys
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import dask.array as da
from dask.base import tokenize
import numpy as np

from . import __version__
from .engine import Engine
from .grid import TargetGrid
from .kernels import day_kernel, scene_kernel
from .plan import Job, Plan
from .products import QUALITY_BITS, product_info
from .writers import ProductFile, read_tags

__all__ = ["job_stack", "run_job", "JobResult", "product_order"]


def product_order(job: Job) -> tuple[str, ...]:
    names = tuple(job.outputs)
    if job.day_output is not None:
        names += ("daily_net_radiation",)
    return names


def _block(job: Job, grid: TargetGrid, window, names: tuple[str, ...]) -> np.ndarray:
    arrays = {k: s.read(grid, window) for k, s in job.sources.items()}
    if job.kind == "scenes":
        lon, lat = grid.lonlat(window) if job.needs_lonlat else (None, None)
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            out = scene_kernel(arrays, lon, lat, job.params)
    else:
        _, lat = grid.lonlat(window)
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            out = day_kernel(arrays, lat, job.params)
    h, w = int(window.height), int(window.width)
    stack = np.empty((len(names), h, w), dtype=np.float32)
    for i, n in enumerate(names):
        stack[i] = out[n]
    return stack


def job_stack(job: Job, grid: TargetGrid, names: tuple[str, ...] | None = None) -> da.Array:
    """The lazy (n_products, height, width) float32 stack of a job; builds the graph only.

    One task per chunk, written out directly: ``dask.delayed`` would tokenize
    the job (with its lookup table) once per chunk, which cost more than the
    chunk's arithmetic on small grids.
    """
    names = names or product_order(job)
    name = f"radledger-{job.kind}-{job.label}-" + tokenize(job.settings_hash, names, grid.describe())
    ncols = len(grid.chunks[1])
    dsk = {}
    for k, win in enumerate(grid.windows()):
        dsk[(name, 0, k // ncols, k % ncols)] = (_block, job, grid, win, names)
    return da.Array(dsk, name, chunks=((len(names),),) + grid.chunks, dtype=np.float32,
                    meta=np.empty((0, 0, 0), np.float32))


@dataclass
class JobResult:
    job: Job
    written: list[Path] = field(default_factory=list)
    skipped: list[Path] = field(default_factory=list)
    summary: dict[str, dict[str, float]] = field(default_factory=dict)


def _tags(plan: Plan, job: Job, name: str, kind: str, extra: dict | None = None) -> dict[str, str]:
    info = product_info("net_radiation" if name == "daily_net_radiation" else name, kind)
    m = plan.cfg.methods
    if kind == "scenes":
        method = (f"Rn = (1 - albedo) Rs - eps_s (sigma Ts^4 - Rld); Rld = eps_sky sigma Ta^4; "
                  f"sky emissivity {m.sky_emissivity}; clouds {m.clouds}; clear-sky shortwave "
                  f"{m.clear_sky_shortwave}; sigma 5.670374419e-8 (CODATA 2018)")
        when = job.when.strftime("%Y-%m-%dT%H:%M:%SZ")
    else:
        method = "FAO-56 (Allen et al. 1998) eqs 21, 37, 38, 39, 40; 24-hour total"
        when = job.when.isoformat()
    tags = {
        "quantity": name, "long_name": info.long_name, "units": info.units,
        "standard_name": info.standard_name or "", "positive": info.positive, "method": method,
        "time": when, "time_kind": kind, "title": plan.cfg.title,
        "inputs": "; ".join(f"{k}={s.path}" for k, s in sorted(job.sources.items())),
        "software": f"radledger {__version__}", "settings_hash": job.settings_hash,
        "created": dt.datetime.now(dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ"),
    }
    if name == "quality":
        tags["flag_masks"] = " ".join(str(v) for v in QUALITY_BITS.values())
        tags["flag_meanings"] = " ".join(QUALITY_BITS)
    if extra:
        tags.update(extra)
    return tags


def is_current(path: Path, settings_hash: str) -> bool:
    """A finished product with the same inputs and settings exists at ``path``."""
    return path.exists() and read_tags(path).get("settings_hash") == settings_hash


def run_job(plan: Plan, job: Job, engine: Engine, *, overwrite: bool = False) -> JobResult:
    """Compute and write every product of ``job`` that is not already current."""
    result = JobResult(job)
    targets: dict[str, Path] = dict(job.outputs)
    if job.day_output is not None:
        targets["daily_net_radiation"] = job.day_output
    todo = {n: p for n, p in targets.items() if overwrite or not is_current(p, job.settings_hash)}
    result.skipped = [p for n, p in targets.items() if n not in todo]
    if not todo:
        return result
    names = tuple(todo)
    stack = job_stack(job, plan.grid, names)
    files = []
    for n in names:
        kind = "days" if n == "daily_net_radiation" else job.kind
        info = product_info("net_radiation" if n == "daily_net_radiation" else n, kind)
        extra = None
        if n == "daily_net_radiation":
            total = "daytime total" if plan.cfg.methods.scene_to_day == "sinusoidal" else "24-hour total"
            extra = {"method": f"scene to day: {plan.cfg.methods.scene_to_day} ({total}) from the "
                               f"{job.when.strftime('%Y-%m-%dT%H:%MZ')} scene", "daily_total": total,
                     "time": job.when.date().isoformat(), "time_kind": "days"}
        files.append(ProductFile(final=todo[n], grid=plan.grid, dtype=info.dtype,
                                 tags=_tags(plan, job, n, kind, extra), band_description=info.long_name,
                                 compression=plan.cfg.output.compression))
    try:
        for f in files:
            f.create(keep_open=not engine.distributed)
        sinks = [f.sink(engine.lock(f.intermediate)) for f in files]
        store = da.store([stack[i] for i in range(len(names))], sinks, lock=False, compute=False)
        stats = {n: _summary(stack[i], n) for i, n in enumerate(names)}
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            _, stats = engine.compute(store, stats, label=f"{job.kind[:-1]} {job.label}")
        for f in files:
            result.written.append(f.finish())
    except BaseException:
        for f in files:
            f.abort()
        raise
    result.summary = {n: {k: float(v) for k, v in s.items()} for n, s in stats.items()}
    return result


def _summary(a: da.Array, name: str) -> dict:
    if name == "quality":
        q = a.astype(np.uint8)
        return {"out_of_range": ((q & QUALITY_BITS["out_of_range"]) > 0).sum(),
                "input_missing": ((q & QUALITY_BITS["input_missing"]) > 0).sum()}
    return {"min": da.nanmin(a), "mean": da.nanmean(a), "max": da.nanmax(a),
            "valid": da.isfinite(a).sum()}


def print_summary(results: list[JobResult], stream=sys.stdout) -> None:
    """The closing table: min / mean / max per product and job."""
    rows = []
    for r in results:
        for n, s in r.summary.items():
            if "min" in s:
                rows.append((f"{r.job.kind[:-1]} {r.job.label}", n, f"{s['min']:.4g}", f"{s['mean']:.4g}",
                             f"{s['max']:.4g}", f"{int(s['valid'])}"))
            else:
                rows.append((f"{r.job.kind[:-1]} {r.job.label}", n, "", "", "",
                             f"{int(s['out_of_range'])} out of range, {int(s['input_missing'])} missing input"))
    if not rows:
        return
    head = ("job", "product", "min", "mean", "max", "valid px / flags")
    widths = [max(len(str(x[i])) for x in rows + [head]) for i in range(len(head))]
    line = "  ".join(h.ljust(w) for h, w in zip(head, widths))
    print(line, file=stream)
    print("  ".join("-" * w for w in widths), file=stream)
    for row in rows:
        print("  ".join(str(c).ljust(w) for c, w in zip(row, widths)), file=stream)
