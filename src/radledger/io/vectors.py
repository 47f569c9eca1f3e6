"""Zone polygons (basins, sub-basins): read any OGR vector, check the ids, repair, reproject.

Geometry work is bounded, so a hostile or broken file fails in seconds: at
most :data:`MAX_VERTICES` vertices per file, and an invalid polygon is
repaired only if its edges cross each other at most :data:`MAX_CROSSINGS`
times (repairing costs grow with the square of the crossings; a digitising
slip crosses a handful of times).  The repair runs in a helper thread while
the main thread waits in short steps, so SIGINT/SIGTERM stop it promptly.
"""

from __future__ import annotations

import math
import os
import threading
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np
import shapely
from pyproj import CRS, Transformer

from ..errors import InputError
from ..grid import TargetGrid

__all__ = ["Zones", "read_zones", "MAX_VERTICES", "MAX_CROSSINGS", "self_crossings", "interruptible"]

_POLYGONAL = ("Polygon", "MultiPolygon")
MAX_VERTICES = 1_000_000     # per zone file
MAX_CROSSINGS = 1_000        # per invalid polygon, to be repaired



@dataclass(frozen=True)
class Zones:
    """Polygons with ids, in one CRS.

    Attributes
    ----------
    id_field : str
        Name of the id field in the source file (the CSV's first column).
    ids : tuple
        Zone ids (str or int) in file order; zone ``i`` has label ``i + 1``.
    geometries : tuple of shapely (Multi)Polygon
        The zones, in ``crs`` coordinates [CRS units].
    crs : pyproj.CRS
        CRS of ``geometries``.
    source : str
        The file they came from (for messages).
    """

    id_field: str
    ids: tuple
    geometries: tuple
    crs: CRS
    source: str = ""

    def __len__(self) -> int:
        return len(self.ids)

    def __repr__(self) -> str:
        epsg = self.crs.to_epsg()
        return (f"Zones({len(self)} zones by {self.id_field!r} from {self.source or '?'}, "
                f"{f'EPSG:{epsg}' if epsg else self.crs.name})")

    def to_crs(self, crs) -> "Zones":
        """The same zones reprojected to ``crs`` (edges densified so they bend as they should)."""
        crs = CRS.from_user_input(crs)
        if crs == self.crs:
            return self
        return Zones(self.id_field, self.ids, tuple(_reproject(self.geometries, self.crs, crs)), crs, self.source)


def _reproject(geoms: Sequence, src: CRS, dst: CRS) -> np.ndarray:
    geoms = np.asarray(geoms, dtype=object)
    bounds = shapely.bounds(geoms)
    # 64 segments per bbox side keep a lon/lat edge within a fraction of a pixel of its projected curve
    step = np.maximum(bounds[:, 2] - bounds[:, 0], bounds[:, 3] - bounds[:, 1]) / 64
    geoms = shapely.segmentize(geoms, np.where(step > 0, step, 1.0))
    transformer = Transformer.from_crs(src, dst, always_xy=True)
    return shapely.transform(geoms, lambda xy: np.column_stack(transformer.transform(xy[:, 0], xy[:, 1])))


def _is_local(path: str) -> bool:
    return "://" not in path and not path.startswith("/vsi")


def _id_value(value, path: str, row: int):
    if value is None or (isinstance(value, float) and math.isnan(value)):
        raise InputError(f"{path}: feature {row + 1} has no id; give every zone a value in its id field")
    if isinstance(value, (np.integer, int)):
        return int(value)
    if isinstance(value, (np.floating, float)):
        return int(value) if float(value).is_integer() else float(value)
    return str(value)


