"""Each input of a job as a source the chunk tasks read: a raster, or the right steps of a time stack.

Decoding, in order of precedence: what the input itself says in the config (``{path, units, scale,
offset, nodata}``), then ``layers.NAME``, then the file's own metadata (GeoTIFF scale/offset/nodata;
a stack's CF ``scale_factor``, ``add_offset``, ``_FillValue`` and ``units``).
"""

from __future__ import annotations

import datetime as dt

from ..config import Config, InputSpec
from ..errors import ConfigError, InputError
from ..io.rasters import LayerSource, file_encoding
from ..io.timestacks import StackSource, stack_info
from ..kinds import TimeKind
from ..model.layers import LAYERS, SHORTWAVE_UNITS
from ..units import canonical_unit, to_internal

__all__ = ["input_source", "layer_source", "shortwave_units", "stack_steps", "MissingInput", "layer_conversion"]


class MissingInput(InputError):
    """An input of one date is absent (a template's file, a stack's step): ``on_missing`` decides."""


def shortwave_units(kind: TimeKind, *, layers_units: str | None, input_units: str | None = None) -> str:
    """The units of a shortwave input of ``kind``.

    Units given with the input itself (its own ``units:`` or a CF ``units`` attribute) are taken as
    they are: ``W m-2`` on a day is a 24-hour mean.  ``layers.shortwave_down.units`` serves scenes
    and days at once, so each kind takes from it only a unit of its own: a scene is always W m-2, a
    day takes ``MJ m-2 day-1`` or ``W m-2 daylight`` from it and otherwise a daily total in MJ m-2
    day-1 (``W m-2`` there describes the scenes).
    """
    valid = SHORTWAVE_UNITS[kind]
    if input_units is not None:
        if input_units not in valid:
            raise ConfigError(f"shortwave_down of {kind} declared {input_units!r}; {kind} take "
                              f"{' or '.join(repr(u) for u in valid)}")
        return input_units
    if kind is TimeKind.DAYS and layers_units in ("MJ m-2 day-1", "W m-2 daylight"):
        return layers_units
    return valid[0]


def _conversion(layer: str, kind: TimeKind, declared: str | None, *, layers_units: str | None,
                where: str) -> tuple[float, float, str]:
    """(factor, shift, units) taking ``declared`` units (None: the layer's default) to internal units."""
    info = LAYERS[layer]
    if layer == "shortwave_down":
        units = shortwave_units(kind, layers_units=layers_units, input_units=declared)
        # W m-2 (a 24-hour mean) -> MJ m-2 day-1; a daylight mean is converted per pixel by the day kernel
        factor = 0.0864 if (kind is TimeKind.DAYS and units == "W m-2") else 1.0
        return factor, 0.0, units
    units = declared or layers_units or info.internal_unit
    if units not in info.units:
        raise InputError(f"{where}: units {units!r} do not suit {layer} (valid: {', '.join(info.units)}); set "
                         f"layers.{layer}.units or the input's own units")
    factor, shift = to_internal(units, target=info.internal_unit)
    return factor, shift, units


def layer_conversion(cfg: Config, layer: str, kind: TimeKind, *, where: str) -> tuple[float, float, str]:
    """(factor, shift, units) taking values in the units ``layers:`` declares to internal units.

    For inputs that carry no decoding of their own, such as a station table's columns.
    """
    return _conversion(layer, kind, None, layers_units=cfg.decoding(layer).units, where=where)


def layer_source(cfg: Config, layer: str, path: str, *, kind: TimeKind = TimeKind.SCENES,
                 units: str | None = None, spec: InputSpec | None = None) -> LayerSource:
    """The :class:`LayerSource` of a raster input, with the config's decoding over the file's own."""
    dec = cfg.decoding(layer)
    spec = spec or InputSpec(path=path, units=units)
    enc = file_encoding(path, layer)
    factor, shift, declared = _conversion(layer, kind, spec.units, layers_units=dec.units, where=path)
    pick = lambda own, cfg_value, file_value: own if own is not None else (  # noqa: E731
        cfg_value if cfg_value is not None else file_value)
    return LayerSource(
        layer=layer, path=path,
        scale=pick(spec.scale, dec.scale, enc.scale),
        offset=pick(spec.offset, dec.offset, enc.offset),
        nodata=pick(spec.nodata, dec.nodata, enc.nodata),
        factor=factor, shift=shift,
        resampling="nearest" if LAYERS[layer].categorical else cfg.grid.resampling,
        units=declared,
    )


