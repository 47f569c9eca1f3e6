"""Stage 3: zone tables of each net-radiation product and each composite statistic."""

from __future__ import annotations

from pathlib import Path

from ..execution.engine import Engine
from ..io.lazy import read_product
from ..io.vectors import read_zones
from ..outputs.zones import write_zone_csv, zone_labels, zone_statistics
from ..planning.plan import Plan
from .products import composite_paths

__all__ = ["run_zones"]


def _zone_targets(plan: Plan) -> list[Path]:
    """Each net_radiation product and each composite statistic file that exists."""
    paths = []
    for job in plan.jobs:
        for p in (job.outputs.get("net_radiation"), job.day_output):
            if p is not None and p.exists():
                paths.append(p)
    for comp in plan.cfg.composites:
        paths += [p for p in composite_paths(plan, comp).values() if p.exists()]
    return paths


def run_zones(plan: Plan, engine: Engine) -> list[Path]:
    """One CSV per product under ``zones/``; every statistic computed by the engine."""
    z = plan.cfg.zones
    zones = read_zones(z.path, z.id, plan.grid)
    labels = zone_labels(zones, plan.grid)
    written = []
    for p in _zone_targets(plan):
        rows = zone_statistics(read_product(str(p), plan.grid), labels, zones, plan.grid,
                               compute=lambda x: engine.compute(x, label=f"zones {p.stem}"))
        out = plan.out / "zones" / f"{p.stem}.csv"
        out.parent.mkdir(parents=True, exist_ok=True)
        write_zone_csv(rows, out, z.id)
        written.append(out)
    return written
