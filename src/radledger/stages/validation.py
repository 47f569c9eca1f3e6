"""Stage: the products against measured net radiation (``validation:``), rewritten on every run.

Each row of the net-radiometer table is paired with the ``net_radiation`` product of its date (a
daily row: the FAO-56 day) or its time (a timed row: the scene within :data:`SCENE_TOLERANCE`).
Writes ``DIR/validation/pairs.csv``, ``summary.csv``, ``scatter_{scenes|days}.png`` and
``timeseries_{station}.png``.  Observations off the grid or without a product are listed in the
run's warnings, never fatal; rows without a ``net_radiation`` value are left out.
"""

from __future__ import annotations

import datetime as dt
import math
from pathlib import Path

from ..execution.engine import Engine
from ..kinds import TimeKind
from ..outputs.validation import Pair, pixel_of, sample_product, summary_rows, write_pairs, write_summary
from ..outputs.validation_plots import station_file_stem, write_scatter, write_timeseries
from ..planning.plan import Plan
from ..planning.stations import read_observations, when_text

__all__ = ["run_validation", "SCENE_TOLERANCE"]

#: an observation at a time pairs with the scene within this much of it
SCENE_TOLERANCE = dt.timedelta(minutes=1)
_SHOWN = 4   # dates named per warning line


def _products(plan: Plan) -> dict:
    """(time or date, net_radiation path, quality path) of every finished product, per kind (and days by date)."""
    out: dict = {TimeKind.SCENES: [], TimeKind.DAYS: []}
    for job in plan.jobs:
        path = job.outputs.get("net_radiation")
        if path is not None and path.exists():
            out[job.kind].append((job.when if job.kind is TimeKind.SCENES else job.day, path,
                                  job.outputs.get("quality")))
    out["by_day"] = {p[0]: p for p in out[TimeKind.DAYS]}
    return out


def _match(products, kind: TimeKind, when):
    if kind is TimeKind.DAYS:
        return products["by_day"].get(when)
    near = [p for p in products[kind] if abs(p[0] - when) <= SCENE_TOLERANCE]
    return min(near, key=lambda p: abs(p[0] - when)) if near else None


def run_validation(plan: Plan, engine: Engine) -> list[Path]:
    """Pair every observation with its product; write the tables and plots; warn about the unpaired."""
    obs = read_observations(plan.cfg, plan.grid)
    products = _products(plan)
    groups: dict[Path, list] = {}            # product -> [(row, pixel, kind, quality path)]
    off_grid: dict[str, list[str]] = {}
    no_product: dict[tuple[str, str], list[str]] = {}
    values = obs.values["net_radiation"]
    for i in range(len(obs)):
        if math.isnan(values[i]):
            continue
        kind = TimeKind.SCENES if obs.time[i] is not None else TimeKind.DAYS
        when = obs.time[i] if kind is TimeKind.SCENES else obs.date[i]
        pixel = pixel_of(plan.grid, obs.x[i], obs.y[i])
        if pixel is None:
            off_grid.setdefault(obs.station[i], []).append(when_text(when))
            continue
        product = _match(products, kind, when)
        if product is None:
            no_product.setdefault((obs.station[i], kind.singular), []).append(when_text(when))
            continue
        groups.setdefault(product[1], []).append((i, pixel, kind, product[2]))
    pairs = []
    for path, members in groups.items():
        sampled = sample_product(path, [m[1] for m in members], quality=members[0][3])
        for (i, _, kind, _), (pixel, mean, quality) in zip(members, sampled):
            t = obs.time[i]
            pairs.append(Pair(kind=str(kind), station=obs.station[i], date=obs.date[i].isoformat(),
                              time=t.strftime("%Y-%m-%dT%H:%M:%SZ") if t is not None else "",
                              observed=float(values[i]), modelled=pixel, modelled_3x3=mean, quality=quality))
    _warn(plan, engine, off_grid, no_product)
    return _write(plan, pairs)


def _listed(whens: list[str]) -> str:
    shown = ", ".join(whens[:_SHOWN])
    return shown + (f" and {len(whens) - _SHOWN} more" if len(whens) > _SHOWN else "")


def _warn(plan: Plan, engine: Engine, off_grid, no_product) -> None:
    path = plan.cfg.validation.path
    for station, whens in off_grid.items():
        engine.events.warn(f"validation.path: {path}: station '{station}' lies outside the grid; its "
                           f"{len(whens)} observation(s) are not paired ({_listed(whens)})")
    for (station, kind), whens in no_product.items():
        what = "scene within 1 minute of" if kind == "scene" else "day product on"
        engine.events.warn(f"validation.path: {path}: station '{station}': no {what} {len(whens)} observation "
                           f"time(s) ({_listed(whens)}); not paired")


def _write(plan: Plan, pairs: list[Pair]) -> list[Path]:
    folder = plan.out / "validation"
    rows = summary_rows(pairs)
    written = [write_pairs(pairs, folder / "pairs.csv"), write_summary(rows, folder / "summary.csv")]
    for kind, station, stats in rows:
        if station == "all":
            mine = [p for p in pairs if p.kind == kind]
            written.append(write_scatter(mine, stats, kind, folder / f"scatter_{kind}.png"))
    stems: dict[str, str] = {}
    for station in sorted({p.station for p in pairs}):
        stem = station_file_stem(station)
        stem = stem if stem not in stems.values() else f"{stem}_{len(stems)}"
        stems[station] = stem
        written.append(write_timeseries([p for p in pairs if p.station == station], station,
                                        folder / f"timeseries_{stem}.png"))
    return written
