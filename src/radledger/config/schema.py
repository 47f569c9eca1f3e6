"""The run config as plain, validated objects, with every default stated once.

Each section is a frozen dataclass; its field defaults are *the* defaults
(:data:`DEFAULTS` is derived from them for the README and ``check``), and the
keys a YAML section may hold are its field names.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import MISSING, dataclass, field, fields, replace
from pathlib import Path
from typing import Any

from ..model.products import DEFAULT_PRODUCTS

__all__ = ["Config", "GridSpec", "LayerDecoding", "InputSpec", "EmissivitySpec", "Methods", "Scene", "Day",
           "CompositeSpec", "ZonesSpec", "OutputSpec", "StationsSpec", "ValidationSpec", "DEFAULTS", "keys_of",
           "RESAMPLING", "CLEAR_SKY_MODELS", "SCENE_TO_DAY", "ZONE_WEIGHTING", "TERRAIN_METHODS",
           "DIFFUSE_FRACTION_MODELS"]

ZONE_WEIGHTING = ("centre", "coverage")
RESAMPLING = ("nearest", "bilinear", "cubic", "cubic_spline", "lanczos", "average")
CLEAR_SKY_MODELS = ("fao56", "beam-diffuse")
SCENE_TO_DAY = ("none", "sinusoidal", "shortwave-ratio")
#: methods.terrain: level ground; slopes (Horn 1981) and the plane's sky view; plus cast shadows and
#: the sky view from the DEM's horizons (Dozier & Frew 1990)
TERRAIN_METHODS = ("none", "slope", "shading")
#: methods.diffuse_fraction: beam/diffuse split of a given shortwave, Erbs, Klein & Duffie (1982)
DIFFUSE_FRACTION_MODELS = ("erbs",)


@dataclass(frozen=True)
class LayerDecoding:
    """How to turn a layer's stored numbers into physical values (``layers.NAME``)."""
    units: str | None = None      # canonical unit name, None = the layer's internal unit
    scale: float | None = None    # None = the file's own scale (1 if none)
    offset: float | None = None
    nodata: float | None = None   # None = the file's own nodata


@dataclass(frozen=True)
class GridSpec:
    like: str | None = None
    crs: str | None = None
    resolution: tuple[float, float] | None = None
    bounds: tuple[float, float, float, float] | None = None
    resampling: str = "bilinear"
    chunk: int = 1024             # 1024^2 float32 = 4 MiB per layer per chunk in flight


@dataclass(frozen=True)
class EmissivitySpec:
    table: str | None = None
    unknown: str | float = "error"
    constant: float | None = None


@dataclass(frozen=True)
class Methods:
    sky_emissivity: str = "brutsaert"
    clouds: str = "none"
    clear_sky_shortwave: str = "beam-diffuse"
    scene_to_day: str = "none"
    terrain: str = "none"
    diffuse_fraction: str = "erbs"


_STACK_SUFFIXES = (".nc", ".nc4", ".cdf", ".h5", ".hdf5", ".zarr", ".zarr/")


@dataclass(frozen=True)
class InputSpec:
    """One input layer of an entry: a raster, a per-date template, a time stack or an interpolation."""
    path: str | None = None          # resolved path or URL; may hold {date:FMT} / {time:FMT}
    variable: str | None = None      # a time stack's variable (NetCDF, Zarr)
    units: str | None = None         # canonical; given with the input itself, overrides layers:
    scale: float | None = None       # overrides layers: and the file's own
    offset: float | None = None
    nodata: float | None = None
    interpolate: str | None = None   # "scenes": a day's albedo between the scenes' albedos
    max_gap: float | None = None     # [day] for interpolate
    template: str | None = None      # the template a dated path was filled in from
    stations: bool = False           # gridded from the ``stations:`` table for each date or time

    @property
    def is_stack(self) -> bool:
        return self.variable is not None or (self.path or "").lower().rstrip("/").endswith(
            tuple(s.rstrip("/") for s in _STACK_SUFFIXES))

    @property
    def is_template(self) -> bool:
        return self.path is not None and ("{date" in self.path or "{time" in self.path)

    def at(self, when) -> "InputSpec":
        """This input for one date or time: a template's path filled in (strftime codes)."""
        if not self.is_template:
            return self
        day = when.date() if isinstance(when, dt.datetime) else when
        return replace(self, path=self.path.format(date=day, time=when), template=self.path)

    def describe(self) -> str:
        if self.stations:
            return "gridded from the stations: table"
        if self.interpolate:
            return f"interpolated between {self.interpolate} (max_gap {self.max_gap:g} days)"
        extra = [f"variable {self.variable}"] if self.variable else []
        path = self.template or self.path
        extra += [f"{k} {getattr(self, k)}" for k in ("units", "scale", "offset", "nodata")
                  if getattr(self, k) is not None]
        return path + (f" ({', '.join(extra)})" if extra else "")


