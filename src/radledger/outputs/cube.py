"""The written products of one time kind as one lazy ``xarray.Dataset`` (for notebooks).

:func:`open_products` finds ``DIR/{scenes|days}/{product}_{stamp}.tif``, opens each
file with ``rioxarray.open_rasterio`` (metadata only; pixels are read by the Dask
tasks, one COG-tile-aligned chunk each) and stacks them along ``time``:

* one variable per product, dims ``(time, y, x)``, with CF attributes from the
  product table (``standard_name``, ``long_name``, ``units``, ``cell_methods``) and
  the stored values as they are (float32 with NaN; ``quality`` uint8 with
  ``_FillValue`` 255 and ``flag_masks`` / ``flag_meanings``);
* ``time``: UTC as naive ``datetime64[ns]`` (xarray's convention); a scene's
  overpass time, a day's 00:00 UTC (its start), with a ``date`` coordinate
  (``YYYY-MM-DD`` strings) along ``time`` for days;
* ``x``, ``y`` pixel centres and the grid mapping ``spatial_ref`` written by
  rioxarray (``ds.rio.crs``, ``ds.rio.transform()``).

A product missing on a date of another product is a lazy all-NaN (``quality``:
all-255) slice, so every variable shares the same ``time``.
"""

from __future__ import annotations

import datetime as dt
import os
import re
from pathlib import Path
from typing import Iterable, Mapping

import dask.array as da
import numpy as np
import rioxarray
import xarray as xr

from ..errors import InputError
from ..kinds import TimeKind
from ..model.products import DAY_PRODUCTS, SCENE_PRODUCTS, Product, product_info

__all__ = ["open_products", "product_files", "variable_attrs", "time_coords", "fill_value", "TILE"]

TILE = 512   # chunk edge [pixel]: the COG tile edge, so a chunk reads whole tiles

_STAMP = {TimeKind.SCENES: (r"\d{8}T\d{4}", "%Y%m%dT%H%M"), TimeKind.DAYS: (r"\d{8}", "%Y%m%d")}


def product_files(directory: str | os.PathLike, kind: TimeKind | str) -> dict[str, dict[dt.datetime, Path]]:
    """The finished product files under ``directory/kind``: product -> {UTC time -> path}.

    Names follow ``{product}_{YYYYMMDDTHHMM}.tif`` (scenes) or ``{product}_{YYYYMMDD}.tif``
    (days); files of other products (such as a scene's own daily estimate,
    ``net_radiation_from_scene_{YYYYMMDDTHHMM}.tif``) and hidden temporaries are ignored.  Day times are
    00:00 UTC of the day.  Times are naive datetimes in UTC.  Products come in the order
    of the product table.
    """
    kind = TimeKind(kind)
    pattern, fmt = _STAMP[kind]
    name_re = re.compile(rf"^(?P<product>[a-z][a-z0-9_]*)_(?P<stamp>{pattern})\.tif$")
    found: dict[str, dict[dt.datetime, Path]] = {}
    folder = Path(directory) / kind.value
    if not folder.is_dir():
        return found
    for path in sorted(folder.iterdir()):
        m = name_re.match(path.name)
        if not m:
            continue
        try:
            product_info(m["product"], kind)
        except KeyError:
            continue
        when = dt.datetime.strptime(m["stamp"], fmt)
        found.setdefault(m["product"], {})[when] = path
    order = list(SCENE_PRODUCTS if kind is TimeKind.SCENES else DAY_PRODUCTS)
    return {name: found[name] for name in sorted(found, key=order.index)}


def fill_value(product: Product):
    """The stored no-value of ``product``: NaN (float32) or its declared nodata (uint8 flags)."""
    return np.dtype(product.dtype).type(product.nodata)


def variable_attrs(product: Product, kind: TimeKind | str) -> dict:
    """CF attributes of a product variable (without ``grid_mapping`` / ``_FillValue``)."""
    attrs = {}
    if product.standard_name:
        attrs["standard_name"] = product.standard_name
    attrs["long_name"] = product.long_name
    attrs["units"] = product.units
    if product.positive:
        attrs["comment"] = f"positive = {product.positive}"
    if product.is_flags:
        attrs["flag_masks"] = np.array(list(product.flags.values()), dtype=product.dtype)
        attrs["flag_meanings"] = " ".join(product.flags)
    else:
        attrs["cell_methods"] = "time: point" if TimeKind(kind) is TimeKind.SCENES else "time: mean"
    return attrs


