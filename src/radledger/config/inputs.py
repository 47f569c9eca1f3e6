"""One input of a scene or a day: a raster, a per-date template, a time stack, or albedo between scenes.

Forms a config may use for any layer of an entry (or under ``static:``)::

    albedo: sat/albedo.tif                              # one raster
    shortwave_down: met/rsd_{date:%Y%m%d}.tif           # a template: strftime codes in {date:...}/{time:...}
    air_temperature_max: {path: met/tmax.nc, variable: tmax}   # a time stack (NetCDF, Zarr)
    shortwave_down: {path: met/rsd.nc, variable: rsd, units: W m-2}  # with its own decoding
    albedo: {interpolate: scenes, max_gap: 16}          # days: per pixel, between the scenes' albedos
    air_temperature_max: stations                       # gridded from the stations: table per date
"""

from __future__ import annotations

import datetime as dt
import re
import string

from ..model.layers import LAYERS
from ..units import canonical_unit
from .schema import InputSpec

__all__ = ["parse_input", "INPUT_KEYS", "template_fields", "format_template", "STACK_SUFFIXES", "STATIONS",
           "STATION_LAYERS"]

INPUT_KEYS = ("path", "variable", "units", "scale", "offset", "nodata", "interpolate", "max_gap")
STACK_SUFFIXES = (".nc", ".nc4", ".cdf", ".h5", ".hdf5", ".zarr", ".zarr/")
INTERPOLATE = ("scenes",)
DEFAULT_MAX_GAP = 16.0   # days: about two Landsat-class revisits
STATIONS = "stations"    # the input value: this layer is gridded from the stations: table
#: the weather layers a station table may grid (not satellite layers, land cover or the DEM)
STATION_LAYERS = ("air_temperature", "air_temperature_max", "air_temperature_min", "dewpoint_temperature",
                  "vapour_pressure", "relative_humidity", "shortwave_down")


def template_fields(path: str) -> set[str]:
    """The placeholder names in a path (``date``, ``time``); empty for a plain path."""
    try:
        return {name for _, name, _, _ in string.Formatter().parse(path) if name}
    except ValueError:
        return {"?"}


def format_template(path: str, when) -> str:
    """``path`` with ``{date:...}`` / ``{time:...}`` filled in (a date fills both, a time too)."""
    day = when.date() if isinstance(when, dt.datetime) else when
    return path.format(date=day, time=when)


def parse_input(v, value, key: str, layer: str, *, placeholder: str) -> InputSpec | None:
    """An :class:`InputSpec` from a config value; problems go to the validator ``v``.

    ``placeholder``: the template field this entry fills (``date`` for days, ``time`` for scenes,
    ``None`` under ``static:`` where no template makes sense).
    """
    path_key = f"{key}.path"
    if isinstance(value, str) and value.strip() == STATIONS:
        return _from_stations(v, key, layer, placeholder)
    if isinstance(value, str):
        value, path_key = {"path": value}, key
    if not isinstance(value, dict):
        v.fail(key, f"must be a file path or URL, a template, or a mapping such as {{path: ..., variable: ...}}; "
                    f"got {value!r}")
        return None
    value = v.mapping(value, key, INPUT_KEYS)
    if "interpolate" in value:
        return _interpolated(v, value, key, layer, placeholder)
    if "path" not in value:
        v.fail(key, "missing path: give the file, template or time stack of this input")
        return None
    path = v.resolve(value.get("path"), path_key)
    if path is None:
        return None
    fields = template_fields(path)
    if fields and (fields - {"date", "time"} or placeholder is None):
        allowed = f"{{{placeholder}:FORMAT}}" if placeholder else "no placeholders (static inputs serve every date)"
        v.fail(path_key, f"{path!r}: unknown placeholder(s) {', '.join(sorted(fields))}; use {allowed} with "
                              f"strftime codes, e.g. {{{placeholder or 'date'}:%Y%m%d}}")
        return None
    if placeholder == "date" and "time" in fields:
        v.fail(path_key, f"{path!r}: days fill {{date:...}}, not {{time:...}}")
        return None
    variable = value.get("variable")
    if variable is not None and (not isinstance(variable, str) or not variable):
        v.fail(f"{key}.variable", f"must be the variable's name in the file, got {variable!r}")
        variable = None
    units = value.get("units")
    if units is not None:
        canon = canonical_unit(str(units))
        if canon not in LAYERS[layer].units:
            v.fail(f"{key}.units", f"unknown units {units!r} for {layer}; valid: {', '.join(LAYERS[layer].units)}")
            canon = None
        units = canon
    spec = InputSpec(path=path, variable=variable, units=units,
                     scale=v.number(value.get("scale"), f"{key}.scale"),
                     offset=v.number(value.get("offset"), f"{key}.offset"),
                     nodata=v.number(value.get("nodata"), f"{key}.nodata"))
    if spec.scale == 0:
        v.fail(f"{key}.scale", "must not be 0")
    if variable is None and spec.is_stack:
        v.fail(f"{key}.variable", f"{path!r} is a time stack: name its variable, e.g. {{path: ..., variable: tmax}}")
        return None
    if spec.is_stack and fields:
        v.fail(path_key, "a time stack holds every date itself; give its path without a template")
        return None
    return spec