@dataclass(frozen=True)
class Scene:
    time: dt.datetime             # UTC, tz-aware
    layers: dict[str, InputSpec]  # layer -> input (static layers merged in), templates filled in
    key: str                      # config key path, e.g. "scenes[0]"
    on_missing: str = "error"     # error | skip: a missing input stops the run or drops this scene

    @property
    def stamp(self) -> str:
        return self.time.strftime("%Y%m%dT%H%M")


@dataclass(frozen=True)
class Day:
    date: dt.date
    layers: dict[str, InputSpec]
    key: str
    on_missing: str = "error"

    @property
    def stamp(self) -> str:
        return self.date.strftime("%Y%m%d")


@dataclass(frozen=True)
class CompositeSpec:
    name: str
    source: str                   # "days" | "scenes" (YAML key: from)
    start: dt.date
    end: dt.date                  # inclusive
    key: str = ""
    statistics: tuple[str, ...] = ("mean", "count")
    min_count: int = 1

    @property
    def window_days(self) -> int:
        return (self.end - self.start).days + 1


@dataclass(frozen=True)
class ZonesSpec:
    path: str
    id: str
    weighting: str = "centre"     # "centre": pixel-centre rule; "coverage": exact pixel fractions


@dataclass(frozen=True)
class StationsSpec:
    """``stations:``: a weather-station table gridded onto the target grid for each date or time."""
    path: str                     # CSV: station, lon, lat, elevation, date and/or time, value columns
    crs: str = "EPSG:4326"        # of the lon/lat columns
    columns: dict[str, str] = field(default_factory=dict)   # layer -> the table's column
    method: str = "spline"        # spline | idw | kriging (residuals after the elevation trend)


@dataclass(frozen=True)
class ValidationSpec:
    """``validation:``: measured net radiation (net radiometers) paired with the products."""
    path: str                     # CSV: station, lon, lat, date and/or time, net_radiation
    crs: str = "EPSG:4326"


@dataclass(frozen=True)
class OutputSpec:
    directory: Path = Path("out")
    products: tuple[str, ...] = DEFAULT_PRODUCTS
    compression: str = "zstd"
    netcdf: tuple[str, ...] = ()  # products stacked in DIR/netcdf/ (config: true = all, or a list)
    quicklooks: bool = False
    zarr: bool = False            # DIR/zarr/{scenes|days}.zarr
    stac: bool = False            # DIR/stac/catalog.json
    staging: Path | None = None   # the local folder a run on an object store writes into first
    store: str | None = None      # s3://bucket/prefix when output.directory names one (not a config key)


@dataclass(frozen=True)
class Config:
    path: Path
    title: str
    grid: GridSpec
    layers: dict[str, LayerDecoding]
    static: dict[str, InputSpec]
    emissivity: EmissivitySpec
    methods: Methods
    scenes: tuple[Scene, ...]
    days: tuple[Day, ...]
    composites: tuple[CompositeSpec, ...]
    zones: ZonesSpec | None
    output: OutputSpec
    stations: StationsSpec | None = None
    validation: ValidationSpec | None = None
    raw: dict = field(repr=False, default_factory=dict)

    def decoding(self, layer: str) -> LayerDecoding:
        """The decoding of ``layer``; Tmax/Tmin fall back to ``air_temperature``'s."""
        if layer in self.layers:
            return self.layers[layer]
        if layer in ("air_temperature_max", "air_temperature_min") and "air_temperature" in self.layers:
            return self.layers["air_temperature"]
        return LayerDecoding()


def keys_of(cls, *, exclude: tuple[str, ...] = ()) -> tuple[str, ...]:
    """The YAML keys of a config section: its dataclass's field names."""
    return tuple(f.name for f in fields(cls) if f.name not in exclude)


def _defaults_of(prefix: str, cls) -> dict[str, Any]:
    out = {}
    for f in fields(cls):
        if f.default is not MISSING and f.default is not None:
            value = f.default
            out[f"{prefix}.{f.name}"] = list(value) if isinstance(value, tuple) else value
    return out


#: every optional key's default, derived from the dataclasses above (documented in the README)
DEFAULTS: dict[str, Any] = {
    "title": "",
    **_defaults_of("grid", GridSpec),
    **_defaults_of("emissivity", EmissivitySpec),
    **_defaults_of("methods", Methods),
    **_defaults_of("zones", ZonesSpec),
    **_defaults_of("stations", StationsSpec),
    **_defaults_of("validation", ValidationSpec),
    **{k: (str(v) if isinstance(v, Path) else v) for k, v in _defaults_of("output", OutputSpec).items()},
    **{k.replace("composite.", "composites."): v for k, v in _defaults_of("composite", CompositeSpec).items()
       if not k.endswith(".key")},
}
