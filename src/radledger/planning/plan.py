"""From a validated config to a plan: the grid, the emissivity lookup and every job.

Building a plan opens each input once (header only, plus a small decimated
sample for the unit checks) and never reads a scene.  All problems are
collected, so ``radledger check`` reports them together.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..config import Config
from ..errors import GridError, InputError, Problems, RadledgerError
from ..grid import TargetGrid
from ..io.gdalenv import gdal_env
from ..io.paths import gdal_path
from ..io.rasters import open_dataset
from ..io.tables import read_emissivity_table
from ..kinds import TimeKind
from ..model.params import DayParams, SceneParams
from ..model.products import SCENE_DAY_PRODUCT
from ..model.surface import unknown_classes_message
from ..physics.emissivity import build_lookup, missing_classes
from .checks import land_cover_classes, output_problems
from .jobs import JobBuilder

__all__ = ["Plan", "Job", "make_plan", "build_grid", "unknown_classes_error"]


@dataclass
class Job:
    """One scene or day: its inputs, parameters and product paths."""
    kind: TimeKind
    label: str                         # e.g. 20260714T1810 or 20260714
    when: dt.datetime | dt.date
    sources: dict[str, object]        # layer -> LayerSource | StackSource | AlbedoBetweenScenes
    params: SceneParams | DayParams
    outputs: dict[str, Path]           # product -> final path
    settings_hash: str
    day_output: Path | None = None     # scene -> day product (methods.scene_to_day)
    notes: tuple[str, ...] = ()        # what the user should know about this job (check, run summary)
    entry: str = ""                    # the config entry it comes from, e.g. days[0]

    @property
    def day(self) -> dt.date:
        """The date of the job (a scene's UTC date)."""
        return self.when.date() if isinstance(self.when, dt.datetime) else self.when

    def targets(self) -> dict[str, Path]:
        """Every product of the job and its final path (a scene's day product included)."""
        targets = dict(self.outputs)
        if self.day_output is not None:
            targets[SCENE_DAY_PRODUCT] = self.day_output
        return targets


@dataclass
class Plan:
    cfg: Config
    grid: TargetGrid
    jobs: list[Job] = field(default_factory=list)
    lut: np.ndarray | None = None
    classes_present: list[int] = field(default_factory=list)
    skipped: list[tuple[str, str]] = field(default_factory=list)   # (job, why): on_missing: skip

    @property
    def out(self) -> Path:
        return self.cfg.output.directory

    def estimated_bytes(self, n_products: int | None = None) -> int:
        """A generous upper bound of the disk a run needs (intermediate + COG of the largest product)."""
        px = self.grid.width * self.grid.height
        if n_products is None:
            n_products = sum(len(j.outputs) + (j.day_output is not None) for j in self.jobs)
        n_products += sum(len(c.statistics) for c in self.cfg.composites)
        # float32 COG ~ 0.75 x raw after ZSTD + 1/3 overviews; plus one raw intermediate in flight
        return int(px * 4 * (n_products * 1.0 + len(self.cfg.output.products)))


def unknown_classes_error(cfg: Config, classes) -> InputError:
    lc = cfg.static.get("land_cover")
    return InputError(unknown_classes_message(lc.path if lc else "land cover", cfg.emissivity.table, classes))


def build_grid(cfg: Config) -> TargetGrid:
    g = cfg.grid
    if g.like:
        spec = cfg.static[g.like]
        if spec.is_stack:
            raise GridError(f"{spec.path}: grid.like layer {g.like} is a time stack; define the grid by a raster "
                            f"or by crs, resolution and bounds")
        path = spec.path
        with gdal_env():
            ds = open_dataset(gdal_path(path), path)
            if ds.crs is None:
                raise GridError(f"{path}: grid.like layer {g.like} has no CRS; assign one first")
            return TargetGrid.from_dataset(ds, chunk=g.chunk)
    return TargetGrid.from_bounds(g.crs, g.resolution, g.bounds, chunk=g.chunk)


def make_plan(cfg: Config, *, inspect_inputs: bool = True, force: bool = False,
              scan_classes: bool = True) -> Plan:
    """Build the plan; raise :class:`Problems` (or one error) naming every problem found."""
    problems: list[RadledgerError] = []
    grid = build_grid(cfg)
    plan = Plan(cfg=cfg, grid=grid)
    n_dated = len(cfg.scenes) + len(cfg.days)
    early = output_problems(plan.out, plan.estimated_bytes(n_dated * len(cfg.output.products)), force=force)
    if early:
        raise early[0]

    # emissivity: the lookup holds NaN for classes the table lacks; the kernels then use
    # emissivity.unknown (flagged) or stop with the classes named.  `check` (scan_classes)
    # also scans the whole land cover first, to name every missing class at once.
    lut = None
    unknown = None
    builder = JobBuilder(cfg, grid, None, None, inspect=inspect_inputs)
    if cfg.scenes and cfg.emissivity.constant is None:
        try:
            table = read_emissivity_table(cfg.emissivity.table)
            unknown = None if cfg.emissivity.unknown == "error" else float(cfg.emissivity.unknown)
            lut = build_lookup(table, unknown=None)
            lc = builder.source("land_cover", cfg.static["land_cover"], TimeKind.SCENES, None)
            if inspect_inputs and scan_classes:
                present = land_cover_classes(lc, grid)
                plan.classes_present = present
                absent = missing_classes(present, table)
                if absent and unknown is None:
                    problems.append(unknown_classes_error(cfg, absent))
        except RadledgerError as exc:
            problems.append(exc)
    plan.lut = lut
    builder.lut, builder.unknown = lut, unknown
    plan.jobs = builder.scene_jobs(Job) + builder.day_jobs(Job)
    problems.extend(builder.problems)
    plan.skipped = builder.skipped

    if cfg.zones is not None and inspect_inputs:
        from ..io.vectors import read_zones   # GEOS and OGR load only for runs with zones
        try:
            read_zones(cfg.zones.path, cfg.zones.id, grid)
        except RadledgerError as exc:
            problems.append(exc)
    problems.extend(output_problems(plan.out, plan.estimated_bytes(), force=force))
    if problems:
        if len(problems) == 1:
            raise problems[0]
        raise Problems(_flatten(problems))
    return plan


def _flatten(problems):
    out = []
    for p in problems:
        out.extend(p.problems if isinstance(p, Problems) else [p])
    return out


