"""The run config: YAML in, validated plain objects out.

Every problem names its key path (``scenes[2].albedo``) and says what to do.
Validation collects all problems before raising, so ``radledger check`` can
report everything at once.  Only safe YAML is read; no config text is ever
evaluated.  The defaults of every optional key live in :data:`DEFAULTS`.
"""

from __future__ import annotations

import datetime as dt
import difflib
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import yaml

from .datewindows import COMPOSITE_STATISTICS, SEASONS, season_window
from .errors import ConfigError, Problems
from .physics.longwave import CLOUD_MODELS, SKY_EMISSIVITY_MODELS
from .products import DAY_PRODUCTS, DEFAULT_PRODUCTS, SCENE_PRODUCTS
from .units import canonical_unit

__all__ = ["Config", "LayerDecoding", "Scene", "Day", "CompositeSpec", "load_config", "DEFAULTS",
           "SCENE_LAYERS", "DAY_LAYERS", "is_remote", "gdal_path"]

# --- the one place for defaults (documented in the README's config section) ---
DEFAULTS: dict[str, Any] = {
    "title": "",
    "grid.resampling": "bilinear",
    "grid.chunk": 1024,          # 1024^2 float32 = 4 MiB per layer per chunk in flight
    "emissivity.unknown": "error",
    "methods.sky_emissivity": "brutsaert",
    "methods.clouds": "none",
    "methods.clear_sky_shortwave": "fao56",
    "methods.scene_to_day": "none",
    "output.directory": "out",
    "output.products": list(DEFAULT_PRODUCTS),
    "output.compression": "zstd",
    "output.netcdf": False,
    "output.quicklooks": False,
    "composites.statistics": ["mean", "count"],
    "composites.min_count": 1,
}

RESAMPLING = ("nearest", "bilinear", "cubic", "cubic_spline", "lanczos", "average")
COMPRESSION = ("zstd", "deflate", "lzw")
CLEAR_SKY_MODELS = ("fao56", "beam-diffuse")
SCENE_TO_DAY = ("none", "sinusoidal", "shortwave-ratio")

HUMIDITY_LAYERS = ("vapour_pressure", "dewpoint_temperature", "relative_humidity")
SCENE_LAYERS = ("albedo", "surface_temperature", "air_temperature", "shortwave_down") + HUMIDITY_LAYERS
DAY_LAYERS = ("shortwave_down", "air_temperature_max", "air_temperature_min", "albedo") + HUMIDITY_LAYERS
STATIC_ONLY = ("land_cover", "elevation")
ALL_LAYERS = tuple(dict.fromkeys(SCENE_LAYERS + DAY_LAYERS + STATIC_ONLY))

# what `units:` may say for each layer (first = internal unit)
LAYER_UNITS: dict[str, tuple[str, ...]] = {
    "albedo": ("1",),
    "surface_temperature": ("K", "degC"),
    "air_temperature": ("K", "degC"),
    "air_temperature_max": ("K", "degC"),
    "air_temperature_min": ("K", "degC"),
    "dewpoint_temperature": ("K", "degC"),
    "vapour_pressure": ("kPa", "hPa", "Pa"),
    "relative_humidity": ("%", "1"),
    "shortwave_down": ("W m-2", "MJ m-2 day-1"),
    "land_cover": ("1",),
    "elevation": ("m",),
}

_TOP = ("title", "grid", "layers", "static", "emissivity", "methods", "scenes", "days",
        "composites", "zones", "output")
_GRID = ("like", "crs", "resolution", "bounds", "resampling", "chunk")
_LAYER = ("units", "scale", "offset", "nodata")
_EMISSIVITY = ("table", "unknown", "constant")
_METHODS = ("sky_emissivity", "clouds", "clear_sky_shortwave", "scene_to_day")
_COMPOSITE = ("name", "from", "start", "end", "season", "year", "statistics", "min_count")
_ZONES = ("path", "id")
_OUTPUT = ("directory", "products", "compression", "netcdf", "quicklooks")


