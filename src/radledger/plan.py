"""From a validated config to a plan: the grid, the emissivity lookup and every job.

Building a plan opens each input once (header only, plus a small decimated
sample for the unit checks) and never reads a scene.  All problems are
collected, so ``radledger check`` reports them together.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import os
import shutil
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from . import __version__
from .config import Config
from .errors import ConfigError, GridError, InputError, OutputError, Problems, RadledgerError
from .gdalenv import gdal_env
from .grid import TargetGrid
from .inputs import LayerSource, check_overlap, layer_source, open_dataset
from .kernels import DayParams, SceneParams
from .physics.emissivity import build_lookup, missing_classes
from .plausibility import check_sample
from .products import DAY_PRODUCTS, SCENE_PRODUCTS
from .tables import read_emissivity_table

__all__ = ["Plan", "Job", "make_plan", "build_grid"]


@dataclass
class Job:
    """One scene or day: its inputs, parameters and product paths."""
    kind: str                          # "scenes" | "days"
    label: str                         # e.g. 20260714T1810 or 20260714
    when: dt.datetime | dt.date
    sources: dict[str, LayerSource]
    params: SceneParams | DayParams
    outputs: dict[str, Path]           # product -> final path
    settings_hash: str
    needs_lonlat: bool = True
    day_output: Path | None = None     # scene -> day product (methods.scene_to_day)


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

    def describe(self) -> str:
        cfg = self.cfg
        lines = [f"config:  {cfg.path}", f"title:   {cfg.title}", f"grid:    {self.grid.describe()}",
                 f"methods: sky emissivity {cfg.methods.sky_emissivity}, clouds {cfg.methods.clouds}, "
                 f"clear-sky shortwave {cfg.methods.clear_sky_shortwave}, scene to day "
                 f"{cfg.methods.scene_to_day}",
                 f"output:  {self.out} ({', '.join(cfg.output.products)}; {cfg.output.compression})"]
        n_scene = sum(j.kind == "scenes" for j in self.jobs)
        n_day = len(self.jobs) - n_scene
        lines.append(f"jobs:    {n_scene} scene(s), {n_day} day(s), {len(cfg.composites)} composite(s)"
                     + (f", zones from {cfg.zones.path}" if cfg.zones else ""))
        for j in self.jobs:
            modelled = " (clear-sky shortwave modelled)" if j.kind == "scenes" and \
                "shortwave_down" not in j.sources else ""
            lines.append(f"  {j.kind[:-1]:5s} {j.label}: {len(j.outputs)} product(s){modelled}")
        for c in cfg.composites:
            lines.append(f"  composite {c.name}: {c.source} {c.start} .. {c.end} "
                         f"({', '.join(c.statistics)}; min_count {c.min_count})")
        lines.append(f"estimated output size: {_human(self.estimated_bytes())}")
        return "\n".join(lines)

    def estimated_bytes(self, n_products: int | None = None) -> int:
        """A generous upper bound of the disk a run needs (intermediate + COG of the largest product)."""
        px = self.grid.width * self.grid.height
        if n_products is None:
            n_products = sum(len(j.outputs) + (j.day_output is not None) for j in self.jobs)
        n_products += sum(len(c.statistics) for c in self.cfg.composites)
        # float32 COG ~ 0.75 x raw after ZSTD + 1/3 overviews; plus one raw intermediate in flight
        return int(px * 4 * (n_products * 1.0 + len(self.cfg.output.products)))


def _human(n: float) -> str:
    for unit in ("B", "KB", "MB", "GB", "TB"):
        if n < 1024 or unit == "TB":
            return f"{n:.1f} {unit}"
        n /= 1024
    return f"{n:.1f} TB"


def build_grid(cfg: Config) -> TargetGrid:
    g = cfg.grid
    if g.like:
        path = cfg.static[g.like]
        from .config import gdal_path
        with gdal_env():
            ds = open_dataset(gdal_path(path), path)
            if ds.crs is None:
                raise GridError(f"{path}: grid.like layer {g.like} has no CRS; assign one first")
            return TargetGrid.from_dataset(ds, chunk=g.chunk)
    return TargetGrid.from_bounds(g.crs, g.resolution, g.bounds, chunk=g.chunk)


def _file_fingerprint(path: str) -> list:
    try:
        st = os.stat(path)
        return [path, st.st_size, st.st_mtime_ns]
    except OSError:
        return [path]


def _sources_fingerprint(srcs: dict[str, LayerSource]) -> list:
    """What a product depends on in its inputs: each file (size, mtime) and its decoding."""
    return [_file_fingerprint(s.path) + [s.scale, s.offset, s.nodata, s.factor, s.shift, s.resampling]
            for s in srcs.values()]


def settings_hash(*parts) -> str:
    text = json.dumps(parts, sort_keys=True, default=str)
    return hashlib.sha256(text.encode()).hexdigest()[:20]


def unknown_classes_error(cfg: Config, classes) -> InputError:
    shown = ", ".join(str(c) for c in list(classes)[:20]) + (" ..." if len(classes) > 20 else "")
    return InputError(f"{cfg.static.get('land_cover')}: land-cover classes {shown} are not in the emissivity "
                      f"table {cfg.emissivity.table}; add them to the table or set emissivity.unknown to a "
                      f"default emissivity")


def make_plan(cfg: Config, *, inspect_inputs: bool = True, force: bool = False,
              scan_classes: bool = True) -> Plan:
    """Build the plan; raise :class:`Problems` (or one error) naming every problem found."""
    problems: list[RadledgerError] = []
    try:
        grid = build_grid(cfg)
    except RadledgerError as exc:
        raise exc
    plan = Plan(cfg=cfg, grid=grid)
    early = output_problems(plan, force=force, jobs_known=False)
    if early:
        raise early[0]
    sources_cache: dict[tuple[str, str, str], LayerSource] = {}

    def source(layer: str, path: str, kind: str) -> LayerSource | None:
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
            lc = source("land_cover", cfg.static["land_cover"], "scenes")
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
    common = [__version__, grid.describe(), cfg.output.compression]
    for scene in cfg.scenes:
        srcs = {k: source(k, p, "scenes") for k, p in scene.layers.items()
                if not (k == "land_cover" and cfg.emissivity.constant is not None)}
        if any(v is None for v in srcs.values()):
            continue
        want = tuple(p for p in products if p in SCENE_PRODUCTS)
        needs_lonlat = ("shortwave_down" not in srcs or methods.clouds != "none"
                        or "quality" in want or methods.scene_to_day != "none")
        if needs_lonlat and "elevation" not in srcs:
            srcs.pop("elevation", None)
        params = SceneParams(time=scene.time, products=want + (("daily_net_radiation",) if
                                                             methods.scene_to_day != "none" else ()),
                             sky_model=methods.sky_emissivity, clouds=methods.clouds,
                             clear_sky=methods.clear_sky_shortwave, emissivity_lut=lut,
                             emissivity_constant=cfg.emissivity.constant, emissivity_unknown=unknown,
                             land_cover_path=cfg.static.get("land_cover", ""),
                             emissivity_table=cfg.emissivity.table or "",
                             scene_to_day=methods.scene_to_day)
        h = settings_hash(common, _sources_fingerprint(srcs),
                          repr(params), hashlib.sha256(lut.tobytes()).hexdigest() if lut is not None else None)
        outputs = {p: out / "scenes" / f"{p}_{scene.stamp}.tif" for p in want}
        day_output = None
        if methods.scene_to_day != "none":
            day_output = out / "days" / f"net_radiation_{scene.time.strftime('%Y%m%d')}.tif"
            if any(d.date == scene.time.date() for d in cfg.days):
                problems.append(ConfigError(
                    f"{cfg.path}: {scene.key}: methods.scene_to_day would write {day_output.name}, which "
                    f"the days: entry of {scene.time.date()} also writes; drop one of them"))
        plan.jobs.append(Job("scenes", scene.stamp, scene.time, srcs, params, outputs, h,
                             needs_lonlat=needs_lonlat, day_output=day_output))
    for day in cfg.days:
        srcs = {k: source(k, p, "days") for k, p in day.layers.items() if k != "land_cover"}
        if any(v is None for v in srcs.values()):
            continue
        want = tuple(p for p in products if p in DAY_PRODUCTS)
        params = DayParams(date=day.date, products=want)
        h = settings_hash(common, _sources_fingerprint(srcs), repr(params))
        outputs = {p: out / "days" / f"{p}_{day.stamp}.tif" for p in want}
        plan.jobs.append(Job("days", day.stamp, day.date, srcs, params, outputs, h))

    if cfg.zones is not None and inspect_inputs:
        try:
            from .zones import read_zones
            read_zones(cfg.zones.path, cfg.zones.id, grid)
        except RadledgerError as exc:
            problems.append(exc)
    problems.extend(output_problems(plan, force=force))
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


def output_problems(plan: Plan, *, force: bool, jobs_known: bool = True) -> list[RadledgerError]:
    """Output folder writable, and the products fit on its disk."""
    out = plan.out
    probe = out
    while not probe.exists() and probe.parent != probe:
        probe = probe.parent
    # a folder with no write bit at all is refused even for root, who could write anyway:
    # someone marked it read-only on purpose
    read_only = probe.is_dir() and not (probe.stat().st_mode & 0o222)
    if not probe.is_dir() or read_only or not os.access(probe, os.W_OK | os.X_OK):
        return [OutputError(f"{out}: output folder is not writable (nearest existing folder {probe}"
                            f"{', marked read-only' if read_only else ''}); choose another output.directory "
                            f"or fix its permissions")]
    need = plan.estimated_bytes(len(plan.cfg.scenes) * len(plan.cfg.output.products)
                                + len(plan.cfg.days) * len(plan.cfg.output.products)) if not jobs_known \
        else plan.estimated_bytes()
    free = shutil.disk_usage(probe).free
    if need > free and not force:
        return [OutputError(f"{out}: the run needs about {_human(need)} but only {_human(free)} is free; "
                            f"shrink the grid or the product list, free space, or rerun with --force")]
    return []


def land_cover_classes(src: LayerSource, grid: TargetGrid) -> list[int]:
    """Classes of the land cover within the grid's bounds, read block by block at native resolution.

    Reading the file's own blocks (not the grid) keeps the cost bounded by the
    file, whatever the size of the target grid.
    """
    from rasterio.warp import transform_bounds
    from rasterio.windows import Window, from_bounds

    seen = np.zeros(65536, dtype=bool)
    with gdal_env():
        ds = open_dataset(src.gdal_path, src.path)
        b = transform_bounds(grid.crs, ds.crs, *grid.bounds, densify_pts=21)
        full = Window(0, 0, ds.width, ds.height)
        try:
            area = from_bounds(*b, transform=ds.transform).round_offsets().round_lengths().intersection(full)
        except Exception:
            return []
        bh, bw = ds.block_shapes[0]
        step_r, step_c = max(bh, 512), max(bw, 512)
        r0, c0 = int(area.row_off), int(area.col_off)
        for r in range(r0, r0 + int(area.height), step_r):
            for c in range(c0, c0 + int(area.width), step_c):
                win = Window(c, r, min(step_c, c0 + area.width - c), min(step_r, r0 + area.height - r))
                a = ds.read(1, window=win)
                if src.nodata is not None:
                    a = a[a != src.nodata]
                v = a.astype(np.int64).ravel()
                v = v[(v >= 0) & (v < seen.size)]
                seen[np.unique(v)] = True
    return [int(c) for c in np.flatnonzero(seen)]