def time_coords(times: Iterable[dt.datetime], kind: TimeKind | str) -> dict[str, xr.Variable]:
    """``time`` (naive UTC datetime64[ns], CF attributes) and, for days, ``date`` along it."""
    times = [t.astimezone(dt.timezone.utc).replace(tzinfo=None) if t.tzinfo else t for t in times]
    values = np.array([np.datetime64(t, "ns") for t in times], dtype="datetime64[ns]")
    coords = {"time": xr.Variable("time", values, {"standard_name": "time", "long_name": "time (UTC)",
                                                   "axis": "T"})}
    if TimeKind(kind) is TimeKind.DAYS:
        coords["time"].attrs["comment"] = "00:00 UTC, the start of the day the product covers"
        coords["date"] = xr.Variable("time", np.array([t.strftime("%Y-%m-%d") for t in times]),
                                     {"long_name": "date (UTC) the daily product covers"})
    return coords


def _open(path: Path, chunks: Mapping[str, int]) -> xr.DataArray:
    try:
        arr = rioxarray.open_rasterio(path, chunks={"band": 1, **chunks}, lock=False, mask_and_scale=False)
    except Exception as exc:  # rasterio's own errors, and a file that is not a raster
        raise InputError(f"{path}: cannot open ({exc}); check that the product was written completely") from None
    return arr.squeeze("band", drop=True)


def _same_grid(a: xr.DataArray, b: xr.DataArray) -> bool:
    return (a.shape == b.shape and a.rio.crs == b.rio.crs
            and a.rio.transform().almost_equals(b.rio.transform(), precision=1e-6 * abs(a.rio.transform().a)))


def open_products(directory: str | os.PathLike, kind: TimeKind | str = "days", *,
                  products: Iterable[str] | None = None, chunks: int | Mapping[str, int] = TILE) -> xr.Dataset:
    """Every written product of ``kind`` under ``directory`` as one lazy Dataset ``(time, y, x)``.

    Parameters
    ----------
    directory : str or path-like
        A run's output directory (``output.directory``).
    kind : {"days", "scenes"}
        The time kind: daily products [MJ m-2 day-1] or instantaneous scenes [W m-2].
    products : iterable of str, optional
        Only these products (default: every product found).
    chunks : int or mapping, optional
        Dask chunk edge [pixel] (default 512, the COG tile), or ``{"y": .., "x": ..}``.

    Returns
    -------
    xarray.Dataset
        Dask-backed; opening reads only file headers.  CRS via ``ds.rio.crs``.

    Raises
    ------
    InputError
        No product of ``kind`` there, an unreadable file, or files on different grids.
    ValueError
        A name in ``products`` that is no product of ``kind``.
    """
    kind = TimeKind(kind)
    chunks = {"y": chunks, "x": chunks} if isinstance(chunks, int) else dict(chunks)
    files = product_files(directory, kind)
    if products is not None:
        wanted = list(dict.fromkeys(products))
        for name in wanted:
            try:
                product_info(name, kind)
            except KeyError as exc:
                raise ValueError(exc.args[0]) from None
        files = {name: files[name] for name in wanted if name in files}
    if not files:
        raise InputError(f"{Path(directory) / kind.value}: no {kind} products found "
                         f"({{product}}_{{stamp}}.tif); run radledger with this output directory first")
    times = sorted({t for by_time in files.values() for t in by_time})
    first = None
    variables = {}
    for name, by_time in files.items():
        info = product_info(name, kind)
        dtype = np.dtype(info.dtype)
        layers = []
        for t in times:
            if t not in by_time:
                layers.append(None)
                continue
            arr = _open(by_time[t], chunks)
            if first is None:
                first = arr
            elif not _same_grid(first, arr):
                raise InputError(f"{by_time[t]}: not on the grid of {first.encoding.get('source')}; "
                                 f"products of one directory must share one grid (rerun with --overwrite)")
            layers.append(arr.data.astype(dtype, copy=False))
        template = next(a for a in layers if a is not None)
        layers = [a if a is not None else da.full(template.shape, fill_value(info), dtype=dtype,
                                                  chunks=template.chunks) for a in layers]
        var = xr.Variable(("time", "y", "x"), da.stack(layers), variable_attrs(info, kind))
        var.encoding["_FillValue"] = fill_value(info)
        variables[name] = var
    ds = xr.Dataset(variables, coords={**time_coords(times, kind), "y": first["y"].values,
                                       "x": first["x"].values})
    ds.attrs = {"Conventions": "CF-1.8", "source": str(Path(directory).resolve()),
                "title": f"radledger {kind} products"}
    return (ds.rio.write_crs(first.rio.crs).rio.write_transform(first.rio.transform())
            .rio.write_coordinate_system())
