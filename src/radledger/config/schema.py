"""The run config as plain, validated objects, with every default stated once.

Each section is a frozen dataclass; its field defaults are *the* defaults
(:data:`DEFAULTS` is derived from them for the README and ``check``), and the
keys a YAML section may hold are its field names.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import MISSING, dataclass, field, fields
from pathlib import Path
from typing import Any

from ..model.products import DEFAULT_PRODUCTS

__all__ = ["Config", "GridSpec", "LayerDecoding", "EmissivitySpec", "Methods", "Scene", "Day",
           "CompositeSpec", "ZonesSpec", "OutputSpec", "DEFAULTS", "keys_of",
           "RESAMPLING", "CLEAR_SKY_MODELS", "SCENE_TO_DAY", "ZONE_WEIGHTING"]

ZONE_WEIGHTING = ("centre", "coverage")
RESAMPLING = ("nearest", "bilinear", "cubic", "cubic_spline", "lanczos", "average")
CLEAR_SKY_MODELS = ("fao56", "beam-diffuse")
SCENE_TO_DAY = ("none", "sinusoidal", "shortwave-ratio")


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


@dataclass(frozen=True)
class Scene:
    time: dt.datetime             # UTC, tz-aware
    layers: dict[str, str]        # layer -> GDAL path (static layers merged in)
    key: str                      # config key path, e.g. "scenes[0]"

    @property
    def stamp(self) -> str:
        return self.time.strftime("%Y%m%dT%H%M")


@dataclass(frozen=True)
class Day:
    date: dt.date
    layers: dict[str, str]
    key: str

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
class OutputSpec:
    directory: Path = Path("out")
    products: tuple[str, ...] = DEFAULT_PRODUCTS
    compression: str = "zstd"
    netcdf: bool = False
    quicklooks: bool = False
    zarr: bool = False            # DIR/zarr/{scenes|days}.zarr
    stac: bool = False            # DIR/stac/catalog.json


@dataclass(frozen=True)
class Config:
    path: Path
    title: str
    grid: GridSpec
    layers: dict[str, LayerDecoding]
    static: dict[str, str]
    emissivity: EmissivitySpec
    methods: Methods
    scenes: tuple[Scene, ...]
    days: tuple[Day, ...]
    composites: tuple[CompositeSpec, ...]
    zones: ZonesSpec | None
    output: OutputSpec
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
    **{k: (str(v) if isinstance(v, Path) else v) for k, v in _defaults_of("output", OutputSpec).items()},
    **{k.replace("composite.", "composites."): v for k, v in _defaults_of("composite", CompositeSpec).items()
       if not k.endswith(".key")},
}
