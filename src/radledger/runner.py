"""``radledger run``: the stages a config asks for, in dependency order.

the static terrain layers (methods.terrain) -> scenes and days (each product
written as soon as it is complete) -> composites over the finished day/scene
products -> zone tables -> NetCDF
stacks -> Zarr stores -> STAC catalog -> quicklooks.  A rerun skips products
whose inputs and settings are unchanged (their ``settings_hash`` tag) and
finishes the rest.
"""

from __future__ import annotations

import os
import time
from dataclasses import dataclass, field
from pathlib import Path

from .config import Config, load_config
from .execution.engine import Engine
from .execution.events import RunEvents
from .execution.graph import JobResult
from .io.cog import sweep_partials
from .planning.plan import Plan, make_plan
from .stages.composites import run_composite
from .stages.jobs import run_jobs
from .stages.netcdf import run_netcdf
from .stages.quicklooks import run_quicklooks
from .stages.stac import run_stac
from .stages.terrain import run_terrain
from .stages.zarr import run_zarr
from .stages.zones import run_zones

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


def run(config: str | os.PathLike, *, overwrite: bool = False, scheduler: str | None = None,
        force: bool = False, output: str | None = None, events: RunEvents | None = None) -> list[Path]:
    """Do everything ``config`` asks for; return the paths of every product (written or current)."""
    cfg = load_config(config, output_override=output)
    return run_config(cfg, overwrite=overwrite, scheduler=scheduler, force=force, events=events).paths


def run_config(cfg: Config, *, overwrite: bool = False, scheduler: str | None = None, force: bool = False,
               events: RunEvents | None = None) -> RunReport:
    """Run every stage of ``cfg``; ``events`` hears of each step (silent by default)."""
    events = events or RunEvents()
    t0 = time.monotonic()
    # the whole-land-cover class scan is left to `check`; a run meets unknown classes in its
    # chunk tasks and then scans once, to name every missing class (stages/jobs.py)
    plan = make_plan(cfg, force=force, scan_classes=False)
    report = RunReport(plan)
    engine = Engine(scheduler, events=events)
    created = _missing_dirs(cfg.output.directory)
    try:
        cfg.output.directory.mkdir(parents=True, exist_ok=True)
        stale = sweep_partials(cfg.output.directory)
        if stale:
            events.swept(stale)
        events.started(plan, engine)
        for label, why in plan.skipped:
            events.warn(f"{label} skipped (on_missing: skip): {why}")
        if cfg.methods.terrain != "none":
            w, s = run_terrain(plan, engine, overwrite=overwrite)
            report.written += w
            report.skipped += s
            events.stage_done("terrain", len(w), len(s))
        report.results = run_jobs(plan, engine, overwrite=overwrite)
        for r in report.results:
            report.written += r.written
            report.skipped += r.skipped
        for comp in cfg.composites:
            w, s = run_composite(plan, comp, engine, overwrite=overwrite)
            report.written += w
            report.skipped += s
            events.stage_done(f"composite {comp.name}", len(w), len(s))
        if cfg.zones is not None:
            w = run_zones(plan, engine)
            report.written += w
            events.stage_done("zones", len(w))
        if cfg.output.netcdf:
            w = run_netcdf(plan)
            report.written += w
            events.stage_done("netcdf", len(w))
        if cfg.output.zarr:
            w, s = run_zarr(plan, engine, overwrite=overwrite)
            report.written += w
            report.skipped += s
            events.stage_done("zarr", len(w), len(s))
        if cfg.output.stac:
            w = run_stac(plan)
            report.written += w
            events.stage_done("stac", len(w))
        if cfg.output.quicklooks:
            w = run_quicklooks(plan, report.paths, overwrite=overwrite)
            report.written += w
            events.stage_done("quicklooks", len(w))
    except BaseException:
        _remove_empty(cfg.output.directory, created)
        raise
    finally:
        engine.close()
    report.seconds = time.monotonic() - t0
    events.finished(report)
    return report


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
