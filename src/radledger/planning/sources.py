"""Each input layer's decoding: the config's ``layers:`` entry over the file's own encoding."""

from __future__ import annotations

from ..config import Config
from ..io.rasters import LayerSource, file_encoding
from ..kinds import TimeKind
from ..model.layers import LAYERS
from ..units import to_internal

__all__ = ["layer_source"]


def layer_source(cfg: Config, layer: str, path: str, *, kind: TimeKind = TimeKind.SCENES) -> LayerSource:
    """The :class:`LayerSource` of ``layer`` at ``path`` with the config's decoding.

    The file's own scale/offset/nodata apply where the config gives none.
    """
    dec = cfg.decoding(layer)
    enc = file_encoding(path, layer)
    info = LAYERS[layer]
    declared = dec.units or info.internal_unit
    if layer == "shortwave_down":
        # scenes hold W m-2, days MJ m-2 day-1; no conversion between the two
        factor, shift = 1.0, 0.0
        declared = "W m-2" if kind is TimeKind.SCENES else "MJ m-2 day-1"
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
