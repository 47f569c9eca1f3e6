"""CF-NetCDF stacks: one product over many dates in one file.

The file's structure (dimensions, coordinates, attributes and the empty chunked,
zlib-compressed data variable) is written by xarray with the h5netcdf engine;
the data variable is then filled chunk by chunk: each chunk is read from its
date's GeoTIFF window and compressed in a thread pool on all cores, and written
in order as stored bytes (:mod:`radledger.io.h5chunks`).  Readers see the same
file as if xarray had written the values itself.  At most a few chunks per
core are in memory.

Layout (CF-1.8)
---------------
* data variable named after the product, dims ``(time, y, x)``: float32 with
  ``_FillValue`` = NaN, or uint8 with ``_FillValue`` 255 for integer products
  such as ``quality`` (then ``flag_masks`` / ``flag_meanings`` when given);
* ``time``: int64 "seconds since 1970-01-01", calendar ``standard``,
  UTC; optional ``time_bnds`` (time, nv) named by ``time:bounds``;
* ``x``, ``y``: pixel centres with ``projection_x/y_coordinate`` (or
  ``longitude``/``latitude`` on a geographic grid) and their units;
* ``spatial_ref``: grid mapping from :meth:`pyproj.CRS.to_cf` plus ``crs_wkt``,
  ``spatial_ref`` and ``GeoTransform`` (what GDAL's netCDF driver reads).
"""

from __future__ import annotations

import os
import threading
from datetime import date, datetime, timezone
from pathlib import Path
from typing import Mapping, Sequence

import dask.array as da
import h5py
import numpy as np
import rasterio
import xarray as xr
from pyproj import CRS

from .._version import __version__
from ..grid import TargetGrid
from ..io.atomic import atomic_output
from ..io.h5chunks import write_chunks
from ..io.lazy import product_reader

__all__ = ["write_stack", "read_stack_hash", "TIME_UNITS", "INTEGER_FILL", "COMPRESSION"]

TIME_UNITS = "seconds since 1970-01-01"
INTEGER_FILL = 255  # _FillValue of uint8 stacks (the quality product's nodata)
# zlib level 4 with byte shuffle: most of the size gain of level 9 at a fraction of its time
COMPRESSION = {"zlib": True, "complevel": 4, "shuffle": True}

_UNIT_NAMES = {"metre": "m", "meter": "m", "foot": "ft", "US survey foot": "US_survey_foot", "kilometre": "km"}


def _as_utc_datetime64(value) -> np.datetime64:
    """A date/datetime/np.datetime64/ISO string as naive-UTC datetime64[s]; dates become 00:00 UTC."""
    if isinstance(value, datetime):
        if value.tzinfo is not None:
            value = value.astimezone(timezone.utc).replace(tzinfo=None)
        return np.datetime64(value, "s")
    if isinstance(value, date):
        return np.datetime64(value.isoformat(), "s")
    if isinstance(value, str) and value.endswith("Z"):
        value = value[:-1]
    return np.datetime64(value, "s")


def _xy_coords(grid: TargetGrid) -> dict[str, xr.Variable]:
    t = grid.transform
    x = t.c + t.a * (np.arange(grid.width) + 0.5)
    y = t.f + t.e * (np.arange(grid.height) + 0.5)
    if grid.crs.is_geographic:
        xa = {"standard_name": "longitude", "long_name": "longitude of pixel centre", "units": "degrees_east"}
        ya = {"standard_name": "latitude", "long_name": "latitude of pixel centre", "units": "degrees_north"}
    else:
        axes = CRS.from_user_input(grid.crs.to_wkt()).axis_info
        unit = _UNIT_NAMES.get(axes[0].unit_name, axes[0].unit_name) if axes else "m"
        xa = {"standard_name": "projection_x_coordinate", "long_name": "x of pixel centre", "units": unit}
        ya = {"standard_name": "projection_y_coordinate", "long_name": "y of pixel centre", "units": unit}
    return {"x": xr.Variable("x", x, {**xa, "axis": "X"}), "y": xr.Variable("y", y, {**ya, "axis": "Y"})}


