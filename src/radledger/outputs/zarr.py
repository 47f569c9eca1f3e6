"""One CF Zarr store per time kind, written one date at a time.

:class:`ZarrProductStore` creates ``{scenes|days}.zarr`` for a list of times known up
front (a plan knows every date), metadata and coordinates only, and then
:meth:`~ZarrProductStore.write_date` fills one time slice by region
(``Dataset.to_zarr(region=...)``), so a streaming writer can call it as each date
finishes.  A slice never written reads as no value (NaN; ``quality`` 255).

Layout (read with ``xarray.open_zarr``; CRS with rioxarray's ``ds.rio.crs``):

* one variable per product, ``(time, y, x)``, with the CF attributes of
  :func:`radledger.outputs.cube.variable_attrs` and ``grid_mapping: spatial_ref``;
* ``time`` as int64 ``seconds since 1970-01-01`` (UTC), days at 00:00 UTC with a
  ``date`` coordinate; ``x``/``y`` pixel centres; ``spatial_ref`` holding the CRS
  as WKT and CF grid-mapping parameters plus GDAL's ``GeoTransform``;
* Zarr format 2 with consolidated metadata: read by zarr-python 2 and 3, by GDAL's
  Zarr driver and by xarray in one metadata request (format 3 still marks
  consolidated metadata and fixed-length text as outside its specification).

Chunks: ``(time=16, y=512, x=512)`` (clipped to the store's size), 16 MiB of float32
before compression.  A map of one date reads one chunk row of 16 dates (16 times the
bytes it needs); a pixel's time series over a year reads 23 chunks instead of 365.
Maps are what a run writes and a glance needs, series what a basin analysis needs;
16 dates is the middle ground (common practice: chunks of a few to tens of MiB,
aligned with the 512-pixel COG tiles the products come from).  Writing one date fills
1/16 of each chunk, so the chunk is read, changed and written again: write_date
calls are serialised by a lock held by the store object.

Reruns: the store's attributes keep, per product, the settings hash of the product
written at each time index; a slice whose product has the same hash is not written
again.  A store made for other times, products, grid or chunks is made anew.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import os
import shutil
import threading
from pathlib import Path
from typing import Callable, Mapping, Sequence

import dask
import dask.array as da
import numpy as np
import xarray as xr
import zarr

from .._version import __version__
from ..errors import OutputError
from ..grid import TargetGrid
from ..io.cog import read_tags
from ..io.lazy import read_product
from ..kinds import TimeKind
from ..model.products import product_info
from .cube import fill_value, time_coords, variable_attrs

__all__ = ["ZarrProductStore", "TIME_CHUNK", "SPACE_CHUNK", "HASHES_ATTR", "LAYOUT_ATTR"]

TIME_CHUNK = 16
SPACE_CHUNK = 512
HASHES_ATTR = "radledger_settings_hashes"   # {product: [settings hash or "" per time index]}
LAYOUT_ATTR = "radledger_layout"            # what the store was made for (times, products, grid, chunks)
_TIME_ENCODING = {"units": "seconds since 1970-01-01", "calendar": "standard", "dtype": "int64"}


def _format() -> dict:
    """Zarr format 2 (see the module notes); zarr-python 2 knows no other and takes no argument."""
    return {"zarr_format": 2} if int(zarr.__version__.split(".")[0]) >= 3 else {}


def _as_time(value) -> dt.datetime:
    if isinstance(value, dt.datetime):
        return value.astimezone(dt.timezone.utc).replace(tzinfo=None) if value.tzinfo else value
    return dt.datetime(value.year, value.month, value.day)


class ZarrProductStore:
    """A Zarr store of the products of one time kind on one grid, for known times.

    Parameters
    ----------
    path : str or path-like
        The store folder, e.g. ``DIR/zarr/days.zarr``.
    grid : TargetGrid
        The products' grid.
    kind : {"scenes", "days"}
        The time kind (attributes and units come from its product table).
    times : sequence of datetime or date
        Every time the store holds [UTC]; aware datetimes are converted, dates
        become 00:00 UTC.  Distinct; stored in this order.
    products : sequence of str
        Product names of ``kind``; one variable each.
    attrs : mapping, optional
        Extra global attributes (e.g. ``title``).
    time_chunk, space_chunk : int, optional
        Chunk edges along time [dates] and along y and x [pixel].
    """

    def __init__(self, path: str | os.PathLike, grid: TargetGrid, kind: TimeKind | str, times: Sequence,
                 products: Sequence[str], *, attrs: Mapping[str, object] | None = None,
                 time_chunk: int = TIME_CHUNK, space_chunk: int = SPACE_CHUNK):
        self.path = Path(path)
        self.grid = grid
        self.kind = TimeKind(kind)
        self.times = [_as_time(t) for t in times]
        if not self.times:
            raise ValueError("a Zarr store needs at least one time")
        if len(set(self.times)) != len(self.times):
            raise ValueError("the times of a Zarr store must be distinct")
        self.products = {name: product_info(name, self.kind) for name in products}
        self.attrs = dict(attrs or {})
        self.chunks = (min(time_chunk, len(self.times)), min(space_chunk, grid.height), min(space_chunk, grid.width))
        self._lock = threading.Lock()
        self._hashes: dict[str, list[str]] = {}

    # --- the store ------------------------------------------------------------------------
    @property
    def layout(self) -> str:
        """A digest of what the store is made for; another layout means a new store."""
        text = json.dumps([self.kind.value, [t.isoformat() for t in self.times], list(self.products),
                           self.grid.crs.to_wkt(), list(self.grid.transform)[:6], self.grid.shape, self.chunks])
        return hashlib.sha256(text.encode()).hexdigest()[:20]

    def _template(self) -> xr.Dataset:
        shape = (len(self.times), *self.grid.shape)
        variables = {}
        for name, info in self.products.items():
            data = da.full(shape, fill_value(info), dtype=info.dtype, chunks=self.chunks)
            variables[name] = xr.Variable(("time", "y", "x"), data, variable_attrs(info, self.kind))
        t = self.grid.transform
        coords = {**time_coords(self.times, self.kind),
                  "y": t.f + t.e * (np.arange(self.grid.height) + 0.5),
                  "x": t.c + t.a * (np.arange(self.grid.width) + 0.5)}
        now = dt.datetime.now(dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
        ds = xr.Dataset(variables, coords=coords, attrs={
            "title": f"radledger {self.kind} products", "source": f"radledger {__version__}",
            "history": f"{now} radledger {__version__}: store created", **self.attrs, "Conventions": "CF-1.8",
            LAYOUT_ATTR: self.layout,
            HASHES_ATTR: {name: [""] * len(self.times) for name in self.products}})
        ds = ds.rio.write_crs(self.grid.crs).rio.write_transform(t).rio.write_coordinate_system()
        # "coordinates" names spatial_ref too, so plain xarray.open_zarr keeps it a coordinate and
        # rioxarray finds the CRS without decode_coords="all"; grid_mapping is the CF link
        coordinates = " ".join(["date"] * (self.kind is TimeKind.DAYS) + ["spatial_ref"])
        for name in self.products:
            var = ds[name].variable
            var.encoding.pop("grid_mapping", None)
            var.encoding["coordinates"] = coordinates
            var.attrs["grid_mapping"] = "spatial_ref"
        return ds

    def open(self, *, overwrite: bool = False) -> "ZarrProductStore":
        """Use the store at ``path`` if it was made for this layout, else make it (metadata only).

        ``overwrite`` forgets the stored hashes, so every slice is written again.
        """
        existing = self._read_attrs()
        if existing is not None and existing.get(LAYOUT_ATTR) == self.layout:
            stored = existing.get(HASHES_ATTR) or {}
            self._hashes = {name: list(stored.get(name) or [""] * len(self.times)) for name in self.products}
            if overwrite:
                self._hashes = {name: [""] * len(self.times) for name in self.products}
                self._save_hashes()
            return self
        if existing is None and self.path.exists():
            raise OutputError(f"{self.path}: exists and is not a radledger Zarr store; move it away or choose "
                              f"another output.directory")
        if self.path.exists():
            shutil.rmtree(self.path)
        self.path.parent.mkdir(parents=True, exist_ok=True)
        template = self._template()
        encoding = {name: {"chunks": self.chunks, "_FillValue": fill_value(info)}
                    for name, info in self.products.items()}
        encoding["time"] = dict(_TIME_ENCODING)
        try:
            template.to_zarr(self.path, mode="w", compute=False, encoding=encoding, consolidated=True, **_format())
        except OSError as exc:
            raise OutputError(f"{self.path}: cannot write there ({exc.strerror or exc}); check that the output "
                              f"directory is writable") from None
        self._hashes = {name: [""] * len(self.times) for name in self.products}
        return self

    def _read_attrs(self) -> dict | None:
        if not self.path.exists():
            return None
        try:
            attrs = dict(zarr.open_group(str(self.path), mode="r").attrs)
        except Exception:   # not a Zarr group (or a broken one)
            return None
        return attrs if LAYOUT_ATTR in attrs else None

    def _save_hashes(self) -> None:
        group = zarr.open_group(str(self.path), mode="r+")
        group.attrs[HASHES_ATTR] = self._hashes
        zarr.consolidate_metadata(str(self.path))

    # --- one date -------------------------------------------------------------------------
    def index(self, when) -> int:
        """The time index of ``when`` (datetime or date, as given to the constructor)."""
        return self.times.index(_as_time(when))

    def is_current(self, index: int, product: str, settings_hash: str | None) -> bool:
        """True if ``product`` at ``index`` was written from a product with ``settings_hash``."""
        return bool(settings_hash) and self._hashes.get(product, [""] * len(self.times))[index] == settings_hash

    def write_date(self, index: int, sources: Mapping[str, object], *, hashes: Mapping[str, str] | None = None,
                   compute: Callable = dask.compute) -> list[str]:
        """Write the products of time ``index``; return the names written (current ones are skipped).

        Parameters
        ----------
        index : int
            Position of the date in ``times``.
        sources : mapping of str to path or array
            Product name -> a product file on the grid (its ``settings_hash`` tag is used
            when ``hashes`` does not name it) or a 2-D NumPy/Dask array on the grid
            [product units].
        hashes : mapping of str to str, optional
            Settings hash of each source; a product whose stored hash is the same is not
            written again.  No hash: always written.
        compute : callable, optional
            Computes a Dask collection (the run's engine); ``dask.compute`` by default.
        """
        if not 0 <= index < len(self.times):
            raise IndexError(f"time index {index} outside 0..{len(self.times) - 1}")
        unknown = sorted(set(sources) - set(self.products))
        if unknown:
            raise KeyError(f"{self.path}: no variable for {', '.join(unknown)}; the store holds "
                           f"{', '.join(self.products)}")
        hashes = dict(hashes or {})
        variables, done = {}, {}
        for name, source in sources.items():
            info = self.products[name]
            if isinstance(source, (str, os.PathLike)):
                h = hashes.get(name) or read_tags(source).get("settings_hash", "")
                data = read_product(source, self.grid, dtype=info.dtype)
            else:
                h = hashes.get(name, "")
                data = da.asarray(source).astype(info.dtype, copy=False)
            if tuple(data.shape) != self.grid.shape:
                raise ValueError(f"{name}: shape {tuple(data.shape)} is not the grid's {self.grid.shape}")
            if self.is_current(index, name, h):
                continue
            data = data.rechunk(self.chunks[1:])[None]
            variables[name] = xr.Variable(("time", "y", "x"), data)
            done[name] = h
        if not variables:
            return []
        with self._lock:
            # safe_chunks=False: a date fills part of a time chunk; the lock keeps dates apart and
            # the spatial chunks above match the store's, so no two tasks share a Zarr chunk
            delayed = xr.Dataset(variables).to_zarr(self.path, region={"time": slice(index, index + 1)},
                                                    compute=False, safe_chunks=False, **_format())
            compute(delayed)
            for name, h in done.items():
                self._hashes[name][index] = h
            self._save_hashes()
        return list(variables)
