"""The graph of a batch of dates (scenes or days), and the run that computes it.

One task per chunk: for each date of the batch it reads every input window
once, runs the kernel, writes every product (and its overview levels) into
the intermediates and hands the arrays to the streams (composites) before the
next date; it returns only small summaries.  What is the same for every date
(coordinates, shared static layers, where the pixels fall on coarser source
grids) is computed once per task (execution/context.py).  Nothing large
travels between tasks, so memory is a couple of chunks per core whatever the
scene size or the number of dates, and the same graph runs on threads or on a
cluster.  Building the graph computes nothing.
"""

from __future__ import annotations

import os
import warnings
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
from dask.base import tokenize
from rasterio.windows import Window

from ..grid import TargetGrid
from ..io.cog import ProductFile, is_current
from ..io.gdalenv import gdal_env
from ..io.tiles import TileSink
from ..io.overviews import mean_pyramid, nearest_levels, overview_factors
from ..kinds import TimeKind
from ..model.kernels import day_kernel, scene_kernel
from ..model.sun import sun_geometry, sun_up_everywhere
from ..physics import CLEARNESS_MIN_SUN_ELEVATION
from ..model.products import SCENE_DAY_PRODUCT, Product, product_info
from ..planning.plan import Job, Plan
from ..planning.provenance import job_product_tags
from ..io.memo import ReadMemo
from .context import ChunkContext
from .engine import Engine

__all__ = ["job_graph", "batch_graph", "run_job", "compute_batch", "PendingBatch", "JobResult",
           "chunk_products", "ValueSummary", "FlagSummary", "target_product"]

#: products whose COG passes run at once, one per core
FINISH_THREADS = min(4, os.cpu_count() or 1)


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
                   reuse: bool = False, ctx: ChunkContext | None = None) -> dict[str, np.ndarray]:
    """Every requested product of one chunk window (``reuse``: see :func:`model.kernels.scene_kernel`)."""
    ctx = ctx or ChunkContext(grid, window)
    arrays = {}
    for s in job.sources.values():
        arrays.update(ctx.read(s))
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        if job.kind is TimeKind.SCENES:
            p = job.params
            sun = sun_geometry(grid, window, p.time) if _sun_needed(p, grid, window) else None
            lonlat = ctx.lonlat() if p.scene_to_day != "none" else None
            out = scene_kernel(arrays, sun, lonlat, p, reuse=reuse)
        else:
            p = job.params
            out = day_kernel(arrays, ctx.day_solar(p.day_of_year, daylight=p.shortwave_daylight_mean,
                                                  latitude=p.terrain != "none"), p)
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


