"""``radledger run``: everything a config asks for, in dependency order.

scenes and days (each product written as soon as it is complete) ->
composites over the finished day/scene products -> zone tables -> NetCDF
stacks -> quicklooks.  A rerun skips products whose inputs and settings are
unchanged (their ``settings_hash`` tag) and finishes the rest.
"""

from __future__ import annotations

import os
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from . import __version__
from .config import Config, CompositeSpec, load_config
from .engine import Engine
from .errors import UnknownClassError
from .pipeline import JobResult, is_current, print_summary, run_job
from .plan import Plan, make_plan, settings_hash
from .products import QUALITY_BITS, product_info
from .writers import ProductFile, read_tags, sweep_partials

__all__ = ["run", "run_config", "RunReport"]


@dataclass
class RunReport:
    plan: Plan
    written: list[Path] = field(default_factory=list)
    skipped: list[Path] = field(default_factory=list)
    results: list[JobResult] = field(default_factory=list)
    seconds: float = 0.0

    @property
    def paths(self) -> list[Path]:
        return self.written + self.skipped


def run(config: str | os.PathLike, *, overwrite: bool = False, quiet: bool = True,
        scheduler: str | None = None, force: bool = False, output: str | None = None) -> list[Path]:
    """Do everything ``config`` asks for; return the paths of every product (written or current)."""
    cfg = load_config(config, output_override=output)
    return run_config(cfg, overwrite=overwrite, quiet=quiet, scheduler=scheduler, force=force).paths


def run_config(cfg: Config, *, overwrite: bool = False, quiet: bool = True, scheduler: str | None = None,
               force: bool = False, stream=None) -> RunReport:
    stream = stream or sys.stdout   # looked up at call time (sys.stdout may be replaced)
    t0 = time.monotonic()
    say = (lambda *a: None) if quiet else (lambda *a: print(*a, file=stream, flush=True))
    # the whole-land-cover class scan is left to `check`; a run meets unknown classes in its
    # chunk tasks and then scans once, to name every missing class (see _name_all_classes)
    plan = make_plan(cfg, force=force, scan_classes=False)
    report = RunReport(plan)
    show_progress = not quiet and sys.stderr.isatty()
    engine = Engine(scheduler, progress=show_progress)
    created = _missing_dirs(cfg.output.directory)
    try:
        cfg.output.directory.mkdir(parents=True, exist_ok=True)
        stale = sweep_partials(cfg.output.directory)
        if stale:
            say(f"removed {len(stale)} temporary file(s) left by an interrupted run")
        say(f"radledger {__version__}: {len(plan.jobs)} job(s) on {engine.kind}; grid {plan.grid.describe()}")
        for job in plan.jobs:
            try:
                r = run_job(plan, job, engine, overwrite=overwrite)
            except UnknownClassError:
                raise _name_all_classes(plan) from None
            report.results.append(r)
            report.written += r.written
            report.skipped += r.skipped
            if r.written:
                say(f"  {job.kind[:-1]} {job.label}: wrote {len(r.written)} product(s)")
            elif r.skipped:
                say(f"  {job.kind[:-1]} {job.label}: up to date, skipped")
        for comp in cfg.composites:
            w, s = run_composite(plan, comp, engine, overwrite=overwrite)
            report.written += w
            report.skipped += s
            say(f"  composite {comp.name}: wrote {len(w)}, up to date {len(s)}")
        if cfg.zones is not None:
            w = run_zones(plan, report)
            report.written += w
            say(f"  zones: wrote {len(w)} table(s)")
        if cfg.output.netcdf:
            w = run_netcdf(plan)
            report.written += w
            say(f"  netcdf: wrote {len(w)} stack(s)")
        if cfg.output.quicklooks:
            w = run_quicklooks(plan, report, overwrite=overwrite)
            report.written += w
            say(f"  quicklooks: wrote {len(w)} PNG(s)")
    except BaseException:
        _remove_empty(cfg.output.directory, created)
        raise
    finally:
        engine.close()
    report.seconds = time.monotonic() - t0
    if not quiet:
        print_summary(report.results, stream)
        say(f"done in {report.seconds:.1f} s: {len(report.written)} written, {len(report.skipped)} up to date, "
            f"under {cfg.output.directory}")
    return report


