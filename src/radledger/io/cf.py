"""CF-NetCDF time stacks without xarray: a NetCDF-4 file's header and values through h5netcdf / h5py.

xarray's import brings pandas (~45 MB in every process) and its indexing checks for Dask arrays,
which imports dask.array and SciPy's sparse matrices (~30 MB more); a season run reads its stacks
a window at a time and needs neither.  These helpers read what :mod:`radledger.io.timestacks`
needs from NetCDF-4 (HDF5) files and decode it as CF and xarray's ``mask_and_scale`` do; Zarr
and other formats still go through xarray.
"""

from __future__ import annotations

import threading

import numpy as np

from ..errors import InputError

__all__ = ["H5Header", "open_hdf5", "cf_decoded", "decoded_times", "is_hdf5"]

_local = threading.local()


def is_hdf5(path: str) -> bool:
    if path.lower().rstrip("/").endswith(".zarr"):
        return False
    try:
        import h5py

        return bool(h5py.is_hdf5(path))
    except (OSError, ValueError):
        return False


class _H5Variable:
    """A NetCDF-4 variable seen through h5netcdf, with the few members of xarray's the header uses."""

    def __init__(self, var):
        self._var = var
        self.name = var.name.rsplit("/", 1)[-1]
        self.dims = tuple(var.dimensions)
        self.dtype = var.dtype
        self.attrs = {k: (v.decode("utf-8", "replace") if isinstance(v, bytes) else v) for k, v in var.attrs.items()}
        self.encoding: dict = {}
        self.sizes = dict(zip(self.dims, var.shape))

    @property
    def values(self) -> np.ndarray:
        return np.asarray(self._var[...])


class H5Header:
    """A NetCDF-4 file's header through h5netcdf: what :func:`stack_info` reads, without xarray
    (whose import brings pandas, ~45 MB in every process, and whose indexing brings dask.array)."""

    def __init__(self, path: str):
        import h5netcdf

        self._file = h5netcdf.File(path, "r")
        names = list(self._file.variables)
        self.variables = names
        self.coords = [n for n in names if n in self._file.dimensions]
        self.data_vars = [n for n in names if n not in self.coords]

    def __getitem__(self, name: str) -> _H5Variable:
        return _H5Variable(self._file.variables[name])

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self._file.close()


_TIME_UNITS = {"day": "D", "days": "D", "d": "D", "hour": "h", "hours": "h", "h": "h", "hr": "h", "hrs": "h",
               "minute": "m", "minutes": "m", "min": "m", "mins": "m", "second": "s", "seconds": "s", "s": "s",
               "sec": "s", "secs": "s"}


def _standard_times(values: np.ndarray, units: str, calendar: str) -> np.ndarray | None:
    """CF times of a standard calendar as datetime64[s] (None when the units need xarray's decoder)."""
    if str(calendar).lower() not in ("standard", "gregorian", "proleptic_gregorian"):
        return None
    unit, _, ref = str(units).strip().partition(" since ")
    code = _TIME_UNITS.get(unit.strip().lower())
    ref = ref.strip().replace(" UTC", "").replace("Z", "").rstrip()
    if code is None or not ref:
        return None
    date, _, clock = ref.partition(" ")
    if clock.endswith(("+00:00", "+0000", "+00")):
        clock = clock.rsplit("+", 1)[0]
    try:
        epoch = np.datetime64(f"{date}T{clock}" if clock else date, "s")
    except ValueError:
        return None
    v = np.asarray(values, dtype=np.float64)
    if not np.all(np.isfinite(v)):
        return None
    seconds = v * {"D": 86400.0, "h": 3600.0, "m": 60.0, "s": 1.0}[code]
    return epoch + np.round(seconds).astype("timedelta64[s]")


def decoded_times(coord) -> np.ndarray:
    """A CF time coordinate's values as datetime64 (standard calendars) or cftime dates (others)."""
    values = np.asarray(coord.values)
    units = coord.attrs.get("units")
    if np.issubdtype(values.dtype, np.datetime64) or not units or "since" not in str(units):
        return values
    simple = _standard_times(values, str(units), coord.attrs.get("calendar", "standard"))
    if simple is not None:
        return simple
    from xarray.coding.times import decode_cf_datetime

    try:
        return np.asarray(decode_cf_datetime(values, str(units), coord.attrs.get("calendar", "standard")))
    except (ValueError, TypeError, OverflowError) as exc:
        raise InputError(f"time coordinate {coord.name!r}: cannot decode {units!r} ({exc}); give CF time units "
                         f"such as 'days since 2026-01-01'") from None


def open_hdf5(path: str):
    """The stack as an open h5py file (NetCDF-4 is HDF5; one handle per thread), or None."""
    cache = getattr(_local, "hdf5", None)
    if cache is None:
        cache = _local.hdf5 = {}
    if path not in cache:
        import h5py

        handle = None
        try:
            if is_hdf5(path):
                handle = h5py.File(path, "r")
        except (OSError, ValueError):
            handle = None
        if len(cache) >= 32:
            for k in list(cache)[:16]:
                old = cache.pop(k)
                if old is not None:
                    old.close()
        cache[path] = handle
    return cache[path]


def _attr(attrs, name):
    value = attrs.get(name)
    if isinstance(value, bytes):
        value = value.decode("utf-8", "replace")
    if isinstance(value, np.ndarray) and value.size == 1:
        value = value.reshape(()).item()
    return value


def cf_decoded(stored: np.ndarray, attrs) -> np.ndarray:
    """Stored values decoded as CF (and xarray's ``mask_and_scale``) says, as float64.

    ``_Unsigned`` integers read unsigned; ``_FillValue`` and ``missing_value`` are missing (NaN);
    then ``value = stored * scale_factor + add_offset``.
    """
    if stored.dtype.kind == "i" and str(_attr(attrs, "_Unsigned")).lower() == "true":
        stored = stored.view(stored.dtype.str.replace("i", "u"))
    a = stored.astype(np.float64)
    for name in ("_FillValue", "missing_value"):
        fill = attrs.get(name)
        if fill is None:
            continue
        for f in np.atleast_1d(np.asarray(fill, dtype=np.float64)):
            if not np.isnan(f):
                a[stored == np.asarray(f).astype(stored.dtype)] = np.nan
    scale, offset = _attr(attrs, "scale_factor"), _attr(attrs, "add_offset")
    if scale is not None:
        a *= float(scale)
    if offset is not None:
        a += float(offset)
    return a


