"""Validation of the config's sections: layers, static, grid, emissivity, methods, zones, output."""

from __future__ import annotations

import os
from pathlib import Path

from ..io.cog import COMPRESSIONS
from ..io.objectstore import default_staging, is_store_url, store_root
from ..io.paths import is_remote
from ..model.layers import ALL_LAYERS, LAYERS
from ..model.needs import terrain_reason
from ..model.products import ALL_PRODUCT_NAMES, DEFAULT_PRODUCTS
from ..physics.longwave import CLOUD_MODELS, SKY_EMISSIVITY_MODELS
from ..units import canonical_unit
from .schema import (CLEAR_SKY_MODELS, DIFFUSE_FRACTION_MODELS, RESAMPLING, SCENE_TO_DAY, TERRAIN_METHODS,
                     EmissivitySpec, GridSpec, LayerDecoding, Methods, OutputSpec, ZONE_WEIGHTING, ZonesSpec,
                     keys_of)

__all__ = ["layers", "grid", "emissivity", "methods", "zones", "output"]


def layers(v, value) -> dict[str, LayerDecoding]:
    value = v.mapping(value, "layers", ALL_LAYERS)
    out = {}
    for name, spec in value.items():
        if name not in ALL_LAYERS:
            continue
        key = f"layers.{name}"
        spec = v.mapping(spec, key, keys_of(LayerDecoding))
        units = spec.get("units")
        if units is not None:
            canon = canonical_unit(str(units))
            valid = LAYERS[name].units
            if canon not in valid:
                v.fail(f"{key}.units", f"unknown units {units!r} for {name}; valid: {', '.join(valid)}")
                canon = None
            units = canon
        out[name] = LayerDecoding(
            units=units,
            scale=v.number(spec.get("scale"), f"{key}.scale"),
            offset=v.number(spec.get("offset"), f"{key}.offset"),
            nodata=v.number(spec.get("nodata"), f"{key}.nodata"),
        )
        if out[name].scale == 0:
            v.fail(f"{key}.scale", "must not be 0")
    return out


def grid(v, value, static) -> GridSpec:
    value = v.mapping(value, "grid", keys_of(GridSpec))
    like = value.get("like")
    crs, res, bounds = value.get("crs"), value.get("resolution"), value.get("bounds")
    if like is not None:
        if not isinstance(like, str):
            v.fail("grid.like", "must be a layer name")
            like = None
        elif like not in static and like not in ALL_LAYERS:
            v.fail("grid.like", f"{like!r} is not a layer name; use one of the static layers "
                                   f"({', '.join(static) or 'none given'})")
            like = None
        elif like not in static:
            v.fail("grid.like", f"layer {like!r} must be given under static: to define the grid")
            like = None
        if crs or res or bounds:
            v.fail("grid", "give either like: or crs/resolution/bounds, not both")
    elif crs is None and res is None and bounds is None:
        if "land_cover" in static:
            like = "land_cover"   # documented default: the land-cover grid
        else:
            v.fail("grid", "give like: <static layer> or crs, resolution and bounds")
    else:
        for k, given in (("crs", crs), ("resolution", res), ("bounds", bounds)):
            if given is None:
                v.fail(f"grid.{k}", "missing; crs, resolution and bounds go together")
        if crs is not None:
            try:
                from pyproj import CRS
                CRS.from_user_input(crs)
                crs = str(crs)
            except Exception:
                v.fail("grid.crs", f"{crs!r} is not a CRS pyproj knows; write e.g. EPSG:32611")
                crs = None
        if res is not None:
            if isinstance(res, (list, tuple)) and len(res) == 2:
                rx = v.number(res[0], "grid.resolution[0]", positive=True)
                ry = v.number(res[1], "grid.resolution[1]", positive=True)
                res = (rx, ry) if rx and ry else None
            else:
                r = v.number(res, "grid.resolution", positive=True)
                res = (r, r) if r else None
        if bounds is not None:
            if not (isinstance(bounds, (list, tuple)) and len(bounds) == 4):
                v.fail("grid.bounds", "must be [xmin, ymin, xmax, ymax]")
                bounds = None
            else:
                b = [v.number(x, f"grid.bounds[{i}]") for i, x in enumerate(bounds)]
                if None in b:
                    bounds = None
                elif b[2] <= b[0] or b[3] <= b[1]:
                    v.fail("grid.bounds", f"{bounds} must be [xmin, ymin, xmax, ymax] with "
                                             f"xmin < xmax and ymin < ymax")
                    bounds = None
                else:
                    bounds = tuple(b)
    chunk = v.number(value.get("chunk"), "grid.chunk", positive=True, integer=True,
                        default=GridSpec.chunk)
    if chunk and chunk % 16:
        v.fail("grid.chunk", f"{chunk} must be a multiple of 16 (GeoTIFF tiles); 512 or 1024 suit most")
    return GridSpec(like=like, crs=crs, resolution=res, bounds=bounds,
                    resampling=v.choice(value.get("resampling"), "grid.resampling", RESAMPLING,
                                           GridSpec.resampling),
                    chunk=chunk or GridSpec.chunk)