def read_zones(path: str | os.PathLike, id_field: str, grid: TargetGrid, *, layer: str | int | None = None) -> Zones:
    """Read zone polygons (GeoJSON, GeoPackage, any OGR vector) and reproject them to the grid CRS.

    Parameters
    ----------
    path : str or path-like
        Vector file; GeoJSON without a CRS is EPSG:4326 (RFC 7946).
    id_field : str
        Field holding each zone's id (strings or integers), unique per zone.
    grid : TargetGrid
        The run's grid; zones are returned in its CRS.
    layer : str or int, optional
        Layer of a multi-layer file (default: the first).

    Raises
    ------
    InputError
        File missing or unreadable, id field missing, ids empty or duplicated,
        no polygons, a geometry that cannot be repaired, or no zone on the grid.
    """
    import pyogrio  # imported here so writers that only need atomic_output do not load GDAL's vector side
    from pyogrio.errors import DataLayerError, DataSourceError

    path = str(path)
    if _is_local(path) and not os.path.exists(path):
        raise InputError(f"zones.path: {path}: file not found; check the path (relative to the config file)")
    try:
        info = pyogrio.read_info(path, layer=layer)
    except (DataSourceError, DataLayerError) as exc:
        raise InputError(f"zones.path: {path}: cannot be read as a vector file ({exc}); "
                         f"give a GeoJSON or GeoPackage of polygons") from None
    fields = [str(f) for f in info["fields"]]
    if id_field not in fields:
        available = ", ".join(fields) if fields else "none"
        raise InputError(f"zones.id: {path} has no field {id_field!r}; available fields: {available}")
    meta, _, wkb, (values,) = pyogrio.raw.read(path, layer=layer, columns=[id_field])
    if len(values) == 0:
        raise InputError(f"zones.path: {path}: has no features; it needs at least one polygon")

    ids = tuple(_id_value(v, path, i) for i, v in enumerate(values.tolist()))
    seen, dups = set(), []
    for i in ids:
        if i in seen and i not in dups:
            dups.append(i)
        seen.add(i)
    if dups:
        shown = ", ".join(map(repr, dups[:5])) + (" ..." if len(dups) > 5 else "")
        raise InputError(f"zones.id: {path}: duplicate {id_field} values {shown}; every zone needs its own id")

    geoms = shapely.from_wkb(wkb)
    n_vertices = int(shapely.get_num_coordinates(geoms).sum())
    if n_vertices > MAX_VERTICES:
        raise InputError(f"zones.path: {path}: {n_vertices:,} vertices, more than {MAX_VERTICES:,}; simplify the "
                         f"polygons in a GIS (zones need far less detail than the grid's pixels)")
    types = shapely.get_type_id(geoms)
    if not any(t in (3, 6) for t in types):  # Polygon, MultiPolygon
        kinds = sorted({g.geom_type for g in geoms if g is not None} or {"none"})
        raise InputError(f"zones.path: {path}: has no polygons (geometry: {', '.join(kinds)}); "
                         f"zones must be polygons")
    geoms = [_polygonal(g, zid, path) for g, zid in zip(geoms, ids)]

    src_crs = meta.get("crs")
    if src_crs is None:
        if str(info.get("driver", "")).lower() != "geojson":
            raise InputError(f"zones.path: {path}: has no CRS; assign one in a GIS (e.g. ogr2ogr -a_srs EPSG:xxxx)")
        src_crs = "EPSG:4326"
    dst_crs = CRS.from_user_input(grid.crs.to_wkt())
    zones = Zones(id_field, ids, tuple(geoms), CRS.from_user_input(src_crs), path).to_crs(dst_crs)

    grid_box = shapely.box(*grid.bounds)
    if not shapely.intersects(np.asarray(zones.geometries, dtype=object), grid_box).any():
        raise InputError(f"zones.path: {path}: no zone overlaps the grid ({grid.describe()}); "
                         f"check the file's CRS ({CRS.from_user_input(src_crs).to_string()}) and the grid bounds")
    return zones


def _polygonal(geom, zone_id, path: str):
    """The polygonal part of ``geom``, repaired with shapely.make_valid if needed."""
    if geom is None or geom.is_empty:
        raise InputError(f"zones.path: {path}: zone {zone_id!r} has no geometry; draw its polygon or drop it")
    if geom.geom_type not in _POLYGONAL:
        raise InputError(f"zones.path: {path}: zone {zone_id!r} is a {geom.geom_type}; zones must be polygons")
    if geom.is_valid:
        return geom
    return interruptible(_repair, geom, zone_id, path)


def _repair(geom, zone_id, path: str):
    crossings = self_crossings(geom, limit=MAX_CROSSINGS)
    if crossings > MAX_CROSSINGS:
        raise InputError(f"zones.path: {path}: zone {zone_id!r} has an invalid polygon whose edges cross each other "
                         f"more than {MAX_CROSSINGS:,} times, too tangled to repair here; fix it in a GIS "
                         f"(e.g. 'fix geometries') or check the vertex order")
    fixed = shapely.make_valid(geom)
    parts = [p for p in shapely.get_parts(fixed) if p.geom_type in _POLYGONAL and not p.is_empty]
    fixed = shapely.union_all(parts) if parts else None
    if fixed is None or fixed.is_empty or fixed.area == 0:
        reason = shapely.is_valid_reason(geom)
        raise InputError(f"zones.path: {path}: zone {zone_id!r} has an invalid polygon ({reason}) that cannot be "
                         f"repaired; fix it in a GIS (e.g. 'fix geometries')")
    return fixed


def self_crossings(geom, *, limit: int | None = None) -> int:
    """How many times the edges of polygon ``geom`` cross each other (counting stops past ``limit``).

    Pairs of edges are found with an STR tree, a few edges at a time, so a
    hopelessly tangled polygon is recognised after little work.
    """
    rings = shapely.get_rings(shapely.get_parts(geom))
    segments = []
    for ring in rings:
        xy = shapely.get_coordinates(ring)
        if len(xy) > 1:
            segments.append(np.stack([xy[:-1], xy[1:]], axis=1))
    if not segments:
        return 0
    lines = shapely.linestrings(np.concatenate(segments))
    tree = shapely.STRtree(lines)
    total, start, step = 0, 0, 1
    while start < len(lines):
        a, b = tree.query(lines[start:start + step], predicate="crosses")
        total += int(np.count_nonzero(a + start < b))     # each pair once
        if limit is not None and total > limit:
            break
        start += step
        step = min(step * 2, 4096)
    return total


def interruptible(fn: Callable, *args):
    """``fn(*args)`` in a helper thread; the calling thread waits in short steps, so signals reach it.

    A long C call (GEOS) in the main thread would hold back SIGINT/SIGTERM
    handlers until it returned; waiting here lets them run at once.  If the
    wait is interrupted, the helper (a daemon thread) is abandoned.
    """
    box: dict = {}

    def target():
        try:
            box["value"] = fn(*args)
        except BaseException as exc:   # handed to the caller below
            box["error"] = exc

    t = threading.Thread(target=target, name="radledger-geometry", daemon=True)
    t.start()
    while t.is_alive():
        t.join(0.05)
    if "error" in box:
        raise box["error"]
    return box["value"]