def stack_steps(info, kind: TimeKind, when) -> tuple[tuple[int, ...], tuple[float, ...]]:
    """The steps of a stack (and their weights) for a day or a scene time; :class:`MissingInput` if none.

    Days take the one step on that date; scenes interpolate linearly between the two steps that
    bracket the scene time (one step when the time falls on it).
    """
    times = info.times
    if kind is TimeKind.DAYS:
        hits = [i for i, t in enumerate(times) if t.date() == when]
        if len(hits) > 1:
            raise InputError(f"{info.path}: {info.variable} has {len(hits)} steps on {when}; days take a daily "
                             f"stack (one step per date)")
        if not hits:
            raise MissingInput(f"{info.path}: {info.variable} has no step on {when} (it covers "
                               f"{times[0].date()} .. {times[-1].date()}); on_missing: skip leaves such dates out")
        return (hits[0],), (1.0,)
    after = next((i for i, t in enumerate(times) if t >= when), None)
    if after is not None and times[after] == when:
        return (after,), (1.0,)
    if after is None or after == 0:
        raise MissingInput(f"{info.path}: scene time {when.strftime('%Y-%m-%dT%H:%MZ')} lies outside "
                           f"{info.variable}'s time range {times[0]:%Y-%m-%dT%H:%MZ} .. {times[-1]:%Y-%m-%dT%H:%MZ}")
    t0, t1 = times[after - 1], times[after]
    w = (when - t0) / (t1 - t0)
    return (after - 1, after), (1.0 - w, w)


def _stack_source(cfg: Config, layer: str, spec: InputSpec, kind: TimeKind, when) -> StackSource:
    info = stack_info(spec.path, spec.variable)
    dec = cfg.decoding(layer)
    steps, weights = stack_steps(info, kind, when)
    own_units = spec.units or _layers_units_for(layer, kind, dec.units)
    if own_units is None and info.units:
        own_units = canonical_unit(info.units)
        if own_units not in LAYERS[layer].units:
            raise InputError(f"{spec.path}: {spec.variable} has units {info.units!r}, which radledger does not "
                             f"know for {layer} (valid: {', '.join(LAYERS[layer].units)}); set layers.{layer}.units "
                             f"or the input's own units")
    factor, shift, declared = _conversion(layer, kind, own_units, layers_units=dec.units,
                                          where=f"{spec.path}: {spec.variable}")
    pick = lambda own, cfg_value: own if own is not None else cfg_value  # noqa: E731
    return StackSource(layer=layer, path=spec.path, variable=spec.variable, steps=steps, weights=weights,
                       info=info, scale=pick(spec.scale, dec.scale), offset=pick(spec.offset, dec.offset),
                       nodata=pick(spec.nodata, dec.nodata), factor=factor, shift=shift,
                       resampling="nearest" if LAYERS[layer].categorical else cfg.grid.resampling,
                       units=declared)


def _layers_units_for(layer: str, kind: TimeKind, units: str | None) -> str | None:
    """``layers.NAME.units`` where it decides a stack's units over its attribute (see shortwave_units)."""
    if layer == "shortwave_down" and kind is TimeKind.DAYS and units not in ("MJ m-2 day-1", "W m-2 daylight"):
        return None
    return units


def input_source(cfg: Config, layer: str, spec: InputSpec, kind: TimeKind, when: dt.date | dt.datetime):
    """The source of ``layer`` for one date (days) or time (scenes): a raster or a stack's steps.

    Raises :class:`MissingInput` when a template's file or a stack's step is absent.
    """
    if spec.is_stack:
        return _stack_source(cfg, layer, spec, kind, when)
    try:
        return layer_source(cfg, layer, spec.path, kind=kind, spec=spec)
    except InputError as exc:
        if "file not found" not in str(exc):
            raise
        raise MissingInput(str(exc)) from None
