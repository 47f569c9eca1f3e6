"""Stage 0 (``methods.terrain``): the static terrain layers, once per grid and DEM, before any job.

``DIR/terrain/slope.tif``, ``aspect.tif``, ``sky_view_factor.tif`` and, for ``shading``,
``DIR/terrain/horizons/horizon_AAA.tif`` (one file per azimuth, every 10 deg).  One task per
chunk reads the DEM's window plus a halo (model/terrain_layers.py says how wide), computes every
layer and writes the chunk's pixels; the same graph runs on threads or on a Dask cluster.  A layer
whose file carries the current settings hash (DEM, grid, method) is kept, so every later date and
rerun reads it as it is.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from dask.base import tokenize

from ..execution.engine import Engine
from ..grid import TargetGrid
from ..io.cog import ProductFile, is_current
from ..model.products import terrain_product
from ..model.terrain import TerrainLayers
from ..model.terrain_layers import (chunk_terrain, grid_north_offset, read_dem_with_halo, terrain_blocks,
                                    terrain_halo)
from ..planning.plan import Plan
from ..planning.provenance import terrain_tags

__all__ = ["run_terrain", "plan_terrain"]


def plan_terrain(plan: Plan) -> TerrainLayers | None:
    """The static terrain layers the plan's jobs read (None: level ground)."""
    return next((j.sources["terrain"].terrain for j in plan.jobs if "terrain" in j.sources), None)


def _relief_task(dem, grid: TargetGrid, window, halo: int) -> tuple[float, float]:
    """Lowest elevation of the chunk, highest within its halo [m]."""
    z, _ = read_dem_with_halo(dem, grid, window, halo)
    inner = z[halo:z.shape[0] - halo, halo:z.shape[1] - halo] if halo else z
    if not (np.isfinite(inner).any() and np.isfinite(z).any()):
        return np.inf, -np.inf
    return float(np.nanmin(inner)), float(np.nanmax(z))


def _relief(dem, grid: TargetGrid, engine: Engine) -> tuple[float, int]:
    """Relief [m] that shades the grid, and the halo [pixel] it asks for.

    The highest terrain that can shade a pixel may lie beyond the grid (where the DEM reaches
    further): the relief is the highest elevation within the halo less the lowest on the grid,
    and the halo follows from the relief; both grow until they agree (a few cheap passes).
    """
    halo, relief = 0, 0.0
    for _ in range(4):
        name = "radledger-relief-" + tokenize(dem.path, grid.identity, grid.chunk, halo)
        dsk = {(name, k): (_relief_task, dem, grid, win, halo) for k, win in enumerate(grid.windows())}
        parts = engine.get(dsk, list(dsk), label="terrain relief")
        lo, hi = min(p[0] for p in parts), max(p[1] for p in parts)
        relief = max(hi - lo, 0.0) if np.isfinite(lo) else 0.0
        wanted = terrain_halo(relief, grid, "shading")
        if wanted <= halo:
            break
        halo = wanted
    return relief, halo


def _terrain_task(terrain: TerrainLayers, grid: TargetGrid, window, halo: int, sinks: dict) -> None:
    """Compute every static layer of one chunk and write the ones asked for.

    The chunk is computed block by grid-aligned block (model/terrain_layers.terrain_blocks), so
    the layers do not depend on the chunk edge.
    """
    z, filled = read_dem_with_halo(terrain.dem, grid, window, halo)
    north = grid_north_offset(grid, window)
    r0, c0 = int(window.row_off), int(window.col_off)
    h, w = int(window.height), int(window.width)
    layers: dict[str, np.ndarray] = {}
    for part, dx, dy, turn in terrain_blocks(grid, window):
        pr, pc = int(part.row_off) - r0, int(part.col_off) - c0
        ph, pw = int(part.height), int(part.width)
        inner = (slice(pr, pr + ph + 2 * halo), slice(pc, pc + pw + 2 * halo))
        with np.errstate(invalid="ignore", divide="ignore"):
            block = chunk_terrain(z[inner], filled[inner], halo, dx, dy, terrain.method,
                                  north[pr:pr + ph, pc:pc + pw], turn=turn)
        for n, a in block.items():
            layers.setdefault(n, np.empty((h, w), dtype=np.float32))[pr:pr + ph, pc:pc + pw] = a
    for n, sink in sinks.items():
        sink[slice(r0, r0 + h), slice(c0, c0 + w)] = layers[n]


def run_terrain(plan: Plan, engine: Engine, *, overwrite: bool = False) -> tuple[list[Path], list[Path]]:
    """Write the static terrain layers that are not current; (written, kept) paths."""
    terrain = plan_terrain(plan)
    if terrain is None:
        return [], []
    hashes = dict(terrain.hashes)
    paths = {n: Path(terrain.path(n)) for n in terrain.names}
    todo = [n for n in terrain.names if overwrite or not is_current(paths[n], hashes[n])]
    kept = [paths[n] for n in terrain.names if n not in todo]
    if not todo:
        return [], kept
    grid = plan.grid
    relief, halo = _relief(terrain.dem, grid, engine) if terrain.method == "shading" else (0.0, 1)
    files = {n: ProductFile(final=paths[n], grid=grid, dtype="float32",
                            tags=terrain_tags(plan.cfg, n, settings_hash=hashes[n], dem=terrain.dem.path,
                                              halo=halo, relief=relief),
                            band_description=terrain_product(n).long_name, compression=plan.cfg.output.compression)
             for n in todo}
    try:
        for f in files.values():
            f.create(keep_open=not engine.distributed)
        sinks = {n: f.sink(engine.lock(f.intermediate)) for n, f in files.items()}
        name = "radledger-terrain-" + tokenize(sorted(hashes.items()), todo, grid.chunk)
        dsk = {(name, k): (_terrain_task, terrain, grid, win, halo, sinks) for k, win in enumerate(grid.windows())}
        engine.get(dsk, list(dsk), label=f"terrain ({terrain.method})")
        written = [f.finish() for f in files.values()]
    except BaseException:
        for f in files.values():
            f.abort()
        raise
    return written, kept
