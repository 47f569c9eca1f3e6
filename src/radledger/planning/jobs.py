"""The jobs of a plan: one per scene time and per day, each with the sources it reads.

Every input of every date is resolved here (a template's file, a stack's steps, the scenes around a
day for interpolated albedo); a date lacking an input is an error naming it, or - with
``on_missing: skip`` - left out and listed.  Each distinct input (a file, a template, a stack
variable) is checked once: it overlaps the grid, and (on a few of its dates) its values fit the
declared units.
"""

from __future__ import annotations

import datetime as dt
import hashlib
from dataclasses import dataclass, field

from .._version import __version__
from ..config import Config, InputSpec
from ..errors import GridError, RadledgerError
from ..io.rasters import check_overlap
from ..kinds import TimeKind
from ..model.albedo import AlbedoBetweenScenes
from ..model.diurnal import DIURNAL_PAIR, DiurnalAirTemperature, local_solar_date
from ..model.needs import day_needs, scene_needs
from ..model.params import DayParams, SceneParams
from ..model.products import DAY_PRODUCTS, SCENE_DAY_PRODUCT, SCENE_PRODUCTS
from ..model.terrain import TerrainSource
from .checks import check_sample
from .provenance import settings_hash, sources_fingerprint
from .sources import MissingInput, input_source
from .stations import StationInputs, read_observations
from .terrain import terrain_layers

__all__ = ["JobBuilder", "DEFAULT_ALBEDO_NOTE", "SAMPLE_CHECKS_PER_INPUT"]

DEFAULT_ALBEDO_NOTE = ("no albedo: FAO-56's grass reference 0.23 used everywhere (flagged albedo_default; "
                       "wrong over snow, water and forest)")
#: dates of one template or stack whose values are sampled for the unit check (first, then spread)
SAMPLE_CHECKS_PER_INPUT = 3


