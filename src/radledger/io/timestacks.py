"""Time stacks: one NetCDF or Zarr variable (time, y, x) holding many dates, read one window at a time.

Opened with xarray (CF decoding: ``scale_factor``, ``add_offset``, ``_FillValue`` /
``missing_value``, times) and pyproj (the CRS from a CF ``grid_mapping``; lon/lat coordinates mean
WGS 84).  A :class:`StackSource` is a small picklable description of the step or steps one date
needs; :meth:`StackSource.read` opens the file inside the task, cuts the slab of the source grid
that covers the window (plus a margin for the resampling kernel), reads only those steps of it and
warps the slab onto the window with GDAL.  A 365-step stack is never loaded whole.
"""

from __future__ import annotations

import datetime as dt
import math
import threading
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from affine import Affine
from rasterio.crs import CRS
from rasterio.enums import Resampling
from rasterio.warp import reproject, transform_bounds
from rasterio.windows import Window

from ..errors import InputError
from ..grid import TargetGrid
from .cf import H5Header, cf_decoded, decoded_times, is_hdf5, open_hdf5
from .memo import ReadMemo
from .resample import FAST_RESAMPLING, warp_for

__all__ = ["StackInfo", "StackSource", "stack_info", "is_stack_path"]

_MARGIN = 3   # source pixels around the window: enough for cubic / lanczos kernels


def is_stack_path(path: str) -> bool:
    return path.lower().rstrip("/").endswith((".nc", ".nc4", ".cdf", ".h5", ".hdf5", ".zarr"))


def _engines(path: str) -> tuple:
    """xarray engines to try: Zarr; for NetCDF h5netcdf first (NetCDF-4/HDF5, a dependency), then
    whatever xarray finds for other formats (classic NetCDF-3).  The backends are given as classes:
    naming them makes xarray load every installed package's backend plugin first."""
    if path.lower().rstrip("/").endswith(".zarr"):
        from xarray.backends.zarr import ZarrBackendEntrypoint
        return (ZarrBackendEntrypoint,)
    from xarray.backends.h5netcdf_ import H5netcdfBackendEntrypoint
    return (H5netcdfBackendEntrypoint, None)


def _open(path: str, *, mask_and_scale: bool, decode_times: bool):
    import xarray as xr

    try:
        for engine in _engines(path):
            try:
                return xr.open_dataset(path, engine=engine, mask_and_scale=mask_and_scale,
                                       decode_times=decode_times, cache=False)
            except (OSError, ValueError) as exc:
                if engine is None or isinstance(exc, FileNotFoundError):
                    raise
        raise OSError(f"no engine can read {path}")
    except FileNotFoundError:
        raise InputError(f"{path}: file not found; check the path in the config") from None
    except Exception as exc:   # xarray raises many kinds for a file it cannot read
        raise InputError(f"{path}: cannot open as a NetCDF/Zarr time stack ({exc.__class__.__name__}: "
                         f"{' '.join(str(exc).split())[:160]})") from None


@dataclass(frozen=True, eq=False)   # one object per stack (stack_info is cached): identity is equality
class StackInfo:
    """What a stack's header says: its times, units, CRS, grid and CF packing."""
    path: str
    variable: str
    times: tuple[dt.datetime, ...]       # UTC
    units: str
    crs: CRS
    transform: Affine                    # of the (y, x) grid as stored (may be south-up)
    shape: tuple[int, int]               # (height, width)
    packed: bool                         # CF scale_factor / add_offset present

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        t, (h, w) = self.transform, self.shape
        xs, ys = (t.c, t.c + t.a * w), (t.f, t.f + t.e * h)
        return min(xs), min(ys), max(xs), max(ys)


def _utc(value) -> dt.datetime:
    if isinstance(value, np.datetime64):
        value = value.astype("datetime64[us]").astype(dt.datetime)
    elif not isinstance(value, dt.datetime):      # cftime
        value = dt.datetime(value.year, value.month, value.day, value.hour, value.minute, value.second)
    return value.replace(tzinfo=dt.timezone.utc) if value.tzinfo is None else value.astimezone(dt.timezone.utc)


def _header(path: str):
    """The stack's header: h5netcdf for NetCDF-4 files, xarray (undecoded) for Zarr and others."""
    if is_hdf5(path):
        return H5Header(path)
    return _open(path, mask_and_scale=False, decode_times=False)