def _write_chunk(job: Job, window, products: dict, sinks: dict, spools: dict) -> dict:
    """Write one chunk's products (and their overview blocks); their summaries.

    A product with a tile spool (``spools``) hands it its full-resolution
    block and every overview block (io/tiles.py); a product without one
    writes them into its intermediates.
    """
    r0, c0 = int(window.row_off), int(window.col_off)
    h, w = int(window.height), int(window.width)
    summary = {}
    for n, a in products.items():
        full, levels = sinks[n]
        spool = spools.get(n)
        if spool is None:
            full[slice(r0, r0 + h), slice(c0, c0 + w)] = a
        else:
            spool.put(1, r0, c0, a)
        wanted = tuple(sorted({*levels, *(spool.sink.levels if spool else ())}))
        product = target_product(job, n)
        if product.is_flags:
            blocks = nearest_levels(a, wanted) if wanted else {}
            bits = product.flags
            summary[n] = FlagSummary(int(np.count_nonzero(a & bits["out_of_range"])),
                                     int(np.count_nonzero(a & bits["input_missing"])))
        else:
            blocks, (lo, hi, tot, cnt) = mean_pyramid(a, wanted or (2,))
            blocks = {f: blocks[f] for f in wanted}
            summary[n] = ValueSummary(lo, hi, tot, cnt)
        for f, block in blocks.items():
            if f in levels:
                bh, bw = block.shape
                levels[f][slice(r0 // f, r0 // f + bh), slice(c0 // f, c0 // f + bw)] = block
            else:
                spool.put(f, r0 // f, c0 // f, block)
    return summary


def _batch_task(batch: tuple, grid: TargetGrid, window, shared: frozenset, streams: tuple) -> list[tuple]:
    """One chunk of every date of a batch: compute, write, stream; date by date, the summaries and
    the index of the tiles spooled (product -> index, see io/tiles.py).

    ``batch``: (job, product names, sinks) per date.  The context keeps what is the same for every
    date; products are written (and streamed) before the next date reuses the kernel's buffers.
    """
    out = [None] * len(batch)
    memo = ReadMemo(chunk=window)          # shared by the task's blocks: stack slabs, resampling geometry
    for job, _, _ in batch:
        for src in job.sources.values():
            memo.want(src)
    spools = [{n: full.for_chunk(window) for n, (full, _) in sinks.items() if isinstance(full, TileSink)}
              for _, _, sinks in batch]
    try:
        with gdal_env():      # once per task: the reads and writes inside skip GDAL's option set-up
            _blocks(batch, grid, window, shared, streams, memo, spools, out)
        tiles = [{n: spool.close() for n, spool in date.items()} for date in spools]
    except BaseException:
        for date in spools:
            for spool in date.values():
                spool.discard()
        raise
    return list(zip(out, tiles))


def _blocks(batch: tuple, grid: TargetGrid, window, shared: frozenset, streams: tuple, memo: ReadMemo,
            spools: list, out: list) -> None:
    """The compute blocks of one task's chunk, each for every date of the batch (see _batch_task)."""
    for block in sub_windows(window, compute_block(grid)):
        # the slabs serve every block of the chunk; each block's resampling geometry only its own dates
        ctx = ChunkContext(grid, block, shared, replace(memo, warps={}))
        sums = [stream.block(block) for stream in streams]    # composites accumulated as dates go by
        for i, (job, names, sinks) in enumerate(batch):
            products = chunk_products(job, grid, block, names, reuse=True, ctx=ctx)
            summary = _write_chunk(job, block, products, sinks, spools[i])
            out[i] = summary if out[i] is None else {n: out[i][n].merge(summary[n]) for n in summary}
            for s in sums:
                s.add(job, products)
        for s in sums:
            s.flush()


#: edge of the blocks a chunk task computes one at a time [pixel]: what a task holds for one date
#: (a dozen float32 arrays) stays near 1 MB each whatever grid.chunk is; 512 matches the COG tiles
COMPUTE_BLOCK = 512


def compute_block(grid: TargetGrid) -> int:
    return min(grid.chunk, COMPUTE_BLOCK)


def sub_windows(window, edge: int):
    """The blocks of ``window``, row-major, ``edge`` pixels square (the last row/column smaller)."""
    r0, c0 = int(window.row_off), int(window.col_off)
    h, w = int(window.height), int(window.width)
    for r in range(r0, r0 + h, edge):
        for c in range(c0, c0 + w, edge):
            yield Window(c, r, min(edge, c0 + w - c), min(edge, r0 + h - r))


def _merge_summaries(parts: list[dict], names) -> dict:
    out = {}
    for n in names:
        merged = parts[0][n]
        for p in parts[1:]:
            merged = merged.merge(p[n])
        out[n] = merged
    return out


def batch_graph(batch: tuple, grid: TargetGrid, streams: tuple = ()) -> tuple[dict, list]:
    """The task graph of a batch of dates (one task per chunk) and its output keys; computes nothing.

    Written out directly: ``dask.delayed`` would traverse and tokenize the jobs
    (with their lookup tables) once per chunk, which cost more than the chunk's
    arithmetic on small grids.
    """
    jobs = [job for job, _, _ in batch]
    common = frozenset.intersection(*(frozenset(j.sources.values()) for j in jobs)) if len(jobs) > 1 \
        else frozenset()
    label = f"{jobs[0].kind}-{jobs[0].label}-{jobs[-1].label}"
    name = f"radledger-{label}-" + tokenize([j.settings_hash for j in jobs], [n for _, n, _ in batch],
                                             grid.identity, grid.chunk)
    dsk = {(name, k): (_batch_task, batch, grid, win, common, tuple(streams)) for k, win in enumerate(grid.windows())}
    return dsk, list(dsk)


def job_graph(job: Job, grid: TargetGrid, names: tuple[str, ...], sinks: dict) -> tuple[dict, list]:
    """The task graph of one job (a batch of one date)."""
    return batch_graph(((job, names, sinks),), grid)


@dataclass
class JobResult:
    job: Job
    written: list[Path] = field(default_factory=list)
    skipped: list[Path] = field(default_factory=list)
    summary: dict = field(default_factory=dict)   # product -> ValueSummary | FlagSummary

    @property
    def notes(self) -> tuple[str, ...]:
        return self.job.notes


def _product_files(plan: Plan, job: Job, todo: dict, engine: Engine) -> list[ProductFile]:
    block = compute_block(plan.grid)
    in_task = tuple(f for f in overview_factors(plan.grid.width, plan.grid.height) if block % f == 0)
    files = []
    for n, path in todo.items():
        info = target_product(job, n)
        files.append(ProductFile(final=path, grid=plan.grid, dtype=info.dtype,
                                 tags=job_product_tags(plan.cfg, job, n), band_description=info.long_name,
                                 compression=plan.cfg.output.compression, in_task=in_task, block=block,
                                 nodata=info.nodata, categorical=info.is_flags, spool=True))
    return files


@dataclass
class PendingBatch:
    """A computed batch whose products still need their one compression pass (``finish``)."""
    results: list[JobResult]
    files: list[list[ProductFile]]

    def finish(self) -> list[JobResult]:
        """Each product's COG pass.  With several products, one pass per core, each on one thread:
        GDAL's own threads (one pass on every core) spend ~1.6x the CPU on the same work.  Products
        whose tiles the tasks compressed are only laid out and synced here, up to four at once."""
        every = [f for files in self.files for f in files]
        # files assembled from spooled tiles mostly wait for the disk (the copy, fsync): one thread each
        threads = min(len(every), 4) if all(f.tiled for f in every) else FINISH_THREADS
        try:
            if len(every) > 1 and threads > 1:
                with ThreadPoolExecutor(threads, thread_name_prefix="radledger_cog") as pool:
                    done = list(pool.map(lambda f: f.finish(threads="1"), every))
            else:
                done = [f.finish() for f in every]
        except BaseException:
            self.abort()
            raise
        k = 0
        for result, files in zip(self.results, self.files):
            result.written = done[k:k + len(files)]
            k += len(files)
        return self.results

    def abort(self) -> None:
        for files in self.files:
            for f in files:
                f.abort()


def compute_batch(plan: Plan, jobs: list[Job], engine: Engine, *, overwrite: bool = False,
                  streams: tuple = ()) -> PendingBatch:
    """Compute every product of ``jobs`` that is not current into its intermediates (not yet COGs)."""
    results, files, batch, by_name = [], [], [], {}
    try:
        for job in jobs:
            result = JobResult(job)
            targets = job.targets()
            todo = {n: p for n, p in targets.items() if overwrite or not is_current(p, job.settings_hash)}
            result.skipped = [p for n, p in targets.items() if n not in todo]
            results.append(result)
            job_files = _product_files(plan, job, todo, engine)
            files.append(job_files)
            if not todo:
                continue
            for f in job_files:
                f.create(keep_open=not engine.distributed)
            sinks = {n: (f.tile_sink() if f.tiled else f.sink(engine.lock(f.intermediate)),
                         {fac: f.sink(engine.lock(f.level_files[fac]), factor=fac) for fac in f.in_task})
                     for n, f in zip(todo, job_files)}
            batch.append((job, tuple(todo), sinks))
            by_name[id(job)] = dict(zip(todo, job_files))
        if batch:
            dsk, keys = batch_graph(tuple(batch), plan.grid, streams)
            first, last = batch[0][0], batch[-1][0]
            label = f"{first.kind.singular} {first.label}" + (f" .. {last.label}" if last is not first else "")
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)
                parts = engine.get(dsk, keys, label=label)
            by_job = {id(job): [p[i] for p in parts] for i, (job, _, _) in enumerate(batch)}
            for result, (job, names, _) in zip((r for r in results if id(r.job) in by_job), batch):
                result.summary = _merge_summaries([summary for summary, _ in by_job[id(job)]], names)
                for _, tiles in by_job[id(job)]:
                    for n, index in tiles.items():
                        by_name[id(job)][n].add_tiles(index)
    except BaseException:
        PendingBatch(results, files).abort()
        raise
    return PendingBatch(results, files)


def run_job(plan: Plan, job: Job, engine: Engine, *, overwrite: bool = False) -> JobResult:
    """Compute and write every product of ``job`` that is not already current."""
    return compute_batch(plan, [job], engine, overwrite=overwrite).finish()[0]
