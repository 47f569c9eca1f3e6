"""Validation of the dated entries: ``scenes:`` (instantaneous) and ``days:`` (FAO-56 daily)."""

from __future__ import annotations

from ..model.layers import DAY_LAYERS, HUMIDITY_LAYERS, SCENE_LAYERS
from .schema import Day, Scene

__all__ = ["entries", "scenes", "days"]


def entries(v, value, section: str):
    if value is None:
        return []
    if not isinstance(value, list):
        v.fail(section, "must be a list of entries (each starting with '- ')")
        return []
    return value


def _layers_of(v, entry: dict, key: str, allowed: tuple[str, ...], static: dict) -> dict[str, str]:
    layers = {}
    for name in allowed:
        if name in entry:
            p = v.resolve(entry[name], f"{key}.{name}")
            if p is not None:
                layers[name] = p
        elif name in static:
            layers[name] = static[name]
    for name in ("land_cover", "elevation"):
        if name in static:
            layers[name] = static[name]
    return layers


def _humidity(v, layers: dict, key: str, temperature: str) -> None:
    given = [h for h in HUMIDITY_LAYERS if h in layers]
    if not given:
        v.fail(key, "needs vapour_pressure (or dewpoint_temperature, or relative_humidity)")
    if "relative_humidity" in given and "vapour_pressure" not in given and "dewpoint_temperature" \
            not in given and temperature not in layers:
        v.fail(key, f"relative_humidity needs {temperature}")


def scenes(v, value, static) -> list[Scene]:
    out, seen = [], set()
    for i, entry in enumerate(entries(v, value, "scenes")):
        key = f"scenes[{i}]"
        entry = v.mapping(entry, key, ("time",) + SCENE_LAYERS)
        t = v.time(entry.get("time"), f"{key}.time") if "time" in entry else None
        if "time" not in entry:
            v.fail(f"{key}.time", "missing; give the scene time in UTC, e.g. 2026-07-14T18:10:00Z")
        layers = _layers_of(v, entry, key, SCENE_LAYERS, static)
        for need in ("albedo", "surface_temperature", "air_temperature"):
            if need not in layers:
                v.fail(f"{key}.{need}", "missing; give a raster here or under static:")
        _humidity(v, layers, key, "air_temperature")
        if t is not None:
            stamp = t.strftime("%Y%m%dT%H%M")
            if stamp in seen:
                v.fail(f"{key}.time", f"{t.isoformat()} repeats an earlier scene time (to the minute)")
            seen.add(stamp)
            out.append(Scene(time=t, layers=layers, key=key))
    return out


def days(v, value, static) -> list[Day]:
    out, seen = [], set()
    for i, entry in enumerate(entries(v, value, "days")):
        key = f"days[{i}]"
        entry = v.mapping(entry, key, ("date",) + DAY_LAYERS + ("air_temperature",))
        d = v.date(entry.get("date"), f"{key}.date") if "date" in entry else None
        if "date" not in entry:
            v.fail(f"{key}.date", "missing; give the date, e.g. 2026-07-14")
        layers = _layers_of(v, entry, key, DAY_LAYERS + ("air_temperature",), static)
        for need in ("shortwave_down", "air_temperature_max", "air_temperature_min"):
            if need not in layers:
                v.fail(f"{key}.{need}", "missing; give a raster here or under static:")
        # relative humidity on days uses the mean of Tmax and Tmin (FAO-56 eq. 19 form)
        _humidity(v, layers, key, "air_temperature_max")
        if d is not None:
            if d in seen:
                v.fail(f"{key}.date", f"{d} repeats an earlier day")
            seen.add(d)
            out.append(Day(date=d, layers=layers, key=key))
    return out