def emissivity(v, value) -> EmissivitySpec:
    value = v.mapping(value, "emissivity", keys_of(EmissivitySpec))
    table = v.resolve(value.get("table"), "emissivity.table")
    constant = v.number(value.get("constant"), "emissivity.constant")
    if constant is not None and not 0 < constant <= 1:
        v.fail("emissivity.constant", f"{constant} must be in (0, 1]")
    if constant is not None and table is not None:
        v.fail("emissivity", "give table or constant, not both")
    unknown = value.get("unknown", EmissivitySpec.unknown)
    if unknown != "error":
        u = v.number(unknown, "emissivity.unknown")
        if u is not None and not 0 < u <= 1:
            v.fail("emissivity.unknown", f"{u} must be 'error' or an emissivity in (0, 1]")
        unknown = u if u is not None else "error"
    return EmissivitySpec(table=table, unknown=unknown, constant=constant)


def methods(v, value) -> Methods:
    value = v.mapping(value, "methods", keys_of(Methods))
    terrain = v.choice(value.get("terrain"), "methods.terrain", TERRAIN_METHODS, Methods.terrain)
    # the static terrain layers come from the one DEM under static: (model/needs.py says why)
    static = v.raw.get("static") if isinstance(v.raw, dict) else None
    if terrain_reason(terrain) and not (isinstance(static, dict) and "elevation" in static):
        v.fail("static.elevation", f"needed for {terrain_reason(terrain)}; give a DEM")
    return Methods(
        sky_emissivity=v.choice(value.get("sky_emissivity"), "methods.sky_emissivity",
                                   SKY_EMISSIVITY_MODELS, Methods.sky_emissivity),
        clouds=v.choice(value.get("clouds"), "methods.clouds", CLOUD_MODELS, Methods.clouds),
        clear_sky_shortwave=v.choice(value.get("clear_sky_shortwave"), "methods.clear_sky_shortwave",
                                        CLEAR_SKY_MODELS, Methods.clear_sky_shortwave),
        scene_to_day=v.choice(value.get("scene_to_day"), "methods.scene_to_day", SCENE_TO_DAY,
                                 Methods.scene_to_day),
        terrain=terrain,
        diffuse_fraction=v.choice(value.get("diffuse_fraction"), "methods.diffuse_fraction",
                                  DIFFUSE_FRACTION_MODELS, Methods.diffuse_fraction),
    )


def zones(v, value) -> ZonesSpec | None:
    if value is None:
        return None
    value = v.mapping(value, "zones", keys_of(ZonesSpec))
    path = v.resolve(value.get("path"), "zones.path")
    zid = value.get("id")
    if path is None:
        v.fail("zones.path", "missing; give a GeoJSON or GeoPackage of polygons")
    if not isinstance(zid, str) or not zid:
        v.fail("zones.id", "missing; name the attribute that identifies each zone")
    weighting = v.choice(value.get("weighting"), "zones.weighting", ZONE_WEIGHTING, ZonesSpec.weighting)
    return ZonesSpec(path=path, id=zid, weighting=weighting) if path and isinstance(zid, str) else None


