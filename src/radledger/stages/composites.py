"""Stage 2: composites over the finished day or scene products."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from .._version import __version__
from ..config import CompositeSpec
from ..execution.engine import Engine
from ..io.cog import ProductFile, is_current, read_tags
from ..planning.plan import Plan
from ..planning.provenance import composite_tags, settings_hash
from .products import composite_paths, net_radiation_files
from .streams import CompositeStream, streamed_overviews, write_streamed

__all__ = ["run_composite"]


def run_composite(plan: Plan, comp: CompositeSpec, engine: Engine, *, overwrite: bool,
                  stream: CompositeStream | None = None) -> tuple[list[Path], list[Path]]:
    """Write the statistics of ``comp`` that are not current; (written, skipped).

    ``stream``: the running sums the chunk tasks accumulated for it while its dates were computed
    (stages/streams.py); without one, the statistics are computed from the finished products.
    """
    members = net_radiation_files(plan, comp.source, comp.start, comp.end)
    h = settings_hash(__version__, plan.grid.identity, repr(comp), plan.cfg.output.compression,
                      [(str(p), read_tags(p).get("settings_hash")) for _, p in members])
    targets = composite_paths(plan, comp)
    todo = {s: p for s, p in targets.items() if overwrite or not is_current(p, h)}
    skipped = [p for s, p in targets.items() if s not in todo]
    if not todo:
        if stream is not None:
            stream.acc.remove()
        return [], skipped
    if stream is not None:
        return _from_stream(plan, comp, engine, stream, todo, members, h), skipped
    return _from_products(plan, comp, engine, todo, members, h), skipped


def _from_products(plan: Plan, comp: CompositeSpec, engine: Engine, todo: dict, members: list, h: str
                   ) -> list[Path]:
    """The statistics computed from the finished products (read back chunk by chunk)."""
    import dask.array as da       # here only: a streamed season never needs Dask arrays

    from ..outputs.composites import composite

    if members:
        arrays = composite([str(p) for _, p in members], plan.grid, statistics=tuple(todo),
                           min_count=comp.min_count,
                           window_days=comp.window_days if "total" in todo else None)
    else:  # an empty window still gets products: NaN everywhere, count 0
        arrays = {s: da.full(plan.grid.shape, 0.0 if s == "count" else np.nan, chunks=plan.grid.chunks,
                             dtype=np.float32) for s in todo}
    by_statistic = _files(plan, comp, todo, members, h)
    files = list(by_statistic.values())
    sources = [arrays[s] for s in by_statistic]
    try:
        for f in files:
            f.create(keep_open=not engine.distributed)
        store = da.store(sources, [f.sink(engine.lock(f.intermediate)) for f in files], lock=False,
                         compute=False)
        engine.compute(store, label=f"composite {comp.name}")
        written = [f.finish() for f in files]
    except BaseException:
        for f in files:
            f.abort()
        raise
    return written


def _files(plan: Plan, comp: CompositeSpec, todo: dict, members: list, h: str, in_task: tuple = ()) -> dict:
    out = {}
    for s, path in todo.items():
        tags = composite_tags(plan.cfg, comp, s, [p for _, p in members], h)
        out[s] = ProductFile(final=path, grid=plan.grid, dtype="float32", tags=tags,
                             band_description=tags["long_name"], compression=plan.cfg.output.compression,
                             in_task=in_task, block=plan.grid.chunk)
    return out


def _from_stream(plan: Plan, comp: CompositeSpec, engine: Engine, stream: CompositeStream, todo: dict,
                 members: list, h: str) -> list[Path]:
    # the overview levels come from the statistics tasks too: the COG pass then only compresses
    files = _files(plan, comp, todo, members, h, in_task=streamed_overviews(plan.grid))
    try:
        for f in files.values():
            f.create(keep_open=not engine.distributed)
        write_streamed(plan, stream, engine, files)
        return [f.finish() for f in files.values()]
    except BaseException:
        for f in files.values():
            f.abort()
        raise
    finally:
        stream.acc.remove()
