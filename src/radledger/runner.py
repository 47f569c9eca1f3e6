"""``radledger run``: the stages a config asks for, in dependency order.

the static terrain layers (methods.terrain) -> scenes and days (each
product written as soon as it is complete) ->
composites over the finished day/scene products -> zone tables -> NetCDF
stacks -> Zarr stores -> STAC catalog -> quicklooks -> validation against
net radiometers (weather grids from station tables come first).  A rerun
skips products whose inputs and settings are unchanged (their
``settings_hash`` tag) and finishes the rest.

Around the stages: one run at a time per output folder (a second one waits),
a sweep of temporaries whose owner is gone, a disk estimate that counts only
products not on disk yet, a check that no input changed while its products
were computed, and after a failure the removal of the empty folders this run
created (never folders that were there before).
"""

from __future__ import annotations

import os
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path
from contextlib import contextmanager
from typing import Callable, Iterator

from .config import Config, load_config
from .errors import DiskFullError, InputError
from .execution.engine import Engine
from .execution.events import RunEvents
from .execution.graph import JobResult
from .io.cog import before_rename
from .io.gdalenv import gdal_env
from .io.lock import RunLock, sweep_partials
from .io.objectstore import StoreMirror
from .io.remote import fingerprint_session
from .io.space import free_bytes, human_bytes, write_failure
from .planning.checks import output_problems, remaining_bytes
from .planning.plan import Plan, make_plan
from .planning.provenance import sources_fingerprint
from .stages.jobs import run_jobs
from .stages.products import composite_paths

__all__ = ["run", "run_config", "RunReport", "space_needed", "disk_problems"]


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


def space_needed(plan: Plan) -> int:
    """Disk the run still needs: products not on disk yet, and the temporaries of one job in flight."""
    targets = [p for j in plan.jobs for p in j.targets().values()]
    targets += [p for c in plan.cfg.composites for p in composite_paths(plan, c).values()]
    in_flight = max((len(j.targets()) for j in plan.jobs), default=1)
    return remaining_bytes(plan.grid.width * plan.grid.height, targets, in_flight)


def disk_problems(plan: Plan, *, force: bool = False) -> list:
    """The output folder is writable and what is still missing fits on its disk (unless ``force``)."""
    return output_problems(plan.out, space_needed(plan), force=force)


def run_config(cfg: Config, *, overwrite: bool = False, scheduler: str | None = None, force: bool = False,
               events: RunEvents | None = None, on_wait: Callable[[str], None] | None = None) -> RunReport:
    """Run every stage of ``cfg``; ``events`` hears of each step (silent by default).

    ``on_wait`` hears, once, that another run holds the output folder and this one waits for it.
    """
    events = events or RunEvents()
    waiting = on_wait or getattr(events, "waiting", None)
    t0 = time.monotonic()
    store = StoreMirror(cfg.output.staging, cfg.output.store) if cfg.output.store else None
    if store is not None:              # objects of earlier runs: the plan then keeps the current ones
        with _locked(cfg.output.directory, waiting), gdal_env():
            pulled = store.pull()
        if pulled:
            events.stage_done(f"copied from {cfg.output.store}", len(pulled), 0)
    # the whole-land-cover class scan is left to `check`; a run meets unknown classes in its
    # chunk tasks and then scans once, to name every missing class (stages/jobs.py).  The disk
    # check is made below, once this run holds the output folder.
    with fingerprint_session():          # each remote input asked once while planning
        plan = make_plan(cfg, force=True, scan_classes=False)
        guard = _InputGuard(plan)
    report = RunReport(plan)
    out = cfg.output.directory
    engine = Engine(scheduler, events=events)
    created = _missing_dirs(out)
    lock = RunLock(out)
    failed = True
    try:
        try:
            lock.acquire(on_wait=waiting)
        except OSError as exc:       # the folder or its lock file cannot be made (no space, no inodes, ...)
            raise write_failure(lock.path, exc) from None
        before = _entries(out)
        try:
            problems = disk_problems(plan, force=force)
            if problems:
                raise problems[0]
            stale = sweep_partials(out)
            if stale:
                events.swept(stale)
            events.started(plan, engine)
            with before_rename(guard):
                _stages(plan, engine, report, overwrite)
        except DiskFullError as exc:
            _remove_new_folders(out, before)
            raise _whole_run(plan, exc) from None
        except BaseException:
            _remove_new_folders(out, before)
            raise
        failed = False
    finally:
        engine.close()
        try:
            in_flight = sys.exc_info()[1]
            if store is not None and lock.held and isinstance(in_flight, (Exception, type(None))):
                try:                  # what is finished goes to the store (not after Ctrl-C or SIGTERM)
                    with gdal_env():
                        sent, same = store.push()
                    events.stage_done(f"uploaded to {cfg.output.store}", len(sent), len(same))
                except Exception:
                    if in_flight is None:
                        raise         # else the run's own failure is the one to report
        finally:
            lock.release()
        if failed:
            _remove_created(created)
    report.seconds = time.monotonic() - t0
    events.finished(report)
    return report


