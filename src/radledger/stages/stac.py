"""Stage: a STAC catalog of the dated products (``stac/catalog.json``), rewritten each run."""

from __future__ import annotations

from pathlib import Path

from ..kinds import TimeKind
from ..outputs.stac import DatedProducts, write_catalog
from ..planning.plan import Plan
from .zarr import dated_targets

__all__ = ["run_stac"]


def run_stac(plan: Plan) -> list[Path]:
    """One item per scene time and day with finished products; [] when there is none yet."""
    dated = [DatedProducts(kind, when, {name: p for name, p in paths.items() if p.exists()})
             for kind in TimeKind for when, paths in dated_targets(plan, kind, with_scene_days=True).items()]
    dated = [d for d in dated if d.paths]
    if not dated:
        return []
    return [write_catalog(plan.out, plan.grid, dated, title=plan.cfg.title)]