def _is_lonlat(ds, xdim: str, ydim: str) -> bool:
    names = {str(xdim).lower(), str(ydim).lower()}
    if names & {"lon", "longitude"} and names & {"lat", "latitude"}:
        return True
    for dim in (xdim, ydim):
        attrs = ds[dim].attrs
        if attrs.get("standard_name") in ("longitude", "latitude") or \
                str(attrs.get("units", "")).startswith(("degrees_east", "degrees_north", "degree_E", "degree_N")):
            return True
    return False


@lru_cache(maxsize=256)
def stack_info(path: str, variable: str) -> StackInfo:
    """The header of ``variable`` in the stack at ``path`` (cached per process)."""
    ds = _header(path)
    with ds:
        if variable not in ds.data_vars:
            names = ", ".join(str(n) for n in ds.data_vars) or "none"
            raise InputError(f"{path}: has no variable {variable!r}; its variables: {names}")
        da = ds[variable]
        time_dims = [d for d in da.dims if d == "time" or np.issubdtype(ds[d].dtype, np.datetime64)
                     or d in ds.coords and "since" in str(ds[d].attrs.get("units", ""))]
        if "time" not in ds.coords and not time_dims:
            raise InputError(f"{path}: variable {variable} has no time axis (dims {', '.join(da.dims)}); a time "
                             f"stack needs a CF time coordinate")
        tdim = "time" if "time" in da.dims else time_dims[0]
        if len(da.dims) != 3 or da.dims[0] != tdim:
            extra = [d for d in da.dims if d != tdim][:-2]
            raise InputError(f"{path}: variable {variable} has dimensions {', '.join(da.dims)}; give a "
                             f"(time, y, x) variable" + (f" (extra: {', '.join(extra)})" if extra else ""))
        ydim, xdim = da.dims[1], da.dims[2]
        try:
            transform = _regular_transform(ds[xdim].values, ds[ydim].values)
        except (KeyError, ValueError) as exc:
            raise InputError(f"{path}: variable {variable}: cannot find its x/y grid ({exc}); it needs regular 1-D "
                             f"x/y or lon/lat coordinates") from None
        crs = _cf_crs(ds, da)
        if crs is None:
            if not _is_lonlat(ds, xdim, ydim):
                raise InputError(f"{path}: variable {variable} has no grid_mapping and no lon/lat coordinates; "
                                 f"add a CF grid_mapping so its CRS is known")
            crs = CRS.from_epsg(4326)
        times = tuple(_utc(t) for t in decoded_times(ds[tdim]))
        enc = {**da.attrs, **da.encoding}
        return StackInfo(path=path, variable=variable, times=times, units=str(da.attrs.get("units", "")),
                         crs=crs, transform=transform, shape=(int(da.sizes[ydim]), int(da.sizes[xdim])),
                         packed="scale_factor" in enc or "add_offset" in enc)


def _regular_transform(x: np.ndarray, y: np.ndarray) -> Affine:
    """The affine transform of pixel-centre coordinates on a regular grid (either axis may decrease)."""
    x, y = np.asarray(x, float), np.asarray(y, float)
    if x.ndim != 1 or y.ndim != 1 or x.size < 2 or y.size < 2:
        raise ValueError("x and y must be 1-D with at least two values")
    dx, dy = (x[-1] - x[0]) / (x.size - 1), (y[-1] - y[0]) / (y.size - 1)
    if not (np.allclose(np.diff(x), dx, rtol=1e-4, atol=0) and np.allclose(np.diff(y), dy, rtol=1e-4, atol=0)):
        raise ValueError("the coordinates are not evenly spaced")
    return Affine(dx, 0.0, x[0] - dx / 2, 0.0, dy, y[0] - dy / 2)


def _cf_crs(ds, da) -> CRS | None:
    """The CRS of a CF grid_mapping (its crs_wkt / spatial_ref, or its CF parameters via pyproj)."""
    name = da.attrs.get("grid_mapping") or da.encoding.get("grid_mapping")
    if not name or str(name).split(":")[0] not in ds.variables:
        return None
    attrs = ds[str(name).split(":")[0]].attrs
    for key in ("crs_wkt", "spatial_ref"):
        if attrs.get(key):
            return CRS.from_wkt(str(attrs[key]))
    from pyproj import CRS as ProjCRS

    try:
        return CRS.from_wkt(ProjCRS.from_cf(dict(attrs)).to_wkt())
    except Exception:
        return None


_local = threading.local()


