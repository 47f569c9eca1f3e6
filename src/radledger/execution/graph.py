"""The graph of a scene or day, and the run that computes it.

One task per chunk: it reads every input window once, runs the kernel,
writes every product (and its overview levels) into the intermediates and
returns only a small summary.  Nothing large travels between tasks, so
memory is a couple of chunks per core whatever the scene size, and the same
graph runs on threads or on a cluster.  Building the graph computes nothing.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from dask.base import tokenize

from ..grid import TargetGrid
from ..io.cog import ProductFile, is_current
from ..io.overviews import mean_pyramid, nearest_levels, overview_factors
from ..kinds import TimeKind
from ..model.kernels import day_kernel, scene_kernel
from ..model.sun import sun_geometry, sun_up_everywhere
from ..physics import CLEARNESS_MIN_SUN_ELEVATION
from ..model.products import SCENE_DAY_PRODUCT, Product, product_info
from ..planning.plan import Job, Plan
from ..planning.provenance import job_product_tags
from .engine import Engine

__all__ = ["job_graph", "run_job", "JobResult", "chunk_products", "ValueSummary", "FlagSummary",
           "target_product"]


@dataclass(frozen=True)
class ValueSummary:
    """Finite values of one product in one chunk (or merged over chunks)."""
    min: float
    max: float
    sum: float
    count: int

    @property
    def mean(self) -> float:
        return self.sum / self.count if self.count else float("nan")

    def merge(self, other: "ValueSummary") -> "ValueSummary":
        if not other.count:
            return self
        if not self.count:
            return other
        return ValueSummary(min(self.min, other.min), max(self.max, other.max), self.sum + other.sum,
                            self.count + other.count)


@dataclass(frozen=True)
class FlagSummary:
    """Pixels with an input out of range or missing, in one chunk (or merged over chunks)."""
    out_of_range: int
    input_missing: int

    def merge(self, other: "FlagSummary") -> "FlagSummary":
        return FlagSummary(self.out_of_range + other.out_of_range, self.input_missing + other.input_missing)


def target_product(job: Job, name: str) -> Product:
    """What product ``name`` of ``job`` is (a scene's ``net_radiation_from_scene`` is a day product)."""
    if name == SCENE_DAY_PRODUCT:
        return product_info("net_radiation", TimeKind.DAYS)
    return product_info(name, job.kind)


def chunk_products(job: Job, grid: TargetGrid, window, names: tuple[str, ...], *,
                   reuse: bool = False) -> dict[str, np.ndarray]:
    """Every requested product of one chunk window (``reuse``: see :func:`model.kernels.scene_kernel`)."""
    arrays = {}
    for s in job.sources.values():
        arrays.update(s.read_layers(grid, window))
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        if job.kind is TimeKind.SCENES:
            p = job.params
            sun = sun_geometry(grid, window, p.time) if _sun_needed(p, grid, window) else None
            lonlat = grid.lonlat(window) if p.scene_to_day != "none" else None
            out = scene_kernel(arrays, sun, lonlat, p, reuse=reuse)
        else:
            _, lat = grid.lonlat(window)
            out = day_kernel(arrays, lat, job.params)
    return {n: out[n] for n in names}


def _sun_needed(p, grid: TargetGrid, window) -> bool:
    """Whether a scene chunk needs the sun per pixel.

    Where only the quality bits need it (sun down, sun low) and the sun stands
    well above the low-sun limit at every corner of the chunk, no pixel can
    carry those bits: the per-pixel pass is skipped (1 deg of margin).
    """
    needs = p.needs
    if not needs.sun:
        return False
    if needs.clear_sky or p.scene_to_day != "none":
        return True
    return not sun_up_everywhere(grid, window, p.time, min_elevation=CLEARNESS_MIN_SUN_ELEVATION + 1.0)


def _chunk_task(job: Job, grid: TargetGrid, window, names, sinks) -> dict:
    """Compute one chunk, write it (and its overview blocks), return its summary."""
    products = chunk_products(job, grid, window, names, reuse=True)   # written out below, at once
    r0, c0 = int(window.row_off), int(window.col_off)
    h, w = int(window.height), int(window.width)
    summary = {}
    for n, a in products.items():
        full, levels = sinks[n]
        full[slice(r0, r0 + h), slice(c0, c0 + w)] = a
        if target_product(job, n).is_flags:
            blocks = nearest_levels(a, tuple(levels)) if levels else {}
            bits = target_product(job, n).flags
            summary[n] = FlagSummary(int(np.count_nonzero(a & bits["out_of_range"])),
                                     int(np.count_nonzero(a & bits["input_missing"])))
        else:
            blocks, (lo, hi, tot, cnt) = mean_pyramid(a, tuple(levels) or (2,))
            blocks = {f: blocks[f] for f in levels}
            summary[n] = ValueSummary(lo, hi, tot, cnt)
        for f, block in blocks.items():
            bh, bw = block.shape
            levels[f][slice(r0 // f, r0 // f + bh), slice(c0 // f, c0 // f + bw)] = block
    return summary


def _merge_summaries(parts: list[dict], names) -> dict:
    out = {}
    for n in names:
        merged = parts[0][n]
        for p in parts[1:]:
            merged = merged.merge(p[n])
        out[n] = merged
    return out


def job_graph(job: Job, grid: TargetGrid, names: tuple[str, ...], sinks: dict) -> tuple[dict, list]:
    """The task graph of a job (one task per chunk) and its output keys; computes nothing.

    Written out directly: ``dask.delayed`` would traverse and tokenize the job
    (with its lookup table) once per chunk, which cost more than the chunk's
    arithmetic on small grids.
    """
    name = f"radledger-{job.kind}-{job.label}-" + tokenize(job.settings_hash, names, grid.identity, grid.chunk)
    dsk = {(name, k): (_chunk_task, job, grid, win, names, sinks) for k, win in enumerate(grid.windows())}
    return dsk, list(dsk)


@dataclass
class JobResult:
    job: Job
    written: list[Path] = field(default_factory=list)
    skipped: list[Path] = field(default_factory=list)
    summary: dict = field(default_factory=dict)   # product -> ValueSummary | FlagSummary

    @property
    def notes(self) -> tuple[str, ...]:
        return self.job.notes


def run_job(plan: Plan, job: Job, engine: Engine, *, overwrite: bool = False) -> JobResult:
    """Compute and write every product of ``job`` that is not already current."""
    result = JobResult(job)
    targets = job.targets()
    todo = {n: p for n, p in targets.items() if overwrite or not is_current(p, job.settings_hash)}
    result.skipped = [p for n, p in targets.items() if n not in todo]
    if not todo:
        return result
    names = tuple(todo)
    in_task = tuple(f for f in overview_factors(plan.grid.width, plan.grid.height) if plan.grid.chunk % f == 0)
    files = []
    for n in names:
        info = target_product(job, n)
        files.append(ProductFile(final=todo[n], grid=plan.grid, dtype=info.dtype,
                                 tags=job_product_tags(plan.cfg, job, n), band_description=info.long_name,
                                 compression=plan.cfg.output.compression, in_task=in_task,
                                 nodata=info.nodata, categorical=info.is_flags))
    try:
        for f in files:
            f.create(keep_open=not engine.distributed)
        sinks = {n: (f.sink(engine.lock(f.intermediate)),
                     {fac: f.sink(engine.lock(f.level_files[fac]), factor=fac) for fac in f.in_task})
                 for n, f in zip(names, files)}
        dsk, keys = job_graph(job, plan.grid, names, sinks)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            parts = engine.get(dsk, keys, label=f"{job.kind.singular} {job.label}")
        for f in files:
            result.written.append(f.finish())
    except BaseException:
        for f in files:
            f.abort()
        raise
    result.summary = _merge_summaries(parts, names)
    return result