def _grid_mapping(grid: TargetGrid) -> xr.Variable:
    crs = CRS.from_user_input(grid.crs.to_wkt())
    attrs = dict(crs.to_cf())
    attrs["crs_wkt"] = crs.to_wkt()
    attrs["spatial_ref"] = attrs["crs_wkt"]  # GDAL's name for the same WKT
    t = grid.transform
    attrs["GeoTransform"] = " ".join(repr(float(v)) for v in (t.c, t.a, t.b, t.f, t.d, t.e))
    return xr.Variable((), np.int32(0), attrs)


def write_stack(paths: Sequence[str | os.PathLike], times: Sequence, out_path: str | os.PathLike, *,
                grid: TargetGrid, product, cell_methods: str, time_bounds: Sequence[tuple] | None = None,
                attrs: Mapping[str, object] | None = None, flags: Mapping[str, int] | None = None) -> Path:
    """Stack per-date product GeoTIFFs into one CF-NetCDF file (atomic write).

    Parameters
    ----------
    paths : sequence of str or path-like
        One GeoTIFF per date, all on ``grid`` [product units].
    times : sequence of datetime, date, numpy.datetime64 or ISO string
        The time of each path [UTC]; aware datetimes are converted to UTC, dates
        become 00:00 UTC.  Stored sorted by time; times must be distinct.
    out_path : str or path-like
        The ``.nc`` file to write; its folder must exist.
    grid : TargetGrid
        The products' grid.
    product : Product-like
        Has ``name`` (the variable name), ``long_name``, ``units`` (udunits) and
        ``standard_name`` (CF standard name or None); ``dtype`` (default float32).
    cell_methods : str
        CF cell_methods of the values, e.g. ``"time: point"`` for scenes or
        ``"time: mean"`` for daily means.
    time_bounds : sequence of (start, end), optional
        Bounds of each time's cell (same kinds as ``times``), e.g. a day's
        00:00 to the next 00:00; written as ``time_bnds``.
    attrs : mapping, optional
        Extra global attributes (``title`` overrides the default, the product's long name).
    flags : mapping of str to int, optional
        Bit meanings of an integer product (written as ``flag_masks``/``flag_meanings``).

    Returns
    -------
    pathlib.Path
        ``out_path``.
    """
    ds, encoding, readers = stack_layout(paths, times, grid=grid, product=product, cell_methods=cell_methods,
                                         time_bounds=time_bounds, attrs=attrs, flags=flags)
    out_path = Path(out_path)
    with atomic_output(out_path) as tmp:
        _write_layout(ds, tmp, encoding)
        _fill(tmp, product.name, readers, grid)
    return out_path