def _name_all_classes(plan: Plan) -> Exception:
    from .physics.emissivity import missing_classes
    from .plan import land_cover_classes, unknown_classes_error
    from .tables import read_emissivity_table

    cfg = plan.cfg
    src = next(j.sources["land_cover"] for j in plan.jobs if "land_cover" in j.sources)
    absent = missing_classes(land_cover_classes(src, plan.grid), read_emissivity_table(cfg.emissivity.table))
    return unknown_classes_error(cfg, absent)


def _missing_dirs(directory: Path) -> list[Path]:
    """``directory`` and those of its parents that do not exist yet (outermost last)."""
    out = []
    d = Path(directory)
    while not d.exists() and d.parent != d:
        out.append(d)
        d = d.parent
    return out


def _remove_empty(directory: Path, created: list[Path]) -> None:
    """After a failed run: remove empty product folders, and folders this run created."""
    d = Path(directory)
    if d.exists():
        for sub in sorted((p for p in d.rglob("*") if p.is_dir()), key=lambda p: len(p.parts), reverse=True):
            try:
                sub.rmdir()
            except OSError:
                pass
    for p in created:
        try:
            p.rmdir()
        except OSError:
            break


# ---------------------------------------------------------------- composites
def _net_radiation_files(plan: Plan, kind: str, start, end) -> list[tuple[object, Path]]:
    """Finished net-radiation products of ``kind`` dated within [start, end]."""
    out = []
    for job in plan.jobs:
        day = job.when.date() if hasattr(job.when, "date") and callable(job.when.date) else job.when
        if kind == "days":
            path = job.outputs.get("net_radiation") if job.kind == "days" else job.day_output
        else:
            path = job.outputs.get("net_radiation") if job.kind == "scenes" else None
        if path is not None and start <= day <= end and path.exists():
            out.append((job.when if kind == "scenes" else day, path))
    return sorted(out, key=lambda t: str(t[0]))


def composite_paths(plan: Plan, comp: CompositeSpec) -> dict[str, Path]:
    return {s: plan.out / "composites" / f"{comp.name}_{s}.tif" for s in comp.statistics}


def run_composite(plan: Plan, comp: CompositeSpec, engine: Engine, *, overwrite: bool):
    import dask.array as da

    from .composite import composite

    members = _net_radiation_files(plan, comp.source, comp.start, comp.end)
    h = settings_hash(__version__, plan.grid.describe(), repr(comp), plan.cfg.output.compression,
                      [(str(p), read_tags(p).get("settings_hash")) for _, p in members])
    targets = composite_paths(plan, comp)
    todo = {s: p for s, p in targets.items() if overwrite or not is_current(p, h)}
    skipped = [p for s, p in targets.items() if s not in todo]
    if not todo:
        return [], skipped
    if not members:
        # an empty window still gets products: NaN everywhere, count 0
        pass
    arrays = composite([str(p) for _, p in members], plan.grid, statistics=tuple(todo),
                       min_count=comp.min_count,
                       window_days=comp.window_days if "total" in todo else None) if members else \
        {s: da.full(plan.grid.shape, 0.0 if s == "count" else np.nan, chunks=plan.grid.chunks,
                    dtype=np.float32) for s in todo}
    base = product_info("net_radiation", comp.source)
    files, sources = [], []
    for s, path in todo.items():
        units = {"count": "1", "total": "MJ m-2"}.get(s, base.units)
        tags = {"quantity": f"net_radiation {s}", "statistic": s, "units": units,
                "standard_name": "" if s in ("count", "total") else (base.standard_name or ""),
                "long_name": f"{s} of {base.long_name} over {comp.start}..{comp.end}",
                "method": f"per-pixel {s} over valid dates; min_count {comp.min_count}"
                          + ("; total = mean x days in window" if s == "total" else ""),
                "time": f"{comp.start.isoformat()}/{comp.end.isoformat()}", "time_kind": "composites",
                "window_days": str(comp.window_days), "members": str(len(members)),
                "inputs": "; ".join(str(p) for _, p in members), "title": plan.cfg.title,
                "software": f"radledger {__version__}", "settings_hash": h}
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


# ---------------------------------------------------------------- zones
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


