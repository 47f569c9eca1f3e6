"""A STAC catalog of the written products: one collection, one item per date.

Built with pystac and saved self-contained (every link and asset href relative), so
the ``stac/`` folder can move with the products.  Layout::

    stac/catalog.json                           the root catalog
    stac/radledger/collection.json              one collection
    stac/radledger/{item id}/{item id}.json     one item per scene time or day

Items are named ``scene-YYYYMMDDTHHMM`` (``datetime`` = the overpass, UTC) and
``day-YYYYMMDD`` (``datetime`` = 00:00 UTC, ``start_datetime``/``end_datetime`` the
day).  Each asset is one product COG with its CF ``units`` in ``raster:bands`` (a
scene's own daily estimate, ``net_radiation_from_scene``, is an asset of its scene); the
projection extension (``proj:code`` when the CRS has an EPSG code, always
``proj:wkt2``; ``proj:shape``, ``proj:transform``, ``proj:bbox`` in the grid CRS) sits
in the item's properties, as every asset shares the grid.  Roles: ``data`` for the
radiation products, ``metadata`` + ``quality`` for the quality bit flags.
"""

from __future__ import annotations

import datetime as dt
import os
import shutil
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Mapping, Sequence

import numpy as np
import pystac
import shapely
from pyproj import CRS, Transformer
from pystac.extensions.projection import ProjectionExtension
from pystac.extensions.raster import DataType, NoDataStrings, RasterBand, RasterExtension

from .._version import __version__
from ..errors import OutputError
from ..grid import TargetGrid
from ..kinds import TimeKind
from ..model.products import SCENE_DAY_PRODUCT, product_info

__all__ = ["DatedProducts", "write_catalog", "COLLECTION_ID"]

COLLECTION_ID = "radledger"


@dataclass(frozen=True)
class DatedProducts:
    """The product files of one scene time or day."""
    kind: TimeKind
    when: dt.datetime | dt.date      # a scene's UTC time (aware or naive UTC), or a day
    paths: Mapping[str, Path]        # product name -> COG


def _utc(when) -> dt.datetime:
    if isinstance(when, dt.datetime):
        return when.astimezone(dt.timezone.utc) if when.tzinfo else when.replace(tzinfo=dt.timezone.utc)
    return dt.datetime(when.year, when.month, when.day, tzinfo=dt.timezone.utc)


def _footprint(grid: TargetGrid) -> tuple[dict, list[float]]:
    """The grid's outline in lon/lat (edges densified, 4 segments a side) and its lon/lat bbox."""
    outline = shapely.segmentize(shapely.box(*grid.bounds), max(grid.bounds[2] - grid.bounds[0],
                                                               grid.bounds[3] - grid.bounds[1]) / 4)
    to_lonlat = Transformer.from_crs(CRS.from_user_input(grid.crs.to_wkt()), "EPSG:4326", always_xy=True)
    lonlat = shapely.transform(outline, lambda xy: np.column_stack(to_lonlat.transform(xy[:, 0], xy[:, 1])))
    return shapely.geometry.mapping(lonlat), [float(v) for v in lonlat.bounds]


def _add_asset(item: pystac.Item, name: str, kind: TimeKind, path: Path, resolution: float) -> None:
    if name == SCENE_DAY_PRODUCT:   # a scene's own daily estimate: a day product on the scene's item
        info = product_info("net_radiation", TimeKind.DAYS)
    else:
        info = product_info(name, kind)
    if info.is_flags:
        roles = ["metadata", "quality"]
        bits = ", ".join(f"{v} {k}" for k, v in info.flags.items())
        description = f"uint8 bit flags ({bits}); {int(info.nodata)} = no data"
        band = RasterBand.create(data_type=DataType.UINT8, nodata=int(info.nodata), unit=info.units,
                                 spatial_resolution=resolution)
    else:
        roles = ["data"]
        description = (f"CF standard_name {info.standard_name}; " if info.standard_name else "") + \
                      f"units {info.units}" + (f"; positive = {info.positive}" if info.positive else "")
        band = RasterBand.create(data_type=DataType.FLOAT32, nodata=NoDataStrings.NAN, unit=info.units,
                                 spatial_resolution=resolution)
    asset = pystac.Asset(href=str(Path(path).resolve()), title=info.long_name, description=description,
                         media_type=pystac.MediaType.COG, roles=roles)
    item.add_asset(name, asset)
    RasterExtension.ext(asset, add_if_missing=True).apply(bands=[band])