@dataclass(frozen=True)
class LayerDecoding:
    """How to turn a layer's stored numbers into physical values."""
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
    resampling: str = DEFAULTS["grid.resampling"]
    chunk: int = DEFAULTS["grid.chunk"]


@dataclass(frozen=True)
class EmissivitySpec:
    table: str | None = None
    unknown: str | float = DEFAULTS["emissivity.unknown"]
    constant: float | None = None


@dataclass(frozen=True)
class Methods:
    sky_emissivity: str = DEFAULTS["methods.sky_emissivity"]
    clouds: str = DEFAULTS["methods.clouds"]
    clear_sky_shortwave: str = DEFAULTS["methods.clear_sky_shortwave"]
    scene_to_day: str = DEFAULTS["methods.scene_to_day"]


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
    source: str                   # "days" | "scenes"
    start: dt.date
    end: dt.date                  # inclusive
    statistics: tuple[str, ...]
    min_count: int
    key: str

    @property
    def window_days(self) -> int:
        return (self.end - self.start).days + 1


@dataclass(frozen=True)
class ZonesSpec:
    path: str
    id: str


@dataclass(frozen=True)
class OutputSpec:
    directory: Path
    products: tuple[str, ...]
    compression: str
    netcdf: bool
    quicklooks: bool


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


# --------------------------------------------------------------------------
def is_remote(path: str) -> bool:
    return path.startswith(("http://", "https://", "s3://", "gs://", "/vsi", "az://"))


def gdal_path(path: str) -> str:
    """A path GDAL opens: URLs become /vsicurl/, s3:// /vsis3/, gs:// /vsigs/, az:// /vsiaz/."""
    if path.startswith(("http://", "https://")):
        return "/vsicurl/" + path
    for scheme, vsi in (("s3://", "/vsis3/"), ("gs://", "/vsigs/"), ("az://", "/vsiaz/")):
        if path.startswith(scheme):
            return vsi + path[len(scheme):]
    return path


def load_config(path: str | os.PathLike, *, output_override: str | os.PathLike | None = None) -> Config:
    """Read and validate a run config; raise :class:`Problems` listing every problem found.

    ``path`` may be an ``http(s)://`` URL; relative input paths then resolve
    against the config's URL, and a relative output.directory against the
    current folder.
    """
    if str(path).startswith(("http://", "https://")):
        text = _fetch(str(path))
        return _parse(path, text, output_override)
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ConfigError(f"{path}: config file not found; check the path") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"{path}: cannot read the config ({exc.__class__.__name__}: {exc}); "
                          f"give a readable UTF-8 YAML file") from None
    return _parse(path, text, output_override)


def _fetch(url: str, timeout: float = 30.0) -> str:
    import urllib.error
    import urllib.request

    try:
        with urllib.request.urlopen(url, timeout=timeout) as r:
            return r.read().decode("utf-8")
    except urllib.error.HTTPError as exc:
        raise ConfigError(f"{url}: cannot fetch the config (HTTP {exc.code}); check the URL") from None
    except (urllib.error.URLError, OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"{url}: cannot fetch the config ({exc}); check the URL and the network") from None


def _parse(path, text: str, output_override) -> Config:
    try:
        raw = yaml.safe_load(text)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f" line {mark.line + 1}, column {mark.column + 1}" if mark else ""
        what = getattr(exc, "problem", None) or str(exc).splitlines()[0]
        raise ConfigError(f"{path}:{where}: YAML syntax error: {what}; fix the YAML "
                          f"(only plain YAML is accepted, no tags)") from None
    if raw is None:
        raw = {}
    if not isinstance(raw, dict):
        raise ConfigError(f"{path}: the config must be a YAML mapping of keys (title, grid, scenes, ...)")
    v = _Validator(path, raw, output_override)
    cfg = v.build()
    if v.problems:
        if len(v.problems) == 1:
            raise v.problems[0]
        raise Problems(v.problems)
    return cfg


