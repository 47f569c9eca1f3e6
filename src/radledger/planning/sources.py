"""Each input layer's decoding: the config's ``layers:`` entry over the file's own encoding."""

from __future__ import annotations

from ..config import Config
from ..errors import ConfigError
from ..io.rasters import LayerSource, file_encoding
from ..kinds import TimeKind
from ..model.layers import LAYERS, SHORTWAVE_UNITS
from ..units import to_internal

__all__ = ["layer_source", "shortwave_units"]


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


def layer_source(cfg: Config, layer: str, path: str, *, kind: TimeKind = TimeKind.SCENES,
                 units: str | None = None) -> LayerSource:
    """The :class:`LayerSource` of ``layer`` at ``path`` with the config's decoding.

    The file's own scale/offset/nodata apply where the config gives none; ``units`` given with the
    input itself override ``layers:``.
    """
    dec = cfg.decoding(layer)
    enc = file_encoding(path, layer)
    info = LAYERS[layer]
    declared = units or dec.units or info.internal_unit
    if layer == "shortwave_down":
        declared = shortwave_units(kind, layers_units=dec.units, input_units=units)
        # W m-2 (a 24-hour mean) -> MJ m-2 day-1; a daylight mean is converted per pixel by the day kernel
        factor, shift = (0.0864, 0.0) if (kind is TimeKind.DAYS and declared == "W m-2") else (1.0, 0.0)
    else:
        factor, shift = to_internal(declared, target=info.internal_unit)
    return LayerSource(
        layer=layer, path=path,
        scale=dec.scale if dec.scale is not None else enc.scale,
        offset=dec.offset if dec.offset is not None else enc.offset,
        nodata=dec.nodata if dec.nodata is not None else enc.nodata,
        factor=factor, shift=shift,
        resampling="nearest" if info.categorical else cfg.grid.resampling,
        units=declared,
    )
