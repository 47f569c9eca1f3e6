"""From a validated config to a plan: the grid, the emissivity lookup and every job.

Building a plan opens each input once (header only, plus a small decimated
sample for the unit checks) and never reads a scene.  All problems are
collected, so ``radledger check`` reports them together.
"""

from __future__ import annotations

import datetime as dt
import hashlib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .._version import __version__
from ..config import Config
from ..errors import GridError, InputError, Problems, RadledgerError
from ..grid import TargetGrid
from ..io.gdalenv import gdal_env
from ..io.paths import gdal_path
from ..io.rasters import LayerSource, check_overlap, open_dataset
from ..io.tables import read_emissivity_table
from ..io.vectors import read_zones
from ..kinds import TimeKind
from ..model.needs import day_needs, scene_needs
from ..model.params import DayParams, SceneParams
from ..model.products import DAY_PRODUCTS, SCENE_DAY_PRODUCT, SCENE_PRODUCTS
from ..model.surface import unknown_classes_message
from ..physics.emissivity import build_lookup, missing_classes
from .checks import check_sample, land_cover_classes, output_problems
from .provenance import settings_hash, sources_fingerprint
from .sources import layer_source

__all__ = ["Plan", "Job", "make_plan", "build_grid", "unknown_classes_error"]


@dataclass
class Job:
    """One scene or day: its inputs, parameters and product paths."""
    kind: TimeKind
    label: str                         # e.g. 20260714T1810 or 20260714
    when: dt.datetime | dt.date
    sources: dict[str, LayerSource]
    params: SceneParams | DayParams
    outputs: dict[str, Path]           # product -> final path
    settings_hash: str
    day_output: Path | None = None     # scene -> day product (methods.scene_to_day)
    notes: tuple[str, ...] = ()        # what the user should know about this job (check, run summary)

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


DEFAULT_ALBEDO_NOTE = ("no albedo: FAO-56's grass reference 0.23 used everywhere (flagged albedo_default; "
                       "wrong over snow, water and forest)")


def unknown_classes_error(cfg: Config, classes) -> InputError:
    return InputError(unknown_classes_message(cfg.static.get("land_cover"), cfg.emissivity.table, classes))


def build_grid(cfg: Config) -> TargetGrid:
    g = cfg.grid
    if g.like:
        path = cfg.static[g.like]
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
    sources_cache: dict[tuple[str, str, str], LayerSource] = {}

    def source(layer: str, path: str, kind: TimeKind) -> LayerSource | None:
        key = (layer, path, kind)
        if key in sources_cache:
            return sources_cache[key]
        try:
            src = layer_source(cfg, layer, path, kind=kind)
            if inspect_inputs:
                check_overlap(src, grid)
                check_sample(src, kind=kind)
        except RadledgerError as exc:
            problems.append(exc)
            src = None
        sources_cache[key] = src
        return src

    # emissivity: the lookup holds NaN for classes the table lacks; the kernels then use
    # emissivity.unknown (flagged) or stop with the classes named.  `check` (scan_classes)
    # also scans the whole land cover first, to name every missing class at once.
    lut = None
    unknown = None
    if cfg.scenes and cfg.emissivity.constant is None:
        try:
            table = read_emissivity_table(cfg.emissivity.table)
            unknown = None if cfg.emissivity.unknown == "error" else float(cfg.emissivity.unknown)
            lut = build_lookup(table, unknown=None)
            lc = source("land_cover", cfg.static["land_cover"], TimeKind.SCENES)
            if lc is not None and inspect_inputs and scan_classes:
                present = land_cover_classes(lc, grid)
                plan.classes_present = present
                absent = missing_classes(present, table)
                if absent and unknown is None:
                    problems.append(unknown_classes_error(cfg, absent))
        except RadledgerError as exc:
            problems.append(exc)
    plan.lut = lut

    products = cfg.output.products
    out = cfg.output.directory
    methods = cfg.methods
    common = [__version__, grid.identity, cfg.output.compression]
    for scene in cfg.scenes:
        want = tuple(p for p in products if p in SCENE_PRODUCTS)
        needs = scene_needs(scene.layers, products=want, sky_emissivity=methods.sky_emissivity,
                            clouds=methods.clouds, scene_to_day=methods.scene_to_day,
                            emissivity_constant=cfg.emissivity.constant is not None)
        srcs = {k: source(k, scene.layers[k], TimeKind.SCENES) for k in needs.layers}
        if any(v is None for v in srcs.values()):
            continue
        params = SceneParams(time=scene.time, products=want + ((SCENE_DAY_PRODUCT,) if
                                                             methods.scene_to_day != "none" else ()),
                             needs=needs, sky_emissivity=methods.sky_emissivity, clouds=methods.clouds,
                             clear_sky_shortwave=methods.clear_sky_shortwave, emissivity_lut=lut,
                             emissivity_constant=cfg.emissivity.constant, emissivity_unknown=unknown,
                             land_cover_path=cfg.static.get("land_cover", ""),
                             emissivity_table=cfg.emissivity.table or "",
                             scene_to_day=methods.scene_to_day)
        h = settings_hash(common, sources_fingerprint(srcs),
                          repr(params), hashlib.sha256(lut.tobytes()).hexdigest() if lut is not None else None)
        outputs = {p: out / "scenes" / f"{p}_{scene.stamp}.tif" for p in want}
        day_output = None
        if methods.scene_to_day != "none":
            day_output = out / "days" / f"{SCENE_DAY_PRODUCT}_{scene.stamp}.tif"
        plan.jobs.append(Job(TimeKind.SCENES, scene.stamp, scene.time, srcs, params, outputs, h,
                             day_output=day_output))
    for day in cfg.days:
        want = tuple(p for p in products if p in DAY_PRODUCTS)
        needs = day_needs(day.layers, products=want)
        srcs = {k: source(k, day.layers[k], TimeKind.DAYS) for k in needs.layers}
        if any(v is None for v in srcs.values()):
            continue
        params = DayParams(date=day.date, products=want, needs=needs,
                           shortwave_daylight_mean=srcs["shortwave_down"].units == "W m-2 daylight")
        h = settings_hash(common, sources_fingerprint(srcs), repr(params))
        outputs = {p: out / "days" / f"{p}_{day.stamp}.tif" for p in want}
        notes = () if "albedo" in srcs else (DEFAULT_ALBEDO_NOTE,)
        plan.jobs.append(Job(TimeKind.DAYS, day.stamp, day.date, srcs, params, outputs, h, notes=notes))

    if cfg.zones is not None and inspect_inputs:
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


