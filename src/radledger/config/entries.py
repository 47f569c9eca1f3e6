"""Validation of the dated entries: ``scenes:`` (instantaneous) and ``days:`` (FAO-56 daily).

An entry covers one date or time, or many (``dates:`` ranges, ``times:`` lists or ``discover``); it
expands into one :class:`Scene` or :class:`Day` per date or time, with templates filled in.
"""

from __future__ import annotations

from ..model.diurnal import DIURNAL_PAIR
from ..model.layers import DAY_LAYERS, HUMIDITY_LAYERS, SCENE_LAYERS
from .dates import entry_dates, entry_times
from .inputs import parse_input
from .schema import Day, InputSpec, Scene

__all__ = ["entries", "scenes", "days", "ON_MISSING", "static"]

ON_MISSING = ("error", "skip")
STATIC_ONLY = ("land_cover", "elevation")


def entries(v, value, section: str):
    if value is None:
        return []
    if not isinstance(value, list):
        v.fail(section, "must be a list of entries (each starting with '- ')")
        return []
    return value


def static(v, value, allowed) -> dict[str, InputSpec]:
    """``static:``: inputs that serve every date (plain rasters or time stacks; no templates)."""
    value = v.mapping(value, "static", allowed)
    out = {}
    for name, given in value.items():
        if name in allowed:
            spec = parse_input(v, given, f"static.{name}", name, placeholder=None)
            if spec is not None:
                if spec.interpolate:
                    v.fail(f"static.{name}", "interpolate belongs to a days: entry")
                    continue
                out[name] = spec
    return out


def _layers_of(v, entry: dict, key: str, allowed: tuple[str, ...], static_layers: dict,
               placeholder: str) -> dict[str, InputSpec]:
    layers = {}
    for name in allowed:
        if name in entry:
            spec = parse_input(v, entry[name], f"{key}.{name}", name, placeholder=placeholder)
            if spec is not None:
                layers[name] = spec
        elif name in static_layers:
            layers[name] = static_layers[name]
    for name in STATIC_ONLY:
        if name in static_layers:
            layers[name] = static_layers[name]
    return layers


def _humidity(v, layers: dict, key: str, temperature: str) -> None:
    given = [h for h in HUMIDITY_LAYERS if h in layers]
    if not given:
        v.fail(key, "needs vapour_pressure (or dewpoint_temperature, or relative_humidity)")
    if "relative_humidity" in given and "vapour_pressure" not in given and "dewpoint_temperature" \
            not in given and temperature not in layers:
        v.fail(key, f"relative_humidity needs {temperature}")


def _on_missing(v, entry: dict, key: str) -> str:
    return v.choice(entry.get("on_missing"), f"{key}.on_missing", ON_MISSING, "error")


def _air_temperature(v, entry: dict, layers: dict, key: str) -> None:
    """A scene's air temperature: ``air_temperature``, or the day's pair (Parton & Logan 1981).

    What the entry itself gives wins over ``static:``; the entry may not give both forms, and one of
    the pair it gives needs the other (here or under ``static:``).  Drops from ``layers`` the form
    not used.
    """
    own = [n for n in DIURNAL_PAIR if n in entry]
    complete = all(n in layers for n in DIURNAL_PAIR)
    if "air_temperature" in entry and own:
        v.fail(f"{key}.{own[0]}", "give air_temperature or the pair air_temperature_max and air_temperature_min "
                                  "(Parton & Logan 1981 at the scene time), not both")
    elif own and not complete:
        other = next(n for n in DIURNAL_PAIR if n not in layers)
        v.fail(f"{key}.{other}", f"missing: {own[0]} needs {other} too (or give air_temperature instead)")
    pair = complete and "air_temperature" not in entry and (own or "air_temperature" not in layers)
    if pair:
        layers.pop("air_temperature", None)
        return
    for n in DIURNAL_PAIR:
        layers.pop(n, None)
    if "air_temperature" not in layers and not own:
        v.fail(f"{key}.air_temperature", "missing; give a raster here or under static: (or the day's "
                                         "air_temperature_max and air_temperature_min)")


def scenes(v, value, static_layers) -> list[Scene]:
    out, seen = [], {}
    allowed = SCENE_LAYERS + DIURNAL_PAIR
    for i, entry in enumerate(entries(v, value, "scenes")):
        key = f"scenes[{i}]"
        entry = v.mapping(entry, key, ("time", "times", "on_missing") + allowed)
        layers = _layers_of(v, entry, key, allowed, static_layers, "time")
        for need in ("albedo", "surface_temperature"):
            if need not in layers:
                v.fail(f"{key}.{need}", "missing; give a raster here or under static:")
        _air_temperature(v, entry, layers, key)
        _humidity(v, layers, key, "air_temperature" if "air_temperature" in layers else DIURNAL_PAIR[0])
        # the daily pair is not a scene time's file: discover reads the times from the other inputs
        templates = [s.path for n, s in layers.items() if n in entry and s.is_template and n not in DIURNAL_PAIR]
        on_missing = _on_missing(v, entry, key)
        for t in entry_times(v, entry, key, templates):
            stamp = t.strftime("%Y%m%dT%H%M")
            if stamp in seen:
                v.fail(f"{key}.time", f"{t.isoformat()} repeats an earlier scene time (to the minute, {seen[stamp]})")
                continue
            seen[stamp] = key
            # the daily pair stays unfilled: its date (the local solar date of the grid centre) needs the grid
            out.append(Scene(time=t, layers={n: (s if n in DIURNAL_PAIR else s.at(t)) for n, s in layers.items()},
                             key=key, on_missing=on_missing))
    return sorted(out, key=lambda s: s.time)


def days(v, value, static_layers) -> list[Day]:
    out, seen = [], {}
    for i, entry in enumerate(entries(v, value, "days")):
        key = f"days[{i}]"
        entry = v.mapping(entry, key, ("date", "dates", "on_missing") + DAY_LAYERS + ("air_temperature",))
        layers = _layers_of(v, entry, key, DAY_LAYERS + ("air_temperature",), static_layers, "date")
        for need in ("shortwave_down", "air_temperature_max", "air_temperature_min"):
            if need not in layers:
                v.fail(f"{key}.{need}", "missing; give a raster here or under static:")
        # relative humidity on days uses the mean of Tmax and Tmin (FAO-56 eq. 19 form)
        _humidity(v, layers, key, "air_temperature_max")
        on_missing = _on_missing(v, entry, key)
        for d in entry_dates(v, entry, key):
            if d in seen:
                v.fail(f"{key}.date", f"{d} repeats an earlier day ({seen[d]})")
                continue
            seen[d] = key
            out.append(Day(date=d, layers={n: s.at(d) for n, s in layers.items()}, key=key, on_missing=on_missing))
    return sorted(out, key=lambda d: d.date)