def _from_stations(v, key: str, layer: str, placeholder) -> InputSpec | None:
    if placeholder is None:
        v.fail(key, "stations belongs to a scenes: or days: entry (gridded for each date or time), not static:")
        return None
    if layer not in STATION_LAYERS:
        v.fail(key, f"{layer} cannot be gridded from stations; stations grid the weather layers "
                    f"({', '.join(STATION_LAYERS)})")
        return None
    return InputSpec(stations=True)


def _interpolated(v, value: dict, key: str, layer: str, placeholder) -> InputSpec | None:
    method = v.choice(value.get("interpolate"), f"{key}.interpolate", INTERPOLATE, None)
    if method is None:
        return None
    if layer != "albedo" or placeholder != "date":
        v.fail(f"{key}.interpolate", "only a day's albedo can be interpolated between scenes")
        return None
    extra = set(value) - {"interpolate", "max_gap"}
    if extra:
        v.fail(key, f"{', '.join(sorted(extra))} do not go with interpolate: scenes (the scenes' albedo is used)")
    gap = v.number(value.get("max_gap"), f"{key}.max_gap", positive=True, default=DEFAULT_MAX_GAP)
    return InputSpec(interpolate=method, max_gap=gap or DEFAULT_MAX_GAP)


_STRFTIME = {"Y": r"\d{4}", "m": r"\d{2}", "d": r"\d{2}", "H": r"\d{2}", "M": r"\d{2}", "S": r"\d{2}",
             "j": r"\d{3}", "y": r"\d{2}", "%": "%"}


def template_regex(path: str, field: str) -> tuple[re.Pattern, list[str]]:
    """A regex matching the files of a template, with one group per ``{field:FMT}``; and the formats."""
    parts, formats = [], []
    for literal, name, fmt, _ in string.Formatter().parse(path):
        parts.append(re.escape(literal))
        if name is None:
            continue
        if name != field:
            raise ValueError(f"placeholder {{{name}}} where {{{field}:...}} was expected")
        fmt = fmt or "%Y-%m-%dT%H:%M:%S"
        rx = ""
        i = 0
        while i < len(fmt):
            if fmt[i] == "%" and i + 1 < len(fmt):
                code = fmt[i + 1]
                if code not in _STRFTIME:
                    raise ValueError(f"strftime code %{code} cannot be discovered; use %Y %m %d %H %M %S %j")
                rx += _STRFTIME[code]
                i += 2
            else:
                rx += re.escape(fmt[i])
                i += 1
        parts.append(f"({rx})")
        formats.append(fmt)
    return re.compile("".join(parts) + "$"), formats