def _cached(path: str, raw: bool):
    cache = getattr(_local, "stacks", None)
    if cache is None:
        cache = _local.stacks = {}
    key = (path, raw)
    if key not in cache:
        if len(cache) >= 32:
            for k in list(cache)[:16]:
                cache.pop(k).close()
        cache[key] = _open(path, mask_and_scale=not raw, decode_times=False)
    return cache[key]


def _block(path: str, variable: str, raw: bool, steps: list, rows: slice, cols: slice) -> np.ndarray:
    """float64 values of ``variable`` at ``steps`` (a list: a 3-D result), ``rows`` and ``cols``:
    CF-decoded, or the stored numbers when ``raw`` (the config's own decoding follows).

    NetCDF-4 files are read with h5py directly (xarray's indexing would import dask.array and
    SciPy's sparse matrices, ~30 MB in every process, to check for Dask arrays); Zarr and other
    formats through xarray."""
    handle = open_hdf5(path)
    if handle is not None and variable in handle:
        var = handle[variable]
        if steps != sorted(set(steps)):            # h5py reads increasing indices only
            stored = np.stack([var[s, rows, cols] for s in steps])
        else:
            stored = var[steps, rows, cols]
        return stored.astype(np.float64) if raw else cf_decoded(stored, var.attrs)
    da = _cached(path, raw)[variable]
    return np.asarray(da.isel({da.dims[0]: steps, da.dims[-2]: rows, da.dims[-1]: cols}).values, dtype=np.float64)


