"""Stage 3: zone tables of each net-radiation product and each composite statistic."""

from __future__ import annotations

from pathlib import Path

from ..execution.engine import Engine
from ..io.lazy import read_product
from ..io.vectors import read_zones
from ..outputs.zones import (write_zone_csv, zone_labels, zone_statistics, zone_statistics_coverage,
                             zones_off_the_grid)
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


def _warn_off_grid(plan: Plan, zones, engine: Engine) -> None:
    """The run summary's warning for each zone that lies partly or wholly off the grid."""
    for zone_id, inside in zones_off_the_grid(zones, plan.grid):
        where = "lies outside the grid" if inside == 0 else f"has only {inside:.1%} of its area on the grid"
        engine.events.warn(f"zones.path: {plan.cfg.zones.path}: zone {zone_id!r} {where}; its coverage counts "
                           f"the rest as not valid and area_km2 is the whole polygon's")


def run_zones(plan: Plan, engine: Engine) -> list[Path]:
    """One CSV per product under ``zones/``; every statistic computed by the engine."""
    z = plan.cfg.zones
    zones = read_zones(z.path, z.id, plan.grid)
    _warn_off_grid(plan, zones, engine)
    labels = zone_labels(zones, plan.grid) if z.weighting == "centre" else None
    written = []
    for p in _zone_targets(plan):
        values = read_product(str(p), plan.grid)
        compute = lambda x, stem=p.stem: engine.compute(x, label=f"zones {stem}")  # noqa: E731
        if labels is not None:
            rows = zone_statistics(values, labels, zones, plan.grid, compute=compute)
        else:
            rows = zone_statistics_coverage(values, zones, plan.grid, compute=compute)
        out = plan.out / "zones" / f"{p.stem}.csv"
        out.parent.mkdir(parents=True, exist_ok=True)
        write_zone_csv(rows, out, z.id)
        written.append(out)
    return written