def _item(dated: DatedProducts, grid: TargetGrid, geometry: dict, bbox: list[float]) -> pystac.Item:
    kind = TimeKind(dated.kind)
    start = _utc(dated.when)
    if kind is TimeKind.SCENES:
        item_id, extra = f"scene-{start:%Y%m%dT%H%M}", {}
        title = f"scene {start:%Y-%m-%d %H:%M} UTC"
    else:
        item_id, title = f"day-{start:%Y%m%d}", f"day {start:%Y-%m-%d} (UTC)"
        extra = {"start_datetime": pystac.utils.datetime_to_str(start),
                 "end_datetime": pystac.utils.datetime_to_str(start + dt.timedelta(days=1))}
    item = pystac.Item(id=item_id, geometry=geometry, bbox=bbox, datetime=start,
                       properties={"title": title, **extra})
    crs = CRS.from_user_input(grid.crs.to_wkt())
    epsg = crs.to_epsg()
    proj = ProjectionExtension.ext(item, add_if_missing=True)
    proj.apply(code=f"EPSG:{epsg}" if epsg else None, wkt2=crs.to_wkt(), shape=[grid.height, grid.width],
               transform=[float(v) for v in list(grid.transform)[:6]], bbox=[float(v) for v in grid.bounds])
    resolution = float(grid.resolution[0])
    for name, path in dated.paths.items():
        _add_asset(item, name, kind, path, resolution)
    return item


def write_catalog(directory: str | os.PathLike, grid: TargetGrid, dated: Sequence[DatedProducts], *,
                  title: str = "", description: str = "") -> Path:
    """Write ``directory/stac/catalog.json`` for the products in ``dated``; return its path.

    Parameters
    ----------
    directory : str or path-like
        The output directory; the products must lie under it (hrefs are relative).
    grid : TargetGrid
        The products' grid.
    dated : sequence of DatedProducts
        One entry per scene time or day; entries without a path are left out.
    title, description : str, optional
        The collection's title and description (the config's title).

    The new catalog is written beside the old one (``.stac-*``) and renamed into place, so
    ``stac/`` never holds a half-written catalog.  Needs pystac >= 1.12 (projection v2).
    """
    directory = Path(directory).resolve()
    dated = [d for d in dated if d.paths]
    if not dated:
        raise ValueError("a STAC catalog needs at least one dated product")
    geometry, bbox = _footprint(grid)
    items = [_item(d, grid, geometry, bbox) for d in dated]
    starts = [_utc(d.when) for d in dated]
    ends = [t + dt.timedelta(days=1) if TimeKind(d.kind) is TimeKind.DAYS else t for d, t in zip(dated, starts)]
    collection = pystac.Collection(
        id=COLLECTION_ID, title=title or "radledger products",
        description=description or f"Surface net radiation products written by radledger {__version__}",
        extent=pystac.Extent(pystac.SpatialExtent([bbox]), pystac.TemporalExtent([[min(starts), max(ends)]])),
        license="other")
    collection.add_items(items)
    catalog = pystac.Catalog(id="radledger-outputs", title=title or "radledger outputs",
                             description=f"Products of one radledger run (radledger {__version__})")
    catalog.add_child(collection)

    final = directory / "stac"
    for stale in directory.glob(".stac-*"):   # left by a run that was killed while writing
        shutil.rmtree(stale, ignore_errors=True)
    try:
        staging = Path(tempfile.mkdtemp(prefix=".stac-", dir=directory))   # same depth: same relative hrefs
    except OSError as exc:
        raise OutputError(f"{directory}: cannot write the STAC catalog there ({exc.strerror}); check that "
                          f"the output directory is writable") from None
    try:
        catalog.normalize_hrefs(str(staging))
        catalog.make_all_asset_hrefs_relative()
        catalog.save(catalog_type=pystac.CatalogType.SELF_CONTAINED)
        old = directory / f".stac-old-{os.getpid()}"
        if final.exists():
            final.rename(old)
        staging.rename(final)
        shutil.rmtree(old, ignore_errors=True)
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    return final / "catalog.json"
