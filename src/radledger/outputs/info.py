"""``radledger info FILE``: what a product is and where it came from."""

from __future__ import annotations

import os

import rasterio

from ..errors import InputError
from ..io.gdalenv import gdal_env

__all__ = ["describe_product"]

_ORDER = ("quantity", "long_name", "units", "standard_name", "positive", "statistic", "method", "daily_total",
          "time", "time_kind", "window_days", "members", "title", "inputs", "software", "settings_hash", "created")


def describe_product(path: str) -> str:
    if not os.path.exists(path) and not path.startswith(("/vsi", "http")):
        raise InputError(f"{path}: file not found")
    if path.endswith(".nc"):
        return _describe_netcdf(path)
    try:
        with gdal_env(), rasterio.open(path) as ds:
            tags = ds.tags()
            struct = ds.tags(ns="IMAGE_STRUCTURE")
            lines = [f"file:          {path}"]
            for k in _ORDER:
                if tags.get(k):
                    lines.append(f"{k + ':':14s} {tags[k]}")
            epsg = ds.crs.to_epsg() if ds.crs else None
            crs = f"EPSG:{epsg}" if epsg else (ds.crs.to_string() if ds.crs else "none")
            lines += [f"grid:          {crs}, {ds.width} x {ds.height} px at {abs(ds.transform.a):g} x "
                      f"{abs(ds.transform.e):g}, bounds {tuple(round(b, 6) for b in ds.bounds)}",
                      f"storage:       {ds.dtypes[0]}, nodata {ds.nodata}, tiles {ds.block_shapes[0]}, "
                      f"compression {struct.get('COMPRESSION', 'none')}, layout {struct.get('LAYOUT', 'GTiff')}, "
                      f"overviews {ds.overviews(1)}"]
            if tags.get("flag_meanings"):
                pairs = zip(tags["flag_masks"].split(), tags["flag_meanings"].split())
                lines.append("flags:         " + ", ".join(f"{m}={n}" for m, n in pairs))
            if not tags.get("software", "").startswith("radledger"):
                lines.append("note:          not written by radledger (no provenance tags)")
            return "\n".join(lines)
    except rasterio.errors.RasterioIOError as exc:
        raise InputError(f"{path}: cannot open as a raster ({exc}); is it a radledger product?") from None


def _describe_netcdf(path: str) -> str:
    import xarray as xr

    with xr.open_dataset(path, decode_cf=True) as ds:
        lines = [f"file:      {path}", f"title:     {ds.attrs.get('title', '')}",
                 f"source:    {ds.attrs.get('source', '')}"]
        for name, v in ds.data_vars.items():
            if v.ndim >= 3:   # the maps, not time_bnds
                lines.append(f"variable:  {name} {dict(v.sizes)} [{v.attrs.get('units', '')}] "
                             f"{v.attrs.get('standard_name', '')}; cell_methods {v.attrs.get('cell_methods', '')}")
        if "time" in ds:
            lines.append(f"time:      {ds.time.values[0]} .. {ds.time.values[-1]} ({ds.sizes['time']} steps)")
        return "\n".join(lines)
