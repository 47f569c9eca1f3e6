"""Stage: one CF Zarr store per time kind (``zarr/scenes.zarr``, ``zarr/days.zarr``).

The store is made for every date of the plan, then each finished date is written
into it (a slice whose products are unchanged since the last run is kept).
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

from ..execution.engine import Engine
from ..kinds import TimeKind
from ..model.products import DAY_PRODUCTS, SCENE_PRODUCTS
from ..outputs.zarr import ZarrProductStore
from ..planning.plan import Plan

__all__ = ["run_zarr", "dated_targets"]


def dated_targets(plan: Plan, kind: TimeKind, *, with_scene_days: bool = False) -> dict[object, dict[str, Path]]:
    """Every date of ``kind`` in the plan (scene time or day) -> {product: final path}, in time order.

    A scene's own daily estimate (methods.scene_to_day) is a quantity of its own, kept out of the
    day stores as it is out of the NetCDF stacks; ``with_scene_days`` lists it with its scene.
    """
    by_time: dict[object, dict[str, Path]] = {}
    for job in plan.jobs:
        if job.kind is kind:
            when = job.when if kind is TimeKind.SCENES else job.day
            targets = job.targets() if with_scene_days else job.outputs
            by_time.setdefault(when, {}).update(targets)
    return dict(sorted(by_time.items(), key=lambda item: _utc(item[0])))


def _utc(when) -> dt.datetime:
    if isinstance(when, dt.datetime):
        return when.astimezone(dt.timezone.utc).replace(tzinfo=None) if when.tzinfo else when
    return dt.datetime(when.year, when.month, when.day)


def run_zarr(plan: Plan, engine: Engine, *, overwrite: bool = False) -> tuple[list[Path], list[Path]]:
    """Write every finished date into its kind's store; (stores written to, stores already current)."""
    written, skipped = [], []
    for kind in TimeKind:
        targets = dated_targets(plan, kind)
        if not targets:
            continue
        table = SCENE_PRODUCTS if kind is TimeKind.SCENES else DAY_PRODUCTS
        names = {name for paths in targets.values() for name in paths}
        products = [name for name in table if name in names]
        store = ZarrProductStore(plan.out / "zarr" / f"{kind}.zarr", plan.grid, kind, list(targets), products,
                                 attrs={"title": plan.cfg.title} if plan.cfg.title else None)
        store.open(overwrite=overwrite)
        changed = False
        for index, paths in enumerate(targets.values()):
            finished = {name: path for name, path in paths.items() if path.exists()}
            if finished:
                done = store.write_date(index, finished,
                                        compute=lambda x: engine.compute(x, label=f"zarr {kind} {index}"))
                changed = changed or bool(done)
        (written if changed else skipped).append(store.path)
    return written, skipped