def _stages(plan: Plan, engine: Engine, report: RunReport, overwrite: bool) -> None:
    """Every stage the config asks for, in order; a stage imports what it needs only when asked for."""
    cfg, events = plan.cfg, engine.events
    for label, why in plan.skipped:
        events.warn(f"{label} skipped (on_missing: skip): {why}")

    def add(stage: str, written, skipped=()) -> None:
        report.written += written
        report.skipped += skipped
        events.stage_done(stage, len(written), len(skipped))

    if cfg.stations is not None:
        from .stages.weather import run_weather
        add("weather", *run_weather(plan, engine, overwrite=overwrite))
    if cfg.methods.terrain != "none":
        from .stages.terrain import run_terrain
        add("terrain", *run_terrain(plan, engine, overwrite=overwrite))
    streams = {}
    if cfg.composites:   # composites whose dates are all computed now accumulate as the dates go by
        from .stages.streams import composite_streams
        streams = {s.comp.name: s for s in composite_streams(plan, engine, overwrite=overwrite)}
    try:
        report.results = run_jobs(plan, engine, overwrite=overwrite, streams=tuple(streams.values()))
    except BaseException:
        for s in streams.values():
            s.acc.remove()
        raise
    for r in report.results:
        report.written += r.written
        report.skipped += r.skipped
    for comp in cfg.composites:
        from .stages.composites import run_composite
        add(f"composite {comp.name}", *run_composite(plan, comp, engine, overwrite=overwrite,
                                                     stream=streams.get(comp.name)))
    if cfg.zones is not None:
        from .stages.zones import run_zones
        add("zones", *run_zones(plan, engine, overwrite=overwrite))
    if cfg.output.netcdf:
        from .stages.netcdf import run_netcdf
        add("netcdf", *run_netcdf(plan, overwrite=overwrite))
    if cfg.output.zarr:
        from .stages.zarr import run_zarr
        add("zarr", *run_zarr(plan, engine, overwrite=overwrite))
    if cfg.output.stac:
        from .stages.stac import run_stac
        add("stac", run_stac(plan))
    if cfg.output.quicklooks:
        from .stages.quicklooks import run_quicklooks
        add("quicklooks", *run_quicklooks(plan, report.paths, overwrite=overwrite))
    if cfg.validation is not None:
        from .stages.validation import run_validation
        add("validation", run_validation(plan, engine))


class _InputGuard:
    """Before a job's first product is renamed into place: its inputs are still those the plan saw.

    The products' settings hash records the inputs' fingerprints when the run
    started; an input rewritten since (before or during its job) would give a
    product that is half old, half new, or one whose tags lie.  That job then
    fails, naming the file, and nothing of it is renamed into place.
    """

    def __init__(self, plan: Plan):
        self.jobs = {}
        self.before = {}
        self.checked: set[int] = set()
        for i, job in enumerate(plan.jobs):
            self.before[i] = sources_fingerprint(job.sources)
            for p in job.targets().values():
                self.jobs[Path(p)] = (i, job)

    def __call__(self, final: Path) -> None:
        hit = self.jobs.get(Path(final))
        if hit is None or hit[0] in self.checked:
            return
        i, job = hit
        now = sources_fingerprint(job.sources, fresh=True)
        for (layer, src), a, b in zip(job.sources.items(), self.before[i], now):
            if a != b:
                raise InputError(f"{src.path}: input {layer} changed while this run was reading it "
                                 f"({job.kind.singular} {job.label}); its products were not written - rerun "
                                 f"once the file is no longer being written")
        self.checked.add(i)


def _whole_run(plan: Plan, exc: DiskFullError) -> DiskFullError:
    """A full disk, said for the whole run: what the rest of it needs and what is free."""
    need, free = space_needed(plan), free_bytes(plan.out)
    if free is None or free >= need:
        return exc          # not simply out of space (a file size limit, say): keep its own words
    return DiskFullError(f"{plan.out}: the disk is full: about {human_bytes(need)} more is needed to finish "
                         f"and {human_bytes(free)} is free; free some space (or choose another "
                         f"output.directory) and rerun - finished products are kept and the rerun resumes "
                         f"where this one stopped")


def _missing_dirs(directory: Path) -> list[Path]:
    """``directory`` and those of its parents that do not exist yet (innermost first)."""
    out = []
    d = Path(directory)
    while not d.exists() and d.parent != d:
        out.append(d)
        d = d.parent
    return out


def _entries(directory: Path) -> set[str]:
    try:
        return set(os.listdir(directory))
    except OSError:
        return set()


def _remove_new_folders(directory: Path, before: set[str]) -> None:
    """After a failed run: remove the empty folders it made inside ``directory``, nothing else.

    Folders made inside a folder this run created were made by this run too
    (it holds the folder's lock); folders that were there before are left alone,
    empty or not.
    """
    for name in _entries(directory) - before:
        top = Path(directory) / name
        if not top.is_dir() or top.is_symlink():
            continue
        for root, dirs, files in os.walk(top, topdown=False):
            if not files:
                try:
                    os.rmdir(root)
                except OSError:
                    pass


def _remove_created(created: list[Path]) -> None:
    """The output folder and its parents, if this run created them and they are empty."""
    for p in created:
        try:
            p.rmdir()
        except OSError:
            break


@contextmanager
def _locked(folder: Path, on_wait) -> Iterator[None]:
    """Hold ``folder``'s run lock for the block (the folder is made if missing)."""
    lock = RunLock(folder)
    lock.acquire(on_wait=on_wait)
    try:
        yield
    finally:
        lock.release()