class _Validator:
    def __init__(self, path, raw: dict, output_override):
        self.path = path
        self.url = str(path) if str(path).startswith(("http://", "https://")) else None
        self.base = Path.cwd() if self.url else Path(path).resolve().parent
        self.raw = raw
        self.problems: list[ConfigError] = []
        self.output_override = output_override

    # ---- helpers ---------------------------------------------------------
    def fail(self, key: str, msg: str) -> None:
        self.problems.append(ConfigError(f"{self.path}: {key}: {msg}"))

    def mapping(self, value, key: str, allowed) -> dict:
        if value is None:
            return {}
        if not isinstance(value, dict):
            self.fail(key, f"must be a mapping, got {type(value).__name__}")
            return {}
        for k in value:
            if k not in allowed:
                hint = difflib.get_close_matches(str(k), list(allowed), n=1)
                tip = f"; did you mean '{hint[0]}'?" if hint else f"; valid keys: {', '.join(allowed)}"
                self.fail(f"{key}.{k}" if key else str(k), f"unknown key{tip}")
        return value

    def choice(self, value, key: str, valid, default):
        if value is None:
            return default
        if value not in valid:
            hint = difflib.get_close_matches(str(value), list(valid), n=1)
            tip = f" (did you mean '{hint[0]}'?)" if hint else ""
            self.fail(key, f"unknown value {value!r}{tip}; valid: {', '.join(valid)}")
            return default
        return value

    def number(self, value, key: str, *, positive=False, integer=False, default=None):
        if value is None:
            return default
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            self.fail(key, f"must be a number, got {value!r}")
            return default
        if integer and int(value) != value:
            self.fail(key, f"must be a whole number, got {value!r}")
            return default
        if positive and value <= 0:
            self.fail(key, f"must be positive, got {value!r}")
            return default
        return int(value) if integer else float(value)

    def boolean(self, value, key: str, default: bool) -> bool:
        if value is None:
            return default
        if not isinstance(value, bool):
            self.fail(key, f"must be true or false, got {value!r}")
            return default
        return value

    def resolve(self, value, key: str) -> str | None:
        if value is None:
            return None
        if not isinstance(value, str) or not value.strip():
            self.fail(key, f"must be a file path or URL, got {value!r}")
            return None
        value = value.strip()
        if is_remote(value):
            return value
        if self.url:
            from urllib.parse import urljoin
            return urljoin(self.url, value)
        p = Path(os.path.expanduser(value))
        return str(p if p.is_absolute() else (self.base / p))

    def date(self, value, key: str) -> dt.date | None:
        if isinstance(value, dt.datetime):
            return value.date()
        if isinstance(value, dt.date):
            return value
        if isinstance(value, str):
            try:
                return dt.date.fromisoformat(value.strip())
            except ValueError:
                pass
        self.fail(key, f"{value!r} is not a valid date; write YYYY-MM-DD (e.g. 2026-07-14)")
        return None

    def time(self, value, key: str) -> dt.datetime | None:
        t = None
        if isinstance(value, dt.datetime):
            t = value
        elif isinstance(value, str):
            s = value.strip()
            if s.endswith(("Z", "z")):
                s = s[:-1] + "+00:00"
            try:
                t = dt.datetime.fromisoformat(s)
            except ValueError:
                t = None
        if t is None:
            self.fail(key, f"{value!r} is not a valid UTC time; write YYYY-MM-DDTHH:MM:SSZ "
                           f"(e.g. 2026-07-14T18:10:00Z)")
            return None
        if t.tzinfo is None:
            t = t.replace(tzinfo=dt.timezone.utc)   # documented: naive times are UTC
        return t.astimezone(dt.timezone.utc)

    # ---- sections --------------------------------------------------------
    def build(self) -> Config | None:
        raw = self.mapping(self.raw, "", _TOP)
        title = raw.get("title", DEFAULTS["title"])
        if not isinstance(title, (str, int, float)):
            self.fail("title", "must be text")
            title = ""
        layers = self.layers(raw.get("layers"))
        static = self.static(raw.get("static"))
        grid = self.grid(raw.get("grid"), static)
        emissivity = self.emissivity(raw.get("emissivity"))
        methods = self.methods(raw.get("methods"))
        scenes = self.scenes(raw.get("scenes"), static)
        days = self.days(raw.get("days"), static)
        composites = self.composites(raw.get("composites"), scenes, days)
        zones = self.zones(raw.get("zones"))
        output = self.output(raw.get("output"))
        if not scenes and not days:
            self.fail("scenes", "the config lists no scenes and no days; add at least one")
        needs_lc = bool(scenes) and emissivity.constant is None
        if needs_lc and "land_cover" not in static:
            self.fail("static.land_cover", "needed for the emissivity lookup; give a land-cover raster "
                                           "or set emissivity.constant")
        if needs_lc and emissivity.table is None:
            self.fail("emissivity.table", "give a class,emissivity CSV table or emissivity.constant")
        if days and "elevation" not in static:
            self.fail("static.elevation", "needed for FAO-56 daily maps (clear-sky shortwave); give a DEM")
        if any("shortwave_down" not in s.layers for s in scenes) and "elevation" not in static:
            self.fail("static.elevation", "needed to model clear-sky shortwave for scenes without "
                                          "shortwave_down; give a DEM")
        if methods.clouds != "none" and scenes and "elevation" not in static:
            self.fail("static.elevation", f"methods.clouds: {methods.clouds} needs clear-sky shortwave, "
                                          f"which needs a DEM")
        if self.problems:
            return None
        return Config(path=self.path, title=str(title), grid=grid, layers=layers, static=static,
                      emissivity=emissivity, methods=methods, scenes=tuple(scenes), days=tuple(days),
                      composites=tuple(composites), zones=zones, output=output, raw=self.raw)

    def layers(self, value) -> dict[str, LayerDecoding]:
        value = self.mapping(value, "layers", ALL_LAYERS)
        out = {}
        for name, spec in value.items():
            if name not in ALL_LAYERS:
                continue
            key = f"layers.{name}"
            spec = self.mapping(spec, key, _LAYER)
            units = spec.get("units")
            if units is not None:
                canon = canonical_unit(str(units))
                valid = LAYER_UNITS[name]
                if canon not in valid:
                    self.fail(f"{key}.units", f"unknown units {units!r} for {name}; valid: {', '.join(valid)}")
                    canon = None
                units = canon
            out[name] = LayerDecoding(
                units=units,
                scale=self.number(spec.get("scale"), f"{key}.scale"),
                offset=self.number(spec.get("offset"), f"{key}.offset"),
                nodata=self.number(spec.get("nodata"), f"{key}.nodata"),
            )
            if out[name].scale == 0:
                self.fail(f"{key}.scale", "must not be 0")
        return out

    def static(self, value) -> dict[str, str]:
        value = self.mapping(value, "static", ALL_LAYERS)
        return {k: p for k, v in value.items() if k in ALL_LAYERS
                for p in [self.resolve(v, f"static.{k}")] if p is not None}

    def grid(self, value, static) -> GridSpec:
        value = self.mapping(value, "grid", _GRID)
        like = value.get("like")
        crs, res, bounds = value.get("crs"), value.get("resolution"), value.get("bounds")
        if like is not None:
            if not isinstance(like, str):
                self.fail("grid.like", "must be a layer name")
                like = None
            elif like not in static and like not in ALL_LAYERS:
                self.fail("grid.like", f"{like!r} is not a layer name; use one of the static layers "
                                       f"({', '.join(static) or 'none given'})")
                like = None
            elif like not in static:
                self.fail("grid.like", f"layer {like!r} must be given under static: to define the grid")
                like = None
            if crs or res or bounds:
                self.fail("grid", "give either like: or crs/resolution/bounds, not both")
        elif crs is None and res is None and bounds is None:
            if "land_cover" in static:
                like = "land_cover"   # documented default: the land-cover grid
            else:
                self.fail("grid", "give like: <static layer> or crs, resolution and bounds")
        else:
            for k, v in (("crs", crs), ("resolution", res), ("bounds", bounds)):
                if v is None:
                    self.fail(f"grid.{k}", "missing; crs, resolution and bounds go together")
            if crs is not None:
                try:
                    from pyproj import CRS
                    CRS.from_user_input(crs)
                    crs = str(crs)
                except Exception:
                    self.fail("grid.crs", f"{crs!r} is not a CRS pyproj knows; write e.g. EPSG:32611")
                    crs = None
            if res is not None:
                if isinstance(res, (list, tuple)) and len(res) == 2:
                    rx = self.number(res[0], "grid.resolution[0]", positive=True)
                    ry = self.number(res[1], "grid.resolution[1]", positive=True)
                    res = (rx, ry) if rx and ry else None
                else:
                    r = self.number(res, "grid.resolution", positive=True)
                    res = (r, r) if r else None
            if bounds is not None:
                if not (isinstance(bounds, (list, tuple)) and len(bounds) == 4):
                    self.fail("grid.bounds", "must be [xmin, ymin, xmax, ymax]")
                    bounds = None
                else:
                    b = [self.number(x, f"grid.bounds[{i}]") for i, x in enumerate(bounds)]
                    if None in b:
                        bounds = None
                    elif b[2] <= b[0] or b[3] <= b[1]:
                        self.fail("grid.bounds", f"{bounds} must be [xmin, ymin, xmax, ymax] with "
                                                 f"xmin < xmax and ymin < ymax")
                        bounds = None
                    else:
                        bounds = tuple(b)
        chunk = self.number(value.get("chunk"), "grid.chunk", positive=True, integer=True,
                            default=DEFAULTS["grid.chunk"])
        if chunk and chunk % 16:
            self.fail("grid.chunk", f"{chunk} must be a multiple of 16 (GeoTIFF tiles); 512 or 1024 suit most")
        return GridSpec(like=like, crs=crs, resolution=res, bounds=bounds,
                        resampling=self.choice(value.get("resampling"), "grid.resampling", RESAMPLING,
                                               DEFAULTS["grid.resampling"]),
                        chunk=chunk or DEFAULTS["grid.chunk"])

    def emissivity(self, value) -> EmissivitySpec:
        value = self.mapping(value, "emissivity", _EMISSIVITY)
        table = self.resolve(value.get("table"), "emissivity.table")
        constant = self.number(value.get("constant"), "emissivity.constant")
        if constant is not None and not 0 < constant <= 1:
            self.fail("emissivity.constant", f"{constant} must be in (0, 1]")
        if constant is not None and table is not None:
            self.fail("emissivity", "give table or constant, not both")
        unknown = value.get("unknown", DEFAULTS["emissivity.unknown"])
        if unknown != "error":
            u = self.number(unknown, "emissivity.unknown")
            if u is not None and not 0 < u <= 1:
                self.fail("emissivity.unknown", f"{u} must be 'error' or an emissivity in (0, 1]")
            unknown = u if u is not None else "error"
        return EmissivitySpec(table=table, unknown=unknown, constant=constant)

    def methods(self, value) -> Methods:
        value = self.mapping(value, "methods", _METHODS)
        return Methods(
            sky_emissivity=self.choice(value.get("sky_emissivity"), "methods.sky_emissivity",
                                       SKY_EMISSIVITY_MODELS, DEFAULTS["methods.sky_emissivity"]),
            clouds=self.choice(value.get("clouds"), "methods.clouds", CLOUD_MODELS, DEFAULTS["methods.clouds"]),
            clear_sky_shortwave=self.choice(value.get("clear_sky_shortwave"), "methods.clear_sky_shortwave",
                                            CLEAR_SKY_MODELS, DEFAULTS["methods.clear_sky_shortwave"]),
            scene_to_day=self.choice(value.get("scene_to_day"), "methods.scene_to_day", SCENE_TO_DAY,
                                     DEFAULTS["methods.scene_to_day"]),
        )

    def _entries(self, value, section: str):
        if value is None:
            return []
        if not isinstance(value, list):
            self.fail(section, "must be a list of entries (each starting with '- ')")
            return []
        return value

    def _layers_of(self, entry: dict, key: str, allowed: tuple[str, ...], static: dict) -> dict[str, str]:
        layers = {}
        for name in allowed:
            if name in entry:
                p = self.resolve(entry[name], f"{key}.{name}")
                if p is not None:
                    layers[name] = p
            elif name in static:
                layers[name] = static[name]
        for name in ("land_cover", "elevation"):
            if name in static:
                layers[name] = static[name]
        return layers

    def _humidity(self, layers: dict, key: str, temperature: str) -> None:
        given = [h for h in HUMIDITY_LAYERS if h in layers]
        if not given:
            self.fail(key, "needs vapour_pressure (or dewpoint_temperature, or relative_humidity)")
        if "relative_humidity" in given and "vapour_pressure" not in given and "dewpoint_temperature" \
                not in given and temperature not in layers:
            self.fail(key, f"relative_humidity needs {temperature}")

    def scenes(self, value, static) -> list[Scene]:
        out, seen = [], set()
        for i, entry in enumerate(self._entries(value, "scenes")):
            key = f"scenes[{i}]"
            entry = self.mapping(entry, key, ("time",) + SCENE_LAYERS)
            t = self.time(entry.get("time"), f"{key}.time") if "time" in entry else None
            if "time" not in entry:
                self.fail(f"{key}.time", "missing; give the scene time in UTC, e.g. 2026-07-14T18:10:00Z")
            layers = self._layers_of(entry, key, SCENE_LAYERS, static)
            for need in ("albedo", "surface_temperature", "air_temperature"):
                if need not in layers:
                    self.fail(f"{key}.{need}", "missing; give a raster here or under static:")
            self._humidity(layers, key, "air_temperature")
            if t is not None:
                stamp = t.strftime("%Y%m%dT%H%M")
                if stamp in seen:
                    self.fail(f"{key}.time", f"{t.isoformat()} repeats an earlier scene time (to the minute)")
                seen.add(stamp)
                out.append(Scene(time=t, layers=layers, key=key))
        return out

    def days(self, value, static) -> list[Day]:
        out, seen = [], set()
        for i, entry in enumerate(self._entries(value, "days")):
            key = f"days[{i}]"
            entry = self.mapping(entry, key, ("date",) + DAY_LAYERS + ("air_temperature",))
            d = self.date(entry.get("date"), f"{key}.date") if "date" in entry else None
            if "date" not in entry:
                self.fail(f"{key}.date", "missing; give the date, e.g. 2026-07-14")
            layers = self._layers_of(entry, key, DAY_LAYERS + ("air_temperature",), static)
            for need in ("shortwave_down", "air_temperature_max", "air_temperature_min"):
                if need not in layers:
                    self.fail(f"{key}.{need}", "missing; give a raster here or under static:")
            # relative humidity on days uses the mean of Tmax and Tmin (FAO-56 eq. 19 form)
            self._humidity(layers, key, "air_temperature_max")
            if d is not None:
                if d in seen:
                    self.fail(f"{key}.date", f"{d} repeats an earlier day")
                seen.add(d)
                out.append(Day(date=d, layers=layers, key=key))
        return out

    def composites(self, value, scenes, days) -> list[CompositeSpec]:
        out, names = [], set()
        for i, entry in enumerate(self._entries(value, "composites")):
            key = f"composites[{i}]"
            entry = self.mapping(entry, key, _COMPOSITE)
            name = entry.get("name")
            if not isinstance(name, str) or not name.strip() or any(c in name for c in "/\\:*?\"<>| "):
                self.fail(f"{key}.name", f"{name!r} must be a short name usable in a file name (no spaces or /)")
                name = None
            elif name in names:
                self.fail(f"{key}.name", f"{name!r} is used twice")
            names.add(name)
            source = self.choice(entry.get("from"), f"{key}.from", ("days", "scenes"), "days")
            start = end = None
            if "season" in entry:
                season = self.choice(entry.get("season"), f"{key}.season", tuple(SEASONS), None)
                year = self.number(entry.get("year"), f"{key}.year", integer=True)
                if year is None:
                    self.fail(f"{key}.year", "missing; a season needs the year (DJF runs Dec of year-1 to Feb)")
                if "start" in entry or "end" in entry:
                    self.fail(key, "give season/year or start/end, not both")
                if season and year:
                    start, end = season_window(season, year)
            else:
                for k in ("start", "end"):
                    if k not in entry:
                        self.fail(f"{key}.{k}", "missing; give start and end dates (inclusive) or season and year")
                start = self.date(entry["start"], f"{key}.start") if "start" in entry else None
                end = self.date(entry["end"], f"{key}.end") if "end" in entry else None
                if start and end and end < start:
                    self.fail(f"{key}.end", f"{end} is before start {start}")
            stats = entry.get("statistics", DEFAULTS["composites.statistics"])
            if isinstance(stats, str):
                stats = [stats]
            if not isinstance(stats, list) or not stats:
                self.fail(f"{key}.statistics", f"must be a list of: {', '.join(COMPOSITE_STATISTICS)}")
                stats = []
            stats = [self.choice(s, f"{key}.statistics", COMPOSITE_STATISTICS, None) for s in stats]
            stats = tuple(dict.fromkeys(s for s in stats if s))
            if "total" in stats and source != "days":
                self.fail(f"{key}.statistics", "total is defined for composites from days only "
                                               "(mean x days in the window, MJ m-2)")
            min_count = self.number(entry.get("min_count"), f"{key}.min_count", integer=True,
                                    default=DEFAULTS["composites.min_count"])
            if min_count is not None and min_count < 0:
                self.fail(f"{key}.min_count", "must be 0 or more")
            if source == "days" and not days:
                self.fail(f"{key}.from", "composite from days, but the config lists no days")
            if source == "scenes" and not scenes:
                self.fail(f"{key}.from", "composite from scenes, but the config lists no scenes")
            if name and start and end:
                out.append(CompositeSpec(name=name, source=source, start=start, end=end, statistics=stats,
                                         min_count=min_count or 0, key=key))
        return out

    def zones(self, value) -> ZonesSpec | None:
        if value is None:
            return None
        value = self.mapping(value, "zones", _ZONES)
        path = self.resolve(value.get("path"), "zones.path")
        zid = value.get("id")
        if path is None:
            self.fail("zones.path", "missing; give a GeoJSON or GeoPackage of polygons")
        if not isinstance(zid, str) or not zid:
            self.fail("zones.id", "missing; name the attribute that identifies each zone")
        return ZonesSpec(path=path, id=zid) if path and isinstance(zid, str) else None

    def output(self, value) -> OutputSpec:
        value = self.mapping(value, "output", _OUTPUT)
        directory = value.get("directory", DEFAULTS["output.directory"])
        if self.output_override is not None:
            directory = str(self.output_override)
            d = Path(directory)
        else:
            if not isinstance(directory, str) or not directory.strip():
                self.fail("output.directory", "must be a folder path")
                directory = DEFAULTS["output.directory"]
            d = Path(os.path.expanduser(directory))
            d = d if d.is_absolute() else self.base / d
        products = value.get("products", DEFAULTS["output.products"])
        if isinstance(products, str):
            products = [products]
        valid = tuple(dict.fromkeys(list(SCENE_PRODUCTS) + list(DAY_PRODUCTS)))
        if not isinstance(products, list) or not products:
            self.fail("output.products", f"must be a list of: {', '.join(valid)}")
            products = list(DEFAULT_PRODUCTS)
        products = [self.choice(p, "output.products", valid, None) for p in products]
        products = tuple(dict.fromkeys(p for p in products if p))
        return OutputSpec(
            directory=d,
            products=products,
            compression=self.choice(value.get("compression"), "output.compression", COMPRESSION,
                                    DEFAULTS["output.compression"]),
            netcdf=self.boolean(value.get("netcdf"), "output.netcdf", DEFAULTS["output.netcdf"]),
            quicklooks=self.boolean(value.get("quicklooks"), "output.quicklooks", DEFAULTS["output.quicklooks"]),
        )

