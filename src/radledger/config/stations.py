"""Validation of ``stations:`` (a weather-station table gridded per date) and ``validation:`` (net radiometers).

Reading the tables themselves is left to the plan (``radledger check`` reports their rows); here only
the keys are checked, and that every input given as ``stations`` can be gridded: a ``stations:``
section exists, its ``columns`` names a column for that layer, and a DEM is given (the gridding
restores the elevation trend with it).
"""

from __future__ import annotations

from ..stations.gridding import MIN_STATIONS
from .inputs import STATION_LAYERS
from .schema import StationsSpec, ValidationSpec, keys_of

__all__ = ["stations", "validation", "station_inputs", "METHODS"]

METHODS = tuple(MIN_STATIONS)


def _crs(v, value, key: str, default: str) -> str:
    if value is None:
        return default
    try:
        from pyproj import CRS
        CRS.from_user_input(value)
    except Exception:
        v.fail(key, f"{value!r} is not a CRS pyproj knows; write e.g. EPSG:4326 for longitude/latitude")
        return default
    return str(value)


def stations(v, value) -> StationsSpec | None:
    """``stations: {path, crs, columns, method}``."""
    if value is None:
        return None
    value = v.mapping(value, "stations", keys_of(StationsSpec))
    path = v.resolve(value.get("path"), "stations.path")
    if value.get("path") is None:
        v.fail("stations.path", "missing; give the station table (CSV: station, lon, lat, elevation, date or "
                                "time, one column per variable)")
    columns = value.get("columns")
    out: dict[str, str] = {}
    if columns is None:
        v.fail("stations.columns", "missing; map each layer to its column, e.g. {air_temperature_max: tmax_c}")
    elif not isinstance(columns, dict):
        v.fail("stations.columns", f"must be a mapping layer: column, got {columns!r}")
    else:
        for layer, column in v.mapping(columns, "stations.columns", STATION_LAYERS).items():
            if layer not in STATION_LAYERS:
                continue
            if not isinstance(column, str) or not column.strip():
                v.fail(f"stations.columns.{layer}", f"must be the name of a column of the table, got {column!r}")
                continue
            out[layer] = column.strip()
    method = v.choice(value.get("method"), "stations.method", METHODS, StationsSpec.method)
    crs = _crs(v, value.get("crs"), "stations.crs", StationsSpec.crs)
    if path is None:
        return None
    return StationsSpec(path=path, crs=crs, columns=out, method=method)


def validation(v, value) -> ValidationSpec | None:
    """``validation: {path, crs}``."""
    if value is None:
        return None
    value = v.mapping(value, "validation", keys_of(ValidationSpec))
    path = v.resolve(value.get("path"), "validation.path")
    if value.get("path") is None:
        v.fail("validation.path", "missing; give the net-radiometer table (CSV: station, lon, lat, date or "
                                  "time, net_radiation)")
    if path is None:
        return None
    return ValidationSpec(path=path, crs=_crs(v, value.get("crs"), "validation.crs", ValidationSpec.crs))


def station_inputs(v, spec: StationsSpec | None, scenes, days, static) -> None:
    """Every input given as ``stations`` can be gridded (problems go to ``v``)."""
    wanted: dict[str, str] = {}
    for entry in (*scenes, *days):
        for layer, given in entry.layers.items():
            if given.stations:
                wanted.setdefault(layer, f"{entry.key}.{layer}")
    if not wanted:
        return
    if spec is None:
        for layer, key in wanted.items():
            v.fail(key, "stations needs a stations: section naming the station table")
        return
    for layer, key in wanted.items():
        if layer not in spec.columns:
            v.fail("stations.columns", f"{key} is gridded from stations, but stations.columns names no column "
                                       f"for {layer}; add e.g. {layer}: <column>")
    if "elevation" not in static:
        v.fail("static.elevation", "needed to grid station values (the elevation trend is restored with the "
                                   "DEM); give a DEM")
