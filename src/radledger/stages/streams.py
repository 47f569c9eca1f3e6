"""Composites accumulated while the dates stream, instead of re-reading every product afterwards.

When every date of a composite's window is computed in this run (a first run, or ``--overwrite``),
each chunk task folds the dates it computes into running sums (io/accumulators.py): the sum, the
count of valid dates, the sum of squares (std), the minimum and maximum.  After the dates, the
statistics are finished from those sums and written as COGs, so a season's composite costs one
small pass instead of reading the season's products back.  A median needs every date at once; it,
and a composite some of whose dates are already on disk, use the pass over the finished products
(stages/composites.py).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..config import CompositeSpec
from ..execution.engine import Engine
from ..io.accumulators import Accumulator
from ..io.cog import is_current
from ..io.overviews import mean_pyramid, overview_factors
from ..kinds import TimeKind
from ..planning.plan import Job, Plan

__all__ = ["CompositeStream", "composite_streams", "STREAMED"]

#: statistics that running sums give exactly (median needs every date at once)
STREAMED = {"mean": ("sum", "count"), "total": ("sum", "count"), "sum": ("sum", "count"),
            "count": ("count",), "std": ("sum", "count", "sumsq"), "min": ("min", "count"),
            "max": ("max", "count")}


@dataclass
class CompositeStream:
    """Running sums of one composite, fed by the chunk tasks (picklable: they run on workers too)."""
    comp: CompositeSpec
    kind: TimeKind
    members: frozenset            # (kind, label) of the jobs whose net radiation it folds
    acc: Accumulator

    def block(self, window) -> "_BlockSums":
        return _BlockSums(self, window)


class _BlockSums:
    """One block's sums over the dates of one task, added to the files once at the end (``flush``)."""

    def __init__(self, stream: CompositeStream, window):
        self.stream, self.window = stream, window
        self.sums: dict[str, np.ndarray] = {}

    def add(self, job: Job, products: dict) -> None:
        if (job.kind, job.label) not in self.stream.members or "net_radiation" not in products:
            return
        v = np.asarray(products["net_radiation"], dtype=np.float64)
        ok = ~np.isnan(v)
        parts = {"sum": np.where(ok, v, 0.0), "count": ok.astype(np.float32), "sumsq": np.where(ok, v * v, 0.0),
                 "min": np.where(ok, v, np.inf).astype(np.float32), "max": np.where(ok, v, -np.inf).astype(np.float32)}
        for name in self.stream.acc.fields:
            if name not in self.sums:
                self.sums[name] = parts[name]
            elif name == "min":
                np.fmin(self.sums[name], parts[name], out=self.sums[name])
            elif name == "max":
                np.fmax(self.sums[name], parts[name], out=self.sums[name])
            else:
                self.sums[name] += parts[name]

    def flush(self) -> None:
        if self.sums:
            self.stream.acc.add(self.window, self.sums)


def composite_streams(plan: Plan, engine: Engine, *, overwrite: bool) -> list[CompositeStream]:
    """The composites that can be accumulated in this run (their accumulation files created)."""
    streams = []
    for comp in plan.cfg.composites:
        kind = TimeKind(comp.source)
        if not set(comp.statistics) <= set(STREAMED):
            continue
        members = [j for j in plan.jobs if j.kind is kind and comp.start <= j.day <= comp.end
                   and "net_radiation" in j.outputs]
        computed = [j for j in members if overwrite or not is_current(j.outputs["net_radiation"], j.settings_hash)]
        if not members or len(computed) != len(members):
            continue    # some dates are on disk already: the composite reads the finished products
        fields = tuple(dict.fromkeys(f for s in comp.statistics for f in STREAMED[s]))
        acc = Accumulator(plan.out / "composites", comp.name, plan.grid, fields)
        acc.create()
        acc.locks = {f: engine.lock(p) for f, p in acc.paths.items()}
        streams.append(CompositeStream(comp, kind, frozenset((j.kind, j.label) for j in members), acc))
    return streams


def finish_statistic(statistic: str, sums: dict[str, np.ndarray], *, min_count: int,
                     window_days: int) -> np.ndarray:
    """One statistic (float32) of a block from its running sums; NaN where fewer than ``min_count`` dates."""
    n = sums["count"].astype(np.float64)
    if statistic == "count":
        return n.astype(np.float32)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = sums["sum"] / n if "sum" in sums else None
        if statistic == "mean":
            value = mean
        elif statistic == "total":
            value = mean * window_days
        elif statistic == "sum":
            value = sums["sum"]
        elif statistic == "std":
            value = np.sqrt(np.maximum(sums["sumsq"] / n - mean * mean, 0.0))   # population (ddof = 0)
        else:                                      # min, max: none where no date is valid
            value = np.where(n > 0, sums[statistic].astype(np.float64), np.nan)
    return np.where(n >= min_count, value, np.nan).astype(np.float32)


def _statistics_task(stream: CompositeStream, window, statistics: tuple, sinks: dict) -> None:
    """One chunk of every statistic, with its blocks of the in-task overview levels."""
    sums = {f: stream.acc.read(f, window) for f in stream.acc.fields}
    r0, c0 = int(window.row_off), int(window.col_off)
    h, w = int(window.height), int(window.width)
    for statistic in statistics:
        value = finish_statistic(statistic, sums, min_count=stream.comp.min_count,
                                 window_days=stream.comp.window_days)
        full, levels = sinks[statistic]
        full[slice(r0, r0 + h), slice(c0, c0 + w)] = value
        if levels:
            blocks, _ = mean_pyramid(value, tuple(levels))
            for f, level in levels.items():
                bh, bw = blocks[f].shape
                level[slice(r0 // f, r0 // f + bh), slice(c0 // f, c0 // f + bw)] = blocks[f]


def streamed_overviews(grid) -> tuple[int, ...]:
    """The overview factors the statistics tasks write themselves (those dividing the chunk)."""
    return tuple(f for f in overview_factors(grid.width, grid.height) if grid.chunk % f == 0)


def write_streamed(plan: Plan, stream: CompositeStream, engine: Engine, files: dict) -> None:
    """Every statistic of ``files`` (statistic -> ProductFile, created) from the stream's running sums."""
    sinks = {s: (f.sink(engine.lock(f.intermediate)),
                 {fac: f.sink(engine.lock(f.level_files[fac]), factor=fac) for fac in f.in_task})
             for s, f in files.items()}
    name = f"radledger-composite-{stream.comp.name}-{id(stream)}"
    dsk = {(name, k): (_statistics_task, stream, win, tuple(files), sinks)
           for k, win in enumerate(plan.grid.windows())}
    engine.get(dsk, list(dsk), label=f"composite {stream.comp.name}")
