"""Which finished products the later stages read: net radiation per date, composite statistics."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

from ..config import CompositeSpec
from ..kinds import TimeKind
from ..planning.plan import Plan

__all__ = ["net_radiation_files", "composite_paths", "dated_products"]


def net_radiation_files(plan: Plan, kind: TimeKind, start: dt.date, end: dt.date) -> list[tuple[object, Path]]:
    """Finished net-radiation products of ``kind`` dated within [start, end], in time order.

    A scene's own daily estimate (methods.scene_to_day) is a different quantity from an FAO-56 day
    and may exist several times per date: composites ``from: days`` use the FAO-56 days only.
    """
    kind = TimeKind(kind)
    out = []
    for job in plan.jobs:
        path = job.outputs.get("net_radiation") if job.kind is kind else None
        if path is not None and start <= job.day <= end and path.exists():
            out.append((job.when if kind is TimeKind.SCENES else job.day, path))
    return sorted(out, key=lambda t: str(t[0]))


def composite_paths(plan: Plan, comp: CompositeSpec) -> dict[str, Path]:
    return {s: plan.out / "composites" / f"{comp.name}_{s}.tif" for s in comp.statistics}


def dated_products(plan: Plan, kind: TimeKind) -> dict[str, list[tuple[object, Path]]]:
    """Every finished product of ``kind`` by product name, each a time-ordered list of (time, path)."""
    by_product: dict[str, list[tuple[object, Path]]] = {}
    for job in plan.jobs:
        items = list(job.outputs.items()) if job.kind is kind else []
        for name, path in items:
            if path.exists():
                when = job.when if kind is TimeKind.SCENES else job.day
                by_product.setdefault(name, []).append((when, path))
    for items in by_product.values():
        items.sort(key=lambda t: str(t[0]))
    return by_product
