"""Stage 2: composites over the finished day or scene products."""

from __future__ import annotations

from pathlib import Path

import dask.array as da
import numpy as np

from .._version import __version__
from ..config import CompositeSpec
from ..execution.engine import Engine
from ..io.cog import ProductFile, is_current, read_tags
from ..outputs.composites import composite
from ..planning.plan import Plan
from ..planning.provenance import composite_tags, settings_hash
from .products import composite_paths, net_radiation_files

__all__ = ["run_composite"]


def run_composite(plan: Plan, comp: CompositeSpec, engine: Engine, *, overwrite: bool
                  ) -> tuple[list[Path], list[Path]]:
    """Write the statistics of ``comp`` that are not current; (written, skipped)."""
    members = net_radiation_files(plan, comp.source, comp.start, comp.end)
    h = settings_hash(__version__, plan.grid.identity, repr(comp), plan.cfg.output.compression,
                      [(str(p), read_tags(p).get("settings_hash")) for _, p in members])
    targets = composite_paths(plan, comp)
    todo = {s: p for s, p in targets.items() if overwrite or not is_current(p, h)}
    skipped = [p for s, p in targets.items() if s not in todo]
    if not todo:
        return [], skipped
    if members:
        arrays = composite([str(p) for _, p in members], plan.grid, statistics=tuple(todo),
                           min_count=comp.min_count,
                           window_days=comp.window_days if "total" in todo else None)
    else:  # an empty window still gets products: NaN everywhere, count 0
        arrays = {s: da.full(plan.grid.shape, 0.0 if s == "count" else np.nan, chunks=plan.grid.chunks,
                             dtype=np.float32) for s in todo}
    files, sources = [], []
    for s, path in todo.items():
        tags = composite_tags(plan.cfg, comp, s, [p for _, p in members], h)
        files.append(ProductFile(final=path, grid=plan.grid, dtype="float32", tags=tags,
                                 band_description=tags["long_name"], compression=plan.cfg.output.compression))
        sources.append(arrays[s])
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
    return written, skipped
