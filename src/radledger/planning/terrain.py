"""The static terrain layers of a plan (``methods.terrain``): their files and settings hashes.

They depend on the DEM (its file and decoding), the grid (exactly) and the method; a layer whose
file carries the same settings hash is current and is not computed again.  The jobs read them as
plain inputs and take their identity into their own settings hashes.
"""

from __future__ import annotations

from .._version import __version__
from ..config import Config
from ..grid import TargetGrid
from ..model.terrain import TERRAIN_LAYER_NAMES, TerrainLayers
from ..model.terrain_layers import HORIZON_AZIMUTHS, MAX_HALO, MIN_SUN_ELEVATION, horizon_name
from .provenance import settings_hash, source_fingerprint

__all__ = ["terrain_layers"]


def terrain_layers(cfg: Config, grid: TargetGrid, dem) -> TerrainLayers | None:
    """The static terrain layers of ``cfg`` on ``grid`` from the DEM source ``dem`` (None: terrain none)."""
    method = cfg.methods.terrain
    if method == "none":
        return None
    base = [__version__, grid.identity, source_fingerprint(dem)]
    halo = ["halo", MIN_SUN_ELEVATION, MAX_HALO]
    hashes = {n: settings_hash(base, n, "horn-1981") for n in TERRAIN_LAYER_NAMES[:2]}
    if method == "shading":
        hashes["sky_view_factor"] = settings_hash(base, "dozier-frew-1990", list(HORIZON_AZIMUTHS), halo)
        hashes.update({horizon_name(a): settings_hash(base, horizon_name(a), halo) for a in HORIZON_AZIMUTHS})
    else:
        hashes["sky_view_factor"] = settings_hash(base, "plane (1 + cos s) / 2")
    return TerrainLayers(method=method, directory=str(cfg.output.directory / "terrain"), dem=dem,
                         hashes=tuple(hashes.items()))