@dataclass
class JobBuilder:
    """Builds the jobs of a plan, collecting problems and skipped dates."""
    cfg: Config
    grid: object
    lut: object
    unknown: float | None
    inspect: bool = True
    problems: list[RadledgerError] = field(default_factory=list)
    skipped: list[tuple[str, str]] = field(default_factory=list)     # (job label, why)
    _checked: dict = field(default_factory=dict)
    _scene_albedo: list = field(default_factory=list)                 # (time, source) of every scene
    _stations: StationInputs | None = None                             # the stations: table, read once
    _terrain: object = None                                            # TerrainLayers, made once
    _centre_lon: float | None = None                                   # the grid centre's longitude

    def __post_init__(self):
        # the net-radiometer table is read here too, so its problems stop the run before anything is written
        if self.inspect and self.cfg.validation is not None:
            try:
                read_observations(self.cfg, self.grid)
            except RadledgerError as exc:
                self.problems.append(exc)

    def terrain(self):
        """The static terrain layers (methods.terrain), or None; the DEM is opened here once."""
        if self._terrain is None and self.cfg.methods.terrain != "none":
            try:
                dem = self.source("elevation", self.cfg.static["elevation"], TimeKind.SCENES, None)
            except RadledgerError as exc:   # reported with the others; the plan stops
                self.problems.append(exc)
                self._terrain = False
                return None
            self._terrain = terrain_layers(self.cfg, self.grid, dem)
        return self._terrain or None

    def _with_terrain(self, srcs: dict, when) -> dict:
        """The job's sources plus the static terrain layers (files the terrain stage writes first)."""
        t = self.terrain()
        return srcs if t is None else {**srcs, "terrain": TerrainSource(t, when)}

    # ---- sources ----------------------------------------------------------------------
    def _identity(self, layer: str, spec: InputSpec) -> tuple:
        return (layer, spec.template or spec.path, spec.variable)

    def _inspect(self, layer: str, spec: InputSpec, src, kind: TimeKind) -> None:
        if not self.inspect:
            return
        key = self._identity(layer, spec)
        n = self._checked.get(key, 0)
        if n == 0:
            if hasattr(src, "overlaps"):
                if not src.overlaps(self.grid):
                    raise GridError(f"{src.path}: {src.variable} does not overlap the target grid "
                                    f"({self.grid.describe()}); check its coordinates and CRS")
            else:
                check_overlap(src, self.grid)
        series = spec.template is not None or spec.variable is not None   # a different file or step per date
        if n < (SAMPLE_CHECKS_PER_INPUT if series else 1):
            check_sample(src, kind=kind)
        self._checked[key] = n + 1

    def stations(self) -> StationInputs:
        if self._stations is None:
            self._stations = StationInputs(self.cfg, self.grid, self.source, inspect=self.inspect)
        return self._stations

    def source(self, layer: str, spec: InputSpec, kind: TimeKind, when):
        if spec.stations:   # written by the weather stage before the jobs: nothing to open yet
            return self.stations().source(layer, kind, when)
        src = input_source(self.cfg, layer, spec, kind, when)
        self._inspect(layer, spec, src, kind)
        return src

    def _sources(self, entry, layers, kind: TimeKind, when, label: str) -> dict | None:
        """Every source of one date, or None when it is skipped or has a problem (recorded)."""
        out = {}
        for layer in layers:
            if layer not in entry.layers and layer == "air_temperature" and kind is TimeKind.SCENES:
                src = self._diurnal(entry, label)      # from the day's Tmax/Tmin (config/entries.py)
            else:
                src = self._one(entry, layer, entry.layers[layer], kind, when, label)
            if src is None:
                return None
            out[layer] = src
        return out

    def _one(self, entry, layer: str, spec: InputSpec, kind: TimeKind, when, label: str):
        """The source of one input of one date, or None when it is skipped or has a problem (recorded)."""
        try:
            if spec.interpolate:
                return self._interpolated_albedo(when, spec)
            return self.source(layer, spec, kind, when)
        except MissingInput as exc:
            if entry.on_missing == "skip" and spec not in set(self.cfg.static.values()):
                self.skipped.append((label, str(exc)))
            else:
                self.problems.append(exc)
        except RadledgerError as exc:
            if str(exc) not in {str(p) for p in self.problems}:   # e.g. a station table's problem, once
                self.problems.append(exc)
        return None

    def centre_longitude(self) -> float:
        """The longitude of the grid centre [deg] (its local solar date is a scene's daily date)."""
        if self._centre_lon is None:
            x0, y0, x1, y1 = self.grid.bounds
            x, y = (x0 + x1) / 2, (y0 + y1) / 2
            self._centre_lon = float(x if self.grid.crs.is_geographic else self.grid.to_lonlat(x, y)[0])
        return self._centre_lon

    def _diurnal(self, scene, label: str) -> DiurnalAirTemperature | None:
        """A scene's air temperature from the Tmax and Tmin of its local solar date (Parton & Logan 1981).

        The daily inputs are read like a day's: a template filled with that date (``{date:...}`` and
        ``{time:...}`` alike, the time at 00:00), a stack's one step on that date.
        """
        day = local_solar_date(scene.time, self.centre_longitude())
        parts = []
        for name in DIURNAL_PAIR:
            spec = scene.layers[name]
            src = self._one(scene, name, spec.at(day), TimeKind.DAYS, day, label)
            if src is None:
                return None
            parts.append((name, src))
        return DiurnalAirTemperature(time=scene.time, day=day, parts=tuple(parts))

    def _interpolated_albedo(self, day: dt.date, spec: InputSpec) -> AlbedoBetweenScenes:
        noon = dt.datetime.combine(day, dt.time(12), tzinfo=dt.timezone.utc)
        near = tuple((t, s) for t, s in self._scene_albedo if abs((t - noon).total_seconds()) <= spec.max_gap * 86400)
        return AlbedoBetweenScenes(day=day, scenes=near, max_gap=spec.max_gap)

    def _terrain_identity(self) -> str:
        t = self.terrain()
        return "" if t is None else t.identity

    # ---- jobs -------------------------------------------------------------------------
    def scene_jobs(self, job_class) -> list:
        cfg, methods, out = self.cfg, self.cfg.methods, self.cfg.output.directory
        common = [__version__, self.grid.identity, cfg.output.compression]
        want = tuple(p for p in cfg.output.products if p in SCENE_PRODUCTS)
        lut_hash = hashlib.sha256(self.lut.tobytes()).hexdigest() if self.lut is not None else None
        jobs = []
        for scene in cfg.scenes:
            needs = scene_needs(scene.layers, products=want, sky_emissivity=methods.sky_emissivity,
                                clouds=methods.clouds, scene_to_day=methods.scene_to_day,
                                emissivity_constant=cfg.emissivity.constant is not None,
                                terrain=methods.terrain)
            srcs = self._sources(scene, needs.layers, TimeKind.SCENES, scene.time, f"scene {scene.stamp}")
            if srcs is None:
                continue
            self._scene_albedo.append((scene.time, srcs["albedo"]))
            params = SceneParams(time=scene.time, products=want + ((SCENE_DAY_PRODUCT,) if
                                                                 methods.scene_to_day != "none" else ()),
                                 needs=needs, sky_emissivity=methods.sky_emissivity, clouds=methods.clouds,
                                 clear_sky_shortwave=methods.clear_sky_shortwave, emissivity_lut=self.lut,
                                 emissivity_constant=cfg.emissivity.constant, emissivity_unknown=self.unknown,
                                 land_cover_path=cfg.static["land_cover"].path if "land_cover" in cfg.static else "",
                                 emissivity_table=cfg.emissivity.table or "", scene_to_day=methods.scene_to_day,
                                 terrain=methods.terrain, terrain_layers=self._terrain_identity())
            h = settings_hash(common, sources_fingerprint(srcs), repr(params), lut_hash)
            srcs = self._with_terrain(srcs, scene.time)
            outputs = {p: out / "scenes" / f"{p}_{scene.stamp}.tif" for p in want}
            day_output = out / "days" / f"{SCENE_DAY_PRODUCT}_{scene.stamp}.tif" \
                if methods.scene_to_day != "none" else None
            jobs.append(job_class(TimeKind.SCENES, scene.stamp, scene.time, srcs, params, outputs, h,
                                  day_output=day_output, entry=scene.key))
        return jobs

    def day_jobs(self, job_class) -> list:
        cfg, out = self.cfg, self.cfg.output.directory
        common = [__version__, self.grid.identity, cfg.output.compression]
        want = tuple(p for p in cfg.output.products if p in DAY_PRODUCTS)
        jobs = []
        for day in cfg.days:
            needs = day_needs(day.layers, products=want, terrain=cfg.methods.terrain)
            srcs = self._sources(day, needs.layers, TimeKind.DAYS, day.date, f"day {day.stamp}")
            if srcs is None:
                continue
            params = DayParams(date=day.date, products=want, needs=needs,
                               shortwave_daylight_mean=srcs["shortwave_down"].units == "W m-2 daylight",
                               terrain=cfg.methods.terrain, terrain_layers=self._terrain_identity())
            h = settings_hash(common, sources_fingerprint(srcs), repr(params))
            srcs = self._with_terrain(srcs, day.date)
            outputs = {p: out / "days" / f"{p}_{day.stamp}.tif" for p in want}
            notes = () if "albedo" in srcs else (DEFAULT_ALBEDO_NOTE,)
            jobs.append(job_class(TimeKind.DAYS, day.stamp, day.date, srcs, params, outputs, h, notes=notes,
                                  entry=day.key))
        return jobs
