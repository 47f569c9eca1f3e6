"""The surface emissivity of a chunk: a constant, or the land-cover lookup with unknown classes
handled as the config says (a flagged default, or an error naming them)."""

from __future__ import annotations

import numpy as np

from .. import physics as ph
from ..errors import UnknownClassError
from .params import SceneParams
from .products import SCENE_QUALITY_BITS

__all__ = ["chunk_emissivity", "resolve_unknown_classes", "unknown_classes_message"]

B = SCENE_QUALITY_BITS


def unknown_classes_message(land_cover: str, table: str, classes) -> str:
    """The one message for land-cover classes the emissivity table lacks."""
    classes = sorted(int(c) for c in classes)
    shown = ", ".join(str(c) for c in classes[:20]) + (" ..." if len(classes) > 20 else "")
    return (f"{land_cover}: land-cover classes {shown} are not in the emissivity table {table}; add them "
            f"to the table or set emissivity.unknown to a default emissivity")


def chunk_emissivity(arrays: dict, p: SceneParams, quality: np.ndarray) -> np.ndarray:
    """Surface emissivity of a chunk: constant, or the land-cover lookup (unknown classes per the config)."""
    shape = quality.shape
    if p.emissivity_constant is not None:
        return np.full(shape, p.emissivity_constant, dtype=np.float32)
    lc = arrays["land_cover"]
    missing = np.isnan(lc)
    quality[missing] |= B["input_missing"]
    cls = np.where(missing, -1, lc).astype(np.int64)   # -1 lies outside the LUT -> NaN
    eps = ph.emissivity_from_classes(cls, p.emissivity_lut)
    unknown = np.isnan(eps) & ~missing
    if unknown.any():
        eps = resolve_unknown_classes(eps, cls, unknown, p, quality)
    return eps


def resolve_unknown_classes(eps, cls, unknown, p: SceneParams, quality) -> np.ndarray:
    """Classes the table lacks: the configured default (flagged), or stop naming them."""
    if p.emissivity_unknown is None:
        raise UnknownClassError(unknown_classes_message(p.land_cover_path, p.emissivity_table,
                                                        np.unique(cls[unknown])))
    quality[unknown] |= B["emissivity_default"]
    return np.where(unknown, np.float32(p.emissivity_unknown), eps)