@dataclass(frozen=True)
class StackSource:
    """One layer of one date from a time stack: the weighted sum of some of its steps.

    ``internal = (value * factor + shift)`` where ``value`` is the CF-decoded value (or, with
    ``scale``/``offset``/``nodata`` given, ``stored * scale + offset`` with ``stored == nodata``
    missing).  Days take one step (weight 1); scenes interpolate linearly between the two steps
    around the scene time.
    """
    layer: str
    path: str
    variable: str
    steps: tuple[int, ...]
    weights: tuple[float, ...]
    info: StackInfo
    scale: float | None = None
    offset: float | None = None
    nodata: float | None = None
    factor: float = 1.0
    shift: float = 0.0
    resampling: str = "bilinear"
    units: str = ""

    @property
    def raw(self) -> bool:
        return self.scale is not None or self.offset is not None or self.nodata is not None

    def read_layers(self, grid: TargetGrid, window: Window, memo: ReadMemo | None = None) -> dict[str, np.ndarray]:
        return {self.layer: self.read(grid, window, memo)}

    def read(self, grid: TargetGrid, window: Window, memo: ReadMemo | None = None) -> np.ndarray:
        """The decoded float32 values of ``window`` of ``grid``; NaN = missing or off the stack.

        ``memo``: what the task keeps between dates (io/memo.py): the geometry of this stack's grid
        on the window, and the slab of every step the task reads, fetched in one request.
        """
        h, w = int(window.height), int(window.width)
        if self.resampling in FAST_RESAMPLING:
            warp = warp_for(memo.warps if memo is not None else None, grid, window, self.info.crs,
                            self.info.transform, self.info.shape)
            if warp.upsampling:
                r0, r1, c0, c1 = warp.bounds()
                if r1 <= r0 or c1 <= c0:
                    return np.full((h, w), np.nan, dtype=np.float32)
                slab = self._memo_slab(memo, grid, r0, r1, c0, c1)
                return self._finish(warp.resample(slab, r0, c0, self.resampling))
        out = np.full((h, w), np.nan, dtype=np.float32)
        cut = self._slab_window(grid, window)
        if cut is None:
            return out
        (r0, r1), (c0, c1) = cut
        slab = self._slab(r0, r1, c0, c1)
        t = self.info.transform
        src_transform = Affine(t.a, t.b, t.c + t.a * c0, t.d, t.e, t.f + t.e * r0)
        if src_transform.e > 0:       # south-up storage: flip to north-up for the warp
            slab = slab[::-1]
            src_transform = Affine(t.a, t.b, src_transform.c, t.d, -t.e, t.f + t.e * r1)
        reproject(source=slab, destination=out, src_transform=src_transform, src_crs=self.info.crs,
                  src_nodata=np.nan, dst_transform=grid.window_transform(window), dst_crs=grid.crs,
                  dst_nodata=np.nan, resampling=Resampling[self.resampling], init_dest_nodata=True,
                  num_threads=1)
        return self._finish(out)

    def _finish(self, out: np.ndarray) -> np.ndarray:
        if self.factor != 1:
            out *= np.float32(self.factor)
        if self.shift != 0:
            out += np.float32(self.shift)
        return out

    def read_sample(self, max_pixels: int = 256) -> np.ndarray:
        """A small decoded sample of the first step (a strided read), cheap whatever the stack's size."""
        h, w = self.info.shape
        step = max(1, math.ceil(max(h, w) / max_pixels))
        a = self._values([self.steps[0]], slice(None, None, step), slice(None, None, step))[0]
        return (a * self.factor + self.shift).astype(np.float32)

    def overlaps(self, grid: TargetGrid) -> bool:
        """Whether the stack covers any part of ``grid``."""
        return self._slab_window(grid, Window(0, 0, grid.width, grid.height)) is not None

    def _slab_window(self, grid: TargetGrid, window: Window):
        info = self.info
        try:
            xmin, ymin, xmax, ymax = transform_bounds(grid.crs, info.crs, *grid.window_bounds(window),
                                                      densify_pts=11)
        except Exception:
            return None
        if info.crs.is_geographic and info.bounds[0] >= 0 and xmax < 0:   # a 0..360 longitude stack
            xmin, xmax = xmin + 360, xmax + 360
        inv = ~info.transform
        cols, rows = zip(*(inv * (x, y) for x in (xmin, xmax) for y in (ymin, ymax)))
        h, w = info.shape
        r0, r1 = max(0, math.floor(min(rows)) - _MARGIN), min(h, math.ceil(max(rows)) + _MARGIN)
        c0, c1 = max(0, math.floor(min(cols)) - _MARGIN), min(w, math.ceil(max(cols)) + _MARGIN)
        if r1 <= r0 or c1 <= c0:
            return None
        return (r0, r1), (c0, c1)

    def _memo_slab(self, memo: ReadMemo | None, grid: TargetGrid, r0: int, r1: int, c0: int, c1: int) -> np.ndarray:
        """This date's slab, cut from the task's prefetch of every step it wants (one read per stack)."""
        key = (self.path, self.variable, self.raw)
        if memo is None or memo.chunk is None or key not in memo.wanted:
            return self._slab(r0, r1, c0, c1)
        if key not in memo.slabs:
            cut = self._slab_window(grid, memo.chunk)
            if cut is None:
                return self._slab(r0, r1, c0, c1)
            (a0, a1), (b0, b1) = cut
            steps = memo.wanted[key]
            memo.slabs[key] = ((a0, a1, b0, b1), {s: i for i, s in enumerate(steps)},
                               self._read_steps(steps, a0, a1, b0, b1))
        (a0, a1, b0, b1), index, data = memo.slabs[key]
        if not (a0 <= r0 and r1 <= a1 and b0 <= c0 and c1 <= b1) or any(s not in index for s in self.steps):
            return self._slab(r0, r1, c0, c1)
        return self._weighted(data[:, r0 - a0:r1 - a0, c0 - b0:c1 - b0], index)

    def _read_steps(self, steps, r0: int, r1: int, c0: int, c1: int) -> np.ndarray:
        """Decoded float64 values of several steps of the slab, in one request."""
        return self._values(list(steps), slice(r0, r1), slice(c0, c1))

    def _slab(self, r0: int, r1: int, c0: int, c1: int) -> np.ndarray:
        data = self._read_steps(self.steps, r0, r1, c0, c1)
        return self._weighted(data, {s: i for i, s in enumerate(self.steps)})

    def _weighted(self, data: np.ndarray, index: dict) -> np.ndarray:
        """This date's value: the weighted sum of its steps (``index``: step -> position in ``data``)."""
        total = None
        for step, weight in zip(self.steps, self.weights):
            a = data[index[step]]
            total = a * weight if total is None else total + a * weight
        return total.astype(np.float32)

    def _values(self, steps: list, rows: slice, cols: slice) -> np.ndarray:
        """float64 values of ``steps``: CF-decoded, or with the config's own decoding (stored == nodata
        missing, then stored * scale + offset)."""
        try:
            a = _block(self.path, self.variable, self.raw, steps, rows, cols)
        except Exception as exc:
            which = f"step {steps[0]}" if len(steps) == 1 else f"steps {steps[0]}..{steps[-1]}"
            raise InputError(f"{self.path}: reading {self.variable} {which} failed "
                             f"({exc.__class__.__name__}: {' '.join(str(exc).split())[:160]}); the file may "
                             f"be truncated or corrupt") from None
        if self.raw:
            if self.nodata is not None:
                a[a == self.nodata] = np.nan
            a = a * (1.0 if self.scale is None else self.scale) + (self.offset or 0.0)
        return a