def output(v, value) -> OutputSpec:
    value = v.mapping(value, "output", keys_of(OutputSpec, exclude=("store",)))
    directory = value.get("directory", str(OutputSpec.directory))
    store = None
    if v.output_override is not None:
        directory = str(v.output_override)
    elif not isinstance(directory, str) or not directory.strip():
        v.fail("output.directory", "must be a folder path")
        directory = str(OutputSpec.directory)
    directory = directory.strip()
    if is_store_url(directory):
        store = directory if directory.startswith("s3://") else "s3://" + directory[len("/vsis3/"):]
        if not store_root(store)[len("/vsis3/"):]:
            v.fail("output.directory", f"{directory!r}: name a bucket, e.g. s3://bucket/run")
        d = _staging(v, value.get("staging"), store)
    elif is_remote(directory) or "://" in directory:
        v.fail("output.directory", f"{directory!r} is not a local folder or an s3:// prefix; write to a local "
                                   f"(or mounted) folder, or to s3://bucket/prefix")
        d = v.base / str(OutputSpec.directory)
    else:
        if value.get("staging") is not None:
            v.fail("output.staging", "only for an s3:// output.directory; remove it")
        d = Path(os.path.expanduser(directory))
        # a folder the user gives on the command line (--out) is relative to the current folder
        d = d if d.is_absolute() else (Path.cwd() if v.output_override is not None else v.base) / d
    products = value.get("products", list(OutputSpec.products))
    if isinstance(products, str):
        products = [products]
    valid = ALL_PRODUCT_NAMES
    if not isinstance(products, list) or not products:
        v.fail("output.products", f"must be a list of: {', '.join(valid)}")
        products = list(DEFAULT_PRODUCTS)
    products = [v.choice(p, "output.products", valid, None) for p in products]
    products = tuple(dict.fromkeys(p for p in products if p))
    return OutputSpec(
        directory=d,
        products=products,
        compression=v.choice(value.get("compression"), "output.compression", COMPRESSIONS,
                                OutputSpec.compression),
        netcdf=_netcdf_products(v, value.get("netcdf"), products),
        quicklooks=v.boolean(value.get("quicklooks"), "output.quicklooks", OutputSpec.quicklooks),
        zarr=v.boolean(value.get("zarr"), "output.zarr", OutputSpec.zarr),
        stac=v.boolean(value.get("stac"), "output.stac", OutputSpec.stac),
        staging=d if store else None,
        store=store,
    )


def _staging(v, value, store: str) -> Path:
    """The local folder a run on an object store writes into first (``output.staging``)."""
    if value is None:
        return default_staging(v.base, store)
    if not isinstance(value, str) or not value.strip() or "://" in value or value.strip().startswith("/vsi"):
        v.fail("output.staging", "must be a local folder path")
        return default_staging(v.base, store)
    d = Path(os.path.expanduser(value.strip()))
    return d if d.is_absolute() else v.base / d


def _netcdf_products(v, value, products: tuple[str, ...]) -> tuple[str, ...]:
    """``output.netcdf``: false (none), true (every product written) or a list of them."""
    if value is None or isinstance(value, bool):
        return products if value else ()
    names = [value] if isinstance(value, str) else value
    if not isinstance(names, list) or not all(isinstance(n, str) for n in names):
        v.fail("output.netcdf", "must be true, false or a list of products from output.products")
        return ()
    unknown = [n for n in names if n not in products]
    if unknown:
        v.fail("output.netcdf", f"{', '.join(map(repr, unknown))} not in output.products "
                                f"({', '.join(products)}); list products that are written")
        return ()
    return tuple(dict.fromkeys(names))
