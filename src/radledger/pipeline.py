"""The graph of a scene or day, and the run that computes it.

One task per chunk: it reads every input window once, runs the kernel,
writes every product (and its overview levels) into the intermediates and
returns only a few summary numbers.  Nothing large travels between tasks, so
memory is a couple of chunks per core whatever the scene size, and the same
graph runs on threads or on a cluster.  Building the graph computes nothing.
"""

from __future__ import annotations

import datetime as dt
import sys
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from dask.base import tokenize

from . import __version__
from .engine import Engine
from .grid import TargetGrid
from .fused import fused_applies
from .kernels import day_kernel, scene_kernel, sun_may_be_down
from .overviews import mean_pyramid, overview_factors, pyramid_block
from .plan import Job, Plan
from .products import QUALITY_BITS, product_info
from .writers import ProductFile, read_tags

__all__ = ["job_graph", "run_job", "JobResult", "job_targets", "chunk_products"]


def job_targets(job: Job) -> dict[str, Path]:
    """Every product of a job and its final path (a scene's day product included)."""
    targets = dict(job.outputs)
    if job.day_output is not None:
        targets["daily_net_radiation"] = job.day_output
    return targets


def chunk_products(job: Job, grid: TargetGrid, window, names: tuple[str, ...], *,
                   reuse: bool = False) -> dict[str, np.ndarray]:
    """Every requested product of one chunk window (``reuse``: see :func:`kernels.scene_kernel`)."""
    arrays = {k: s.read(grid, window) for k, s in job.sources.items()}
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        if job.kind == "scenes":
            need = job.needs_lonlat
            if need and fused_applies(job.params, arrays):
                # the fused path needs coordinates only to flag sun-down pixels: check the corners
                lon_c, lat_c = grid.lonlat_corners(window)
                need = sun_may_be_down(lat_c, lon_c, job.params)
            lon, lat = grid.lonlat(window) if need else (None, None)
            out = scene_kernel(arrays, lon, lat, job.params, reuse=reuse)
        else:
            _, lat = grid.lonlat(window)
            out = day_kernel(arrays, lat, job.params)
    return {n: out[n] for n in names}


def _chunk_task(job: Job, grid: TargetGrid, window, names, sinks, factors) -> dict:
    """Compute one chunk, write it (and its overview blocks), return its summary."""
    products = chunk_products(job, grid, window, names, reuse=True)   # written out below, at once
    r0, c0 = int(window.row_off), int(window.col_off)
    h, w = int(window.height), int(window.width)
    summary = {}
    for n, a in products.items():
        full, levels = sinks[n]
        full[slice(r0, r0 + h), slice(c0, c0 + w)] = a
        if n == "quality":
            blocks = pyramid_block(a[None], (n,), tuple(levels)) if levels else {}
            blocks = {f: v for (_, f), v in blocks.items()}
            summary[n] = (int(np.count_nonzero(a & QUALITY_BITS["out_of_range"])),
                          int(np.count_nonzero(a & QUALITY_BITS["input_missing"])))
        else:
            blocks, summary[n] = mean_pyramid(a, tuple(levels) or (2,))
            blocks = {f: blocks[f] for f in levels}
        for f, block in blocks.items():
            bh, bw = block.shape
            levels[f][slice(r0 // f, r0 // f + bh), slice(c0 // f, c0 // f + bw)] = block
    return summary


def _merge_summaries(parts: list[dict], names) -> dict[str, dict[str, float]]:
    out = {}
    for n in names:
        vals = [p[n] for p in parts]
        if n == "quality":
            out[n] = {"out_of_range": sum(v[0] for v in vals), "input_missing": sum(v[1] for v in vals)}
        else:
            count = sum(v[3] for v in vals)
            out[n] = {"min": min(v[0] for v in vals) if count else np.nan,   # (min, max, sum, count) per chunk
                      "max": max(v[1] for v in vals) if count else np.nan,
                      "mean": sum(v[2] for v in vals) / count if count else np.nan, "valid": count}
    return out


def job_graph(job: Job, grid: TargetGrid, names: tuple[str, ...], sinks: dict, factors=()) -> tuple[dict, list]:
    """The task graph of a job (one task per chunk) and its output keys; computes nothing.

    Written out directly: ``dask.delayed`` would traverse and tokenize the job
    (with its lookup table) once per chunk, which cost more than the chunk's
    arithmetic on small grids.
    """
    name = f"radledger-{job.kind}-{job.label}-" + tokenize(job.settings_hash, names, grid.describe())
    dsk = {(name, k): (_chunk_task, job, grid, win, names, sinks, factors)
           for k, win in enumerate(grid.windows())}
    return dsk, list(dsk)


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
    targets = job_targets(job)
    todo = {n: p for n, p in targets.items() if overwrite or not is_current(p, job.settings_hash)}
    result.skipped = [p for n, p in targets.items() if n not in todo]
    if not todo:
        return result
    names = tuple(todo)
    in_task = tuple(f for f in overview_factors(plan.grid.width, plan.grid.height) if plan.grid.chunk % f == 0)
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
                                 compression=plan.cfg.output.compression, in_task=in_task))
    try:
        for f in files:
            f.create(keep_open=not engine.distributed)
        sinks = {n: (f.sink(engine.lock(f.intermediate)),
                     {fac: f.sink(engine.lock(f.level_files[fac]), factor=fac) for fac in f.in_task})
                 for n, f in zip(names, files)}
        dsk, keys = job_graph(job, plan.grid, names, sinks, in_task)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            parts = engine.get(dsk, keys, label=f"{job.kind[:-1]} {job.label}")
        for f in files:
            result.written.append(f.finish())
    except BaseException:
        for f in files:
            f.abort()
        raise
    result.summary = _merge_summaries(parts, names)
    return result


def print_summary(results: list[JobResult], stream=None) -> None:
    """The closing table: min / mean / max per product and job."""
    stream = stream or sys.stdout
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