def stack_layout(paths, times, *, grid: TargetGrid, product, cell_methods: str, time_bounds=None, attrs=None,
                 flags=None) -> tuple[xr.Dataset, dict, list]:
    """What :func:`write_stack` writes, before any value: ``(dataset, encoding, readers)``.

    The dataset's data variable is a stand-in Dask array that is never computed; ``encoding`` is
    the ``to_netcdf`` encoding of every variable; ``readers`` are the files' window readers
    (:func:`radledger.io.lazy.product_reader`) in time order.  Same parameters and checks as
    :func:`write_stack`.
    """
    if len(paths) == 0:
        raise ValueError("write_stack needs at least one product file")
    if len(paths) != len(times):
        raise ValueError(f"{len(paths)} paths but {len(times)} times")
    if time_bounds is not None and len(time_bounds) != len(times):
        raise ValueError(f"{len(times)} times but {len(time_bounds)} time bounds")
    stamps = np.array([_as_utc_datetime64(t) for t in times], dtype="datetime64[s]")
    if len(np.unique(stamps)) != len(stamps):
        raise ValueError("write_stack: times must be distinct")
    order = np.argsort(stamps, kind="stable")
    dtype = np.dtype(getattr(product, "dtype", "float32") or "float32")
    readers = [product_reader(paths[i], grid, dtype=dtype) for i in order]
    chunks = (1, min(grid.chunk, grid.height), min(grid.chunk, grid.width))
    # a stand-in for the values, never computed: xarray lays the variable out, write_chunks fills it
    data = da.empty((len(readers),) + grid.shape, dtype=dtype, chunks=chunks)

    var_attrs = {"long_name": product.long_name, "units": product.units, "cell_methods": cell_methods,
                 "grid_mapping": "spatial_ref"}
    if getattr(product, "standard_name", None):
        var_attrs = {"standard_name": product.standard_name, **var_attrs}
    if flags:
        var_attrs["flag_masks"] = np.array(list(flags.values()), dtype=dtype)
        var_attrs["flag_meanings"] = " ".join(flags)
    fill = np.float32(np.nan) if dtype.kind == "f" else dtype.type(INTEGER_FILL)

    time_attrs = {"standard_name": "time", "long_name": "time (UTC)", "axis": "T"}
    time_encoding = {"units": TIME_UNITS, "calendar": "standard", "dtype": "int64"}
    variables = {product.name: xr.Variable(("time", "y", "x"), data, var_attrs), "spatial_ref": _grid_mapping(grid)}
    encoding = {product.name: {"dtype": dtype, "_FillValue": fill, **COMPRESSION, "chunksizes": chunks},
                "time": dict(time_encoding), "x": {"_FillValue": None}, "y": {"_FillValue": None}}
    if time_bounds is not None:
        bnds = np.array([[_as_utc_datetime64(a), _as_utc_datetime64(b)] for a, b in time_bounds],
                        dtype="datetime64[s]")[order]
        if (bnds[:, 1] < bnds[:, 0]).any():
            raise ValueError("write_stack: every time bound must end at or after its start")
        variables["time_bnds"] = xr.Variable(("time", "nv"), bnds.astype("datetime64[ns]"))
        time_attrs["bounds"] = "time_bnds"
        encoding["time_bnds"] = {**time_encoding, "_FillValue": None}
    coords = {"time": xr.Variable("time", stamps[order].astype("datetime64[ns]"), time_attrs), **_xy_coords(grid)}

    now = datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
    global_attrs = {"title": product.long_name, "source": f"radledger {__version__}",
                    "history": f"{now} radledger {__version__}: stacked {len(paths)} {product.name} products",
                    **dict(attrs or {}), "Conventions": "CF-1.8"}
    return xr.Dataset(variables, coords=coords, attrs=global_attrs), encoding, readers


def _write_layout(ds: xr.Dataset, path: Path, encoding: dict) -> None:
    """Everything of ``ds`` but its Dask-backed values: what ``to_netcdf(engine="h5netcdf")`` writes
    before it computes them (the same store, encoding and checks; no chunk of them stored)."""
    store = xr.backends.H5NetCDFStore.open(str(path), mode="w", format="NETCDF4")
    try:
        ds.dump_to_store(store, encoding=encoding)  # Dask-backed values are only queued, never run
    finally:
        store.close()


class _OpenFiles:
    """The file each worker thread read last, kept open for its next window (a grid chunk is often
    smaller than a GeoTIFF's tiles); all are closed by :meth:`close`, after the workers stopped."""

    def __init__(self):
        self._local = threading.local()
        self._open: list = []
        self._lock = threading.Lock()

    def read(self, reader, window) -> np.ndarray:
        src = getattr(self._local, "src", None)
        if src is None or self._local.path != reader.path:
            if src is not None:
                with self._lock:
                    self._open.remove(src)
                src.close()
                self._local.src = None
            src = rasterio.open(reader.path)
            with self._lock:
                self._open.append(src)
            self._local.src, self._local.path = src, reader.path
        return reader.read(src, window)

    def close(self) -> None:
        with self._lock:
            for src in self._open:
                src.close()
            self._open.clear()


def _fill(path: Path, name: str, readers: list, grid: TargetGrid) -> None:
    """Write every chunk of the (time, y, x) variable ``name``: date after date, row-major windows."""
    files = _OpenFiles()

    def jobs():
        for t, reader in enumerate(readers):
            for w in grid.windows():
                yield (t, w.row_off, w.col_off), lambda r=reader, w=w: files.read(r, w)

    try:
        with h5py.File(path, "r+") as f:
            write_chunks(f[name], jobs())
    finally:
        files.close()


def read_stack_hash(path: str | os.PathLike) -> str | None:
    """The ``settings_hash`` global attribute of a stack (None when absent or the file unreadable)."""
    try:
        with h5py.File(path, "r") as f:
            value = f.attrs.get("settings_hash")
    except (OSError, ValueError):
        return None
    if isinstance(value, bytes):
        value = value.decode("utf-8", "replace")
    return value if isinstance(value, str) else None
