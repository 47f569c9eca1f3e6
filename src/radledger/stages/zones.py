"""Stage 3: zone tables of each net-radiation product and each composite statistic, and per season
one long table per product (``zones/{product}_{scenes|days}.csv``, outputs/zone_series.py).

A table is kept on a rerun when it was made from the same product (its ``settings_hash`` tag) and
the same zones (file fingerprint, id field, weighting, grid); what each table was made from is
recorded in ``zones/.radledger-zones.json``.  The tables still to make are computed a few products
at a time (each chunk's zone labels burnt once for all of them).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from ..execution.engine import Engine
from ..io.atomic import read_record, write_record
from ..io.cog import read_tags
from ..io.lazy import read_product
from ..io.vectors import read_zones
from ..kinds import TimeKind
from ..model.products import SCENE_DAY_PRODUCT, product_info
from ..outputs.zone_series import write_zone_series
from ..outputs.zones import (write_zone_csv, zone_labels, zone_statistics_coverage_many, zone_statistics_many,
                             zones_off_the_grid)
from ..planning.plan import Plan
from ..planning.provenance import file_fingerprint, settings_hash
from .products import composite_paths

__all__ = ["run_zones", "ZONES_RECORD", "PRODUCTS_PER_PASS"]

#: what each table in zones/ was made from (a rerun keeps the tables whose sources are unchanged)
ZONES_RECORD = ".radledger-zones.json"
#: products summarised in one computation (zone labels shared; memory bounded by chunks x this)
PRODUCTS_PER_PASS = 8


@dataclass(frozen=True)
class _Target:
    product: Path                      # a net_radiation product or a composite statistic file
    series: tuple[str, str] | None = None   # (product name, scenes|days) of a dated product, else None
    when: object = None                # its date or scene time
    units: str = ""

    @property
    def table(self) -> str:
        return f"{self.product.stem}.csv"


def _targets(plan: Plan) -> list[_Target]:
    """Each finished net_radiation product (scenes, days, a scene's daily estimate) and composite file."""
    out = []
    for job in plan.jobs:
        kind = TimeKind(job.kind)
        when = job.when if kind is TimeKind.SCENES else job.day
        p = job.outputs.get("net_radiation")
        if p is not None and p.exists():
            out.append(_Target(p, ("net_radiation", str(kind)), when, product_info("net_radiation", kind).units))
        if job.day_output is not None and job.day_output.exists():
            out.append(_Target(job.day_output, (SCENE_DAY_PRODUCT, str(kind)), when,
                               product_info(SCENE_DAY_PRODUCT, TimeKind.DAYS).units))
    for comp in plan.cfg.composites:
        out += [_Target(p) for p in composite_paths(plan, comp).values() if p.exists()]
    return out


def _warn_off_grid(plan: Plan, zones, engine: Engine) -> None:
    """The run summary's warning for each zone that lies partly or wholly off the grid."""
    for zone_id, inside in zones_off_the_grid(zones, plan.grid):
        where = "lies outside the grid" if inside == 0 else f"has only {inside:.1%} of its area on the grid"
        engine.events.warn(f"zones.path: {plan.cfg.zones.path}: zone {zone_id!r} {where}; its coverage counts "
                           f"the rest as not valid and area_km2 is the whole polygon's")


def run_zones(plan: Plan, engine: Engine, *, overwrite: bool = False) -> tuple[list[Path], list[Path]]:
    """The zone tables that are not current, then the season tables; (written, kept) paths."""
    z = plan.cfg.zones
    folder = plan.out / "zones"
    record_path = folder / ZONES_RECORD
    record = {} if overwrite else read_record(record_path)
    before = dict(record)
    made_from = [file_fingerprint(str(z.path)), z.id, z.weighting, plan.grid.identity]
    targets = _targets(plan)
    keys = {t.table: settings_hash(made_from, read_tags(t.product).get("settings_hash")) for t in targets}
    todo = [t for t in targets if record.get(t.table) != keys[t.table] or not (folder / t.table).exists()]
    redo = {t.table for t in todo}
    written, kept = [], [folder / t.table for t in targets if t.table not in redo]
    folder.mkdir(parents=True, exist_ok=True)
    if todo:
        zones = read_zones(z.path, z.id, plan.grid)
        _warn_off_grid(plan, zones, engine)
        labels = zone_labels(zones, plan.grid) if z.weighting == "centre" else None
        for k in range(0, len(todo), PRODUCTS_PER_PASS):
            group = todo[k:k + PRODUCTS_PER_PASS]
            values = [read_product(str(t.product), plan.grid) for t in group]
            label = f"zones {group[0].product.stem}" + (f" .. {group[-1].product.stem}" if len(group) > 1 else "")
            compute = lambda *x, label=label: engine.compute(*x, label=label)  # noqa: E731
            if labels is not None:
                tables = zone_statistics_many(values, labels, zones, plan.grid, compute=compute)
            else:
                tables = zone_statistics_coverage_many(values, zones, plan.grid, compute=compute)
            for t, rows in zip(group, tables):
                written.append(write_zone_csv(rows, folder / t.table, z.id))
                record[t.table] = keys[t.table]
            write_record(record_path, record)      # a failure later keeps what is done
    w, k = _season_tables(targets, folder, record, z.id)
    if record != before or not record_path.exists():     # an unchanged rerun leaves the record as it was
        write_record(record_path, record)
    return written + w, kept + k


def _season_tables(targets: list[_Target], folder: Path, record: dict, id_field: str
                   ) -> tuple[list[Path], list[Path]]:
    """One long table per (product, kind) from its per-date tables; kept when no member changed."""
    series: dict[tuple[str, str], list[_Target]] = {}
    for t in targets:
        if t.series is not None:
            series.setdefault(t.series, []).append(t)
    written, kept = [], []
    for (name, kind), members in sorted(series.items()):
        out = folder / f"{name}_{kind}.csv"
        key = settings_hash(sorted((t.table, record.get(t.table)) for t in members))
        if record.get(out.name) == key and out.exists():
            kept.append(out)
            continue
        written.append(write_zone_series([(t.when, folder / t.table) for t in members], out, id_field,
                                         members[0].units))
        record[out.name] = key
    return written, kept