def run_zones(plan: Plan, report: RunReport) -> list[Path]:
    from .composite import read_product
    from .zones import read_zones, write_zone_csv, zone_labels, zone_statistics

    z = plan.cfg.zones
    zones = read_zones(z.path, z.id, plan.grid)
    labels = zone_labels(zones, plan.grid)
    written = []
    for p in _zone_targets(plan):
        rows = zone_statistics(read_product(str(p), plan.grid), labels, zones, plan.grid)
        out = plan.out / "zones" / f"{p.stem}.csv"
        out.parent.mkdir(parents=True, exist_ok=True)
        write_zone_csv(rows, out, z.id)
        written.append(out)
    return written


# ---------------------------------------------------------------- netcdf
def run_netcdf(plan: Plan) -> list[Path]:
    import datetime as dt

    from .netcdf import write_stack

    written = []
    for kind in ("scenes", "days"):
        by_product: dict[str, list[tuple[object, Path]]] = {}
        for job in plan.jobs:
            items = list(job.outputs.items()) if job.kind == kind else []
            if kind == "days" and job.day_output is not None:
                items.append(("net_radiation", job.day_output))
            for name, path in items:
                if path.exists():
                    when = job.when if kind == "scenes" else (
                        job.when.date() if isinstance(job.when, dt.datetime) else job.when)
                    by_product.setdefault(name, []).append((when, path))
        for name, items in by_product.items():
            items.sort(key=lambda t: str(t[0]))
            info = product_info(name, kind)
            times = [t if isinstance(t, dt.datetime) else dt.datetime(t.year, t.month, t.day,
                                                                     tzinfo=dt.timezone.utc) for t, _ in items]
            bounds = None
            cell = "time: point"
            if kind == "days":
                bounds = [(t, t + dt.timedelta(days=1)) for t in times]
                cell = "time: mean"
            out = plan.out / "netcdf" / f"{name}_{kind}.nc"
            out.parent.mkdir(parents=True, exist_ok=True)
            write_stack([str(p) for _, p in items], times, out, grid=plan.grid, product=info,
                        cell_methods=cell, time_bounds=bounds,
                        flags=QUALITY_BITS if name == "quality" else None,
                        attrs={"title": plan.cfg.title, "source": f"radledger {__version__}"})
            written.append(out)
    return written


# ---------------------------------------------------------------- quicklooks
def _quicklook_args(plan: Plan, path: Path) -> dict:
    tags = read_tags(path)
    name = tags.get("quantity", path.stem)
    stat = tags.get("statistic")
    base = name.split()[0]
    when = tags.get("time", "").replace("T", " ").replace("Z", " UTC")
    title = f"{name.replace('_', ' ')}  {when}".strip()
    if tags.get("time_kind") == "days" and tags.get("daily_total"):
        title += f" ({tags['daily_total']})"
    if tags.get("time_kind") == "scenes" and "shortwave_down=" not in tags.get("inputs", ""):
        title += " (clear-sky shortwave modelled)"
    return dict(title=title, units=tags.get("units", ""),
                diverging=base in ("net_radiation", "net_longwave") and stat not in ("count", "std"),
                categorical_bits=QUALITY_BITS if base == "quality" else None)


def _draw(item) -> None:
    from .quicklook import write_quicklook
    tif, png, kwargs, zones = item
    write_quicklook(tif, png, zones=zones, **kwargs)


def run_quicklooks(plan: Plan, report: RunReport, *, overwrite: bool = False) -> list[Path]:
    """One PNG per GeoTIFF product, skipping PNGs newer than their product.

    """
    zones = None
    if plan.cfg.zones is not None:
        from .zones import read_zones
        zones = read_zones(plan.cfg.zones.path, plan.cfg.zones.id, plan.grid)
    (plan.out / "quicklooks").mkdir(parents=True, exist_ok=True)
    items, written = [], []
    for path in sorted({p for p in report.paths if p.suffix == ".tif"}):
        png = plan.out / "quicklooks" / f"{path.stem}.png"
        written.append(png)
        if not overwrite and png.exists() and png.stat().st_mtime_ns >= path.stat().st_mtime_ns:
            continue
        items.append((str(path), str(png), _quicklook_args(plan, path), zones))
    for item in items:
        _draw(item)
    return written
