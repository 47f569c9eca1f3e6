"""CF-NetCDF stacks: reopened by xarray (decode_cf) and by GDAL, attributes against the CF tables.

CF standard-name table values below were read from the table's XML source,
cf-convention/cf-convention.github.io: Data/cf-standard-names/current/src/cf-standard-name-table.xml
(stored copy, version 57): <entry id=...><canonical_units>.
"""

from __future__ import annotations

import itertools
from datetime import date, datetime, timedelta, timezone

import dask.array as da
import h5py
import netCDF4
import numpy as np
import pytest
import rasterio
import xarray as xr
from pyproj import CRS

from helpers_rasters import utm_grid, write_raster
from radledger.errors import InputError, OutputError
from radledger.grid import TargetGrid
from radledger.io.h5chunks import write_chunks
from radledger.io.lazy import _WindowReader, read_product
from radledger.outputs.netcdf import stack_layout, write_stack
from radledger.model.products import SCENE_QUALITY_BITS as QUALITY_BITS, product_info

# canonical units from the CF standard-name table XML (source in the module docstring)
CF_CANONICAL_UNITS = {
    "surface_net_downward_radiative_flux": "W m-2",
    "surface_net_downward_shortwave_flux": "W m-2",
    "surface_net_upward_longwave_flux": "W m-2",
    "surface_longwave_emissivity": "1",
}


@pytest.fixture(scope="module")
def days_stack(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("nc")
    grid = utm_grid(40, 30, chunk=16)
    rng = np.random.default_rng(1)
    data = rng.normal(12.0, 3.0, (3,) + grid.shape).astype(np.float32)
    data[1, 4:9, 5:12] = np.nan
    days = [date(2026, 7, 16), date(2026, 7, 14), date(2026, 7, 15)]  # not in order on purpose
    paths = [write_raster(tmp / f"net_radiation_{d:%Y%m%d}.tif", grid, a) for d, a in zip(days, data)]
    out = write_stack(paths, days, tmp / "net_radiation_days.nc", grid=grid,
                      product=product_info("net_radiation", "days"), cell_methods="time: mean",
                      time_bounds=[(d, d + timedelta(days=1)) for d in days], attrs={"title": "basin run"})
    return grid, data, days, out


def test_reopens_with_times_values_and_bounds(days_stack):
    grid, data, days, out = days_stack
    with xr.open_dataset(out, decode_cf=True) as ds:
        order = np.argsort(days)
        expected_times = np.array([np.datetime64(days[i].isoformat()) for i in order], dtype="datetime64[ns]")
        np.testing.assert_array_equal(ds.time.values, expected_times)
        np.testing.assert_array_equal(ds.time_bnds.values[:, 1] - ds.time_bnds.values[:, 0],
                                      np.timedelta64(1, "D").astype("timedelta64[ns]"))
        assert ds.time.attrs["bounds"] == "time_bnds" and ds.time.attrs["axis"] == "T"
        var = ds.net_radiation
        assert var.dims == ("time", "y", "x") and var.dtype == np.float32
        np.testing.assert_array_equal(var.values, data[order])  # NaN == NaN in assert_array_equal
        t = grid.transform
        np.testing.assert_allclose(ds.x.values, t.c + 30 * (np.arange(40) + 0.5))  # pixel centres, 30 m grid
        np.testing.assert_allclose(ds.y.values, t.f - 30 * (np.arange(30) + 0.5))


def test_raw_time_encoding(days_stack):
    _, _, days, out = days_stack
    with netCDF4.Dataset(out) as nc:
        time = nc["time"]
        assert time.units == "seconds since 1970-01-01" and time.calendar == "standard"
        # seconds since the epoch by Python's own datetime arithmetic
        epoch = datetime(1970, 1, 1)
        expected = sorted((datetime(d.year, d.month, d.day) - epoch).total_seconds() for d in days)
        np.testing.assert_array_equal(time[:], expected)
        assert time.bounds == "time_bnds" and nc["time_bnds"].dimensions == ("time", "nv")
        assert "_FillValue" not in nc["time_bnds"].ncattrs() and "_FillValue" not in nc["x"].ncattrs()


def test_cf_attributes(days_stack):
    _, _, _, out = days_stack
    with xr.open_dataset(out, decode_cf=True) as ds:
        attrs = ds.net_radiation.attrs
        assert attrs["standard_name"] in CF_CANONICAL_UNITS  # a name the CF table lists
        assert attrs["standard_name"] == "surface_net_downward_radiative_flux"
        assert attrs["units"] == "MJ m-2 day-1"   # convertible to the canonical W m-2 (1 MJ/day = 1e6/86400 W)
        assert attrs["cell_methods"] == "time: mean"
        assert attrs["grid_mapping"] == "spatial_ref"
        assert ds.net_radiation.encoding["_FillValue"] != ds.net_radiation.encoding["_FillValue"]  # NaN
        # coordinate standard names and units: CF standard-name table, from memory
        assert ds.x.attrs["standard_name"] == "projection_x_coordinate" and ds.x.attrs["units"] == "m"
        assert ds.y.attrs["standard_name"] == "projection_y_coordinate" and ds.y.attrs["units"] == "m"
        assert ds.time.attrs["standard_name"] == "time"
        g = ds.attrs
        assert g["Conventions"] == "CF-1.8" and g["title"] == "basin run"
        assert g["source"].startswith("radledger ") and "radledger" in g["history"]
        assert "institution" not in g


@pytest.mark.parametrize("name", ["net_radiation", "net_shortwave", "net_longwave", "surface_emissivity"])
def test_scene_products_use_cf_canonical_units(name):
    product = product_info(name, "scenes")
    assert CF_CANONICAL_UNITS[product.standard_name] == product.units


def test_crs_recovered_by_pyproj_and_gdal(days_stack):
    grid, _, _, out = days_stack
    with xr.open_dataset(out, decode_cf=True) as ds:
        gm = ds["spatial_ref"].attrs
        assert gm["grid_mapping_name"] == "transverse_mercator"
        assert CRS.from_cf(gm) == CRS.from_epsg(32611)
        assert CRS.from_wkt(gm["crs_wkt"]).to_epsg() == 32611
    with rasterio.open(f"netcdf:{out}:net_radiation") as src:  # GDAL's own netCDF driver
        assert src.crs.to_epsg() == 32611
        assert src.transform.almost_equals(grid.transform)
        assert (src.count, src.height, src.width) == (3, 30, 40)


def test_compressed_and_chunked(days_stack):
    _, _, _, out = days_stack
    with netCDF4.Dataset(out) as nc:
        var = nc["net_radiation"]
        assert var.filters()["zlib"] and var.filters()["shuffle"]
        assert var.chunking() == [1, 16, 16]
        assert var.dtype == np.float32


def test_scene_times_from_aware_datetimes(tmp_path):
    grid = utm_grid(20, 16, chunk=16)
    paths = [write_raster(tmp_path / f"s{i}.tif", grid, np.full(grid.shape, i, np.float32)) for i in range(2)]
    plus2 = timezone(timedelta(hours=2))
    times = [datetime(2026, 7, 14, 20, 10, tzinfo=plus2), "2026-07-30T18:10:00Z"]
    out = write_stack(paths, times, tmp_path / "net_radiation_scenes.nc", grid=grid,
                      product=product_info("net_radiation", "scenes"), cell_methods="time: point")
    with xr.open_dataset(out) as ds:
        # 20:10 at UTC+2 is 18:10 UTC (by hand)
        np.testing.assert_array_equal(ds.time.values, np.array(["2026-07-14T18:10", "2026-07-30T18:10"],
                                                               dtype="datetime64[ns]"))
        assert "time_bnds" not in ds.variables and "bounds" not in ds.time.attrs
        assert ds.net_radiation.attrs["units"] == "W m-2"


def test_quality_stack_keeps_uint8_and_flags(tmp_path):
    grid = utm_grid(20, 16, chunk=8)
    q = np.zeros(grid.shape, np.uint8)
    q[0] = 1
    q[1] = 1 | 32
    q[2] = 255
    path = write_raster(tmp_path / "quality.tif", grid, q, nodata=255)
    out = write_stack([path], [datetime(2026, 7, 14, 18, 10)], tmp_path / "quality_scenes.nc", grid=grid,
                      product=product_info("quality", "scenes"), cell_methods="time: point", flags=QUALITY_BITS)
    with xr.open_dataset(out, mask_and_scale=False) as ds:
        var = ds.quality
        assert var.dtype == np.uint8 and var.attrs["_FillValue"] == 255
        np.testing.assert_array_equal(var.values[0], q)
        assert list(var.attrs["flag_masks"]) == list(QUALITY_BITS.values())
        assert var.attrs["flag_meanings"].split() == list(QUALITY_BITS)
        assert "standard_name" not in var.attrs  # the CF table has no name for our bit flags


def test_geographic_grid_coordinates(tmp_path):
    grid = TargetGrid.from_bounds("EPSG:4326", 0.25, (10.0, 44.0, 12.0, 45.0), chunk=4)
    path = write_raster(tmp_path / "a.tif", grid, np.ones(grid.shape, np.float32))
    out = write_stack([path], [date(2026, 1, 1)], tmp_path / "a.nc", grid=grid,
                      product=product_info("net_radiation", "days"), cell_methods="time: mean")
    with xr.open_dataset(out) as ds:
        # CF: longitude in degrees_east, latitude in degrees_north (from memory)
        assert (ds.x.attrs["standard_name"], ds.x.attrs["units"]) == ("longitude", "degrees_east")
        assert (ds.y.attrs["standard_name"], ds.y.attrs["units"]) == ("latitude", "degrees_north")
        assert ds.spatial_ref.attrs["grid_mapping_name"] == "latitude_longitude"
        assert CRS.from_cf(ds.spatial_ref.attrs).equals(CRS.from_epsg(4326), ignore_axis_order=True)
        np.testing.assert_allclose(ds.x.values, 10.125 + 0.25 * np.arange(8))


def test_failed_write_leaves_nothing(days_stack, tmp_path, monkeypatch):
    """A read failing half-way through the chunks (the file then exists, partly filled) leaves nothing."""
    grid, _, days, _ = days_stack
    paths = [write_raster(tmp_path / f"{c}.tif", grid, np.ones(grid.shape, np.float32)) for c in "ab"]
    target = tmp_path / "stack.nc"
    target.write_bytes(b"previous")
    calls = itertools.count()
    seen = []
    real_read = _WindowReader.read

    def broken(self, src, window):
        if next(calls) == 7:  # of 2 dates x 6 chunks
            seen.extend((p.name, p.stat().st_size) for p in tmp_path.glob(".stack.nc*"))
            raise OSError("disk full")
        return real_read(self, src, window)

    monkeypatch.setattr(_WindowReader, "read", broken)
    with pytest.raises(OSError, match="disk full"):
        write_stack(paths, days[:2], target, grid=grid, product=product_info("net_radiation", "days"),
                    cell_methods="time: mean")
    assert len(seen) == 1 and seen[0][1] > 0  # the partial file was there, with the layout written
    assert target.read_bytes() == b"previous"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.tif", "b.tif", "stack.nc"]


def test_errors(days_stack, tmp_path):
    grid, _, days, _ = days_stack
    path = write_raster(tmp_path / "a.tif", grid, np.ones(grid.shape, np.float32))
    product = product_info("net_radiation", "days")
    with pytest.raises(ValueError, match="1 paths but 2 times"):
        write_stack([path], days[:2], tmp_path / "x.nc", grid=grid, product=product, cell_methods="time: mean")
    with pytest.raises(ValueError, match="times must be distinct"):
        write_stack([path, path], [days[0]] * 2, tmp_path / "x.nc", grid=grid, product=product,
                    cell_methods="time: mean")
    with pytest.raises(OutputError, match=r"nope[/\\]x\.nc: cannot write there"):
        write_stack([path], days[:1], tmp_path / "nope" / "x.nc", grid=grid, product=product,
                    cell_methods="time: mean")
    with pytest.raises(InputError, match=r"gone\.tif: cannot open"):
        write_stack([tmp_path / "gone.tif"], days[:1], tmp_path / "x.nc", grid=grid, product=product,
                    cell_methods="time: mean")
    assert not (tmp_path / "x.nc").exists()


# ---------------------------------------------------------------- values as every reader decodes them

def _ragged_grid():
    return utm_grid(45, 37, chunk=16)  # 3 x 3 chunks; the last row and column of chunks stick out


def _read_back(out, name):
    """The variable's raw stored values by four independent readers (no masking, no scaling)."""
    with h5py.File(out, "r") as f:                       # HDF5's own filter pipeline
        by_hdf5 = f[name][...]
    with netCDF4.Dataset(out) as nc:                      # netCDF-C
        nc.set_auto_maskandscale(False)
        by_netcdf_c = nc[name][...]
    with xr.open_dataset(out, engine="h5netcdf", mask_and_scale=False) as ds:   # xarray / h5netcdf
        by_xarray = ds[name].values
    with rasterio.open(f"netcdf:{out}:{name}") as src:    # GDAL's netCDF driver, one band per time
        by_gdal = src.read()
    return {"h5py": by_hdf5, "netCDF4": by_netcdf_c, "xarray": by_xarray, "gdal": by_gdal}


def test_ragged_edge_chunks_equal_the_geotiffs(tmp_path):
    grid = _ragged_grid()
    rng = np.random.default_rng(7)
    data = rng.normal(200.0, 50.0, (3,) + grid.shape).astype(np.float32)
    data[0, 30:, 40:] = np.nan               # NaN inside the bottom-right edge chunk
    data[2, :5, :] = np.nan                  # and along a whole top row of chunks
    days = [date(2026, 6, 1) + timedelta(days=i) for i in range(3)]
    paths = [write_raster(tmp_path / f"rn{i}.tif", grid, a) for i, a in enumerate(data)]
    out = write_stack(paths, days, tmp_path / "rn.nc", grid=grid, product=product_info("net_radiation", "days"),
                      cell_methods="time: mean")
    with rasterio.open(paths[0]) as src:     # the GeoTIFFs as GDAL decodes them are the expectation
        assert np.array_equal(src.read(1), data[0], equal_nan=True)
    for reader, values in _read_back(out, "net_radiation").items():
        assert values.shape == (3, 37, 45), reader
        assert np.array_equal(values, data, equal_nan=True), reader
    with h5py.File(out, "r") as f:
        dset = f["net_radiation"]
        assert dset.chunks == (1, 16, 16) and dset.id.get_num_chunks() == 3 * 3 * 3
        assert dset.compression == "gzip" and dset.compression_opts == 4 and dset.shuffle


def test_uint8_quality_with_fill_255(tmp_path):
    grid = _ragged_grid()
    rng = np.random.default_rng(8)
    q = rng.integers(0, 64, (2,) + grid.shape).astype(np.uint8)
    q[0, 20:, 33:] = 255                                  # nodata in the corner edge chunk
    q[1] = rng.integers(0, 255, grid.shape)               # noise: deflate's output is larger than its input
    paths = [write_raster(tmp_path / f"q{i}.tif", grid, a, nodata=255) for i, a in enumerate(q)]
    times = [datetime(2026, 7, 14, 18, 10), datetime(2026, 7, 30, 18, 10)]
    out = write_stack(paths, times, tmp_path / "quality_scenes.nc", grid=grid,
                      product=product_info("quality", "scenes"), cell_methods="time: point", flags=QUALITY_BITS)
    for reader, values in _read_back(out, "quality").items():
        assert values.dtype == np.uint8, reader
        np.testing.assert_array_equal(values, q, err_msg=reader)
    with netCDF4.Dataset(out) as nc:                      # netCDF-C masks the fill value itself
        var = nc["quality"]
        assert var._FillValue == 255 and var.dtype == np.uint8
        np.testing.assert_array_equal(np.ma.getmaskarray(var[...]), q == 255)
    with rasterio.open(f"netcdf:{out}:quality") as src:
        assert src.nodata == 255 and src.dtypes[0] == "uint8"


def _tree(path):
    """Every HDF5 object of a file: kind, shape, dtype, chunks, filters, fill value, attributes."""
    out = {}

    def attrs(obj):
        return {k: (len(v) if isinstance(v, np.ndarray) and v.dtype == object   # references: how many
                    else repr(v.tolist() if isinstance(v, np.ndarray) else v))      # repr: nan == nan
                for k, v in obj.attrs.items() if k != "_NCProperties"}

    def visit(name, obj):
        if isinstance(obj, h5py.Dataset):
            pl = obj.id.get_create_plist()
            out[name] = dict(shape=obj.shape, dtype=obj.dtype.str, chunks=obj.chunks, maxshape=obj.maxshape,
                             filters=[pl.get_filter(i) for i in range(pl.get_nfilters())],
                             fill=repr(obj.fillvalue), attrs=attrs(obj))
        else:
            out[name] = dict(attrs=attrs(obj))

    with h5py.File(path, "r") as f:
        out["/"] = dict(attrs=attrs(f))
        f.visititems(visit)
    return out


def test_same_file_as_xarray_writes_from_the_values(days_stack, tmp_path):
    """Outside reference: xarray's own to_netcdf (h5netcdf), given our file's values and encodings,
    writes the same objects, attributes, chunking, filters and fill values, and the same numbers."""
    _, _, _, out = days_stack
    reference = tmp_path / "reference.nc"
    with netCDF4.Dataset(out) as nc:  # variables stored without a fill value keep none
        unfilled = [k for k, v in nc.variables.items() if "_FillValue" not in v.ncattrs()]
    with xr.open_dataset(out, engine="h5netcdf") as ds:
        ds.load()
        for k in unfilled:
            ds[k].encoding["_FillValue"] = None
        ds.to_netcdf(reference, engine="h5netcdf", format="NETCDF4")
    ours, theirs = _tree(out), _tree(reference)
    assert ours.keys() == theirs.keys()
    for name in ours:
        assert ours[name] == theirs[name], name
    with xr.open_dataset(out, engine="h5netcdf") as a, xr.open_dataset(reference, engine="h5netcdf") as b:
        xr.testing.assert_identical(a, b)
        assert a.net_radiation.encoding["zlib"] and a.net_radiation.encoding["complevel"] == 4
    with h5py.File(out, "r") as f, h5py.File(reference, "r") as g:
        assert f["net_radiation"].id.get_num_chunks() == g["net_radiation"].id.get_num_chunks()
        np.testing.assert_array_equal(f["net_radiation"][...].view(np.uint32),
                                      g["net_radiation"][...].view(np.uint32))   # bit for bit, NaNs too


@pytest.mark.parametrize("kind", ["float32", "uint8"])
def test_same_file_as_xarray_computing_the_dask_stack(tmp_path, kind):
    """Outside reference: xarray's to_netcdf (h5netcdf engine) computing the Dask stack of the GeoTIFFs
    itself, with the same dataset and encoding (how stacks were written before the chunk pool)."""
    grid = _ragged_grid()
    rng = np.random.default_rng(9)
    if kind == "float32":
        data = rng.normal(5.0, 2.0, (2,) + grid.shape).astype(np.float32)
        data[1, 33:, :] = np.nan
        product, nodata, flags = product_info("net_radiation", "scenes"), None, None
    else:
        data = rng.integers(0, 40, (2,) + grid.shape).astype(np.uint8)
        data[1, 33:, :] = 255
        product, nodata, flags = product_info("quality", "scenes"), 255, QUALITY_BITS
    paths = [write_raster(tmp_path / f"d{i}.tif", grid, a, nodata=nodata) for i, a in enumerate(data)]
    times = [datetime(2026, 7, 30, 18, 10), datetime(2026, 7, 14, 18, 10)]  # stored the other way round
    kwargs = dict(grid=grid, product=product, cell_methods="time: point", flags=flags)
    out = write_stack(paths, times, tmp_path / "ours.nc", **kwargs)
    ds, encoding, readers = stack_layout(paths, times, **kwargs)
    name = product.name
    stack = da.stack([read_product(r.path, grid, dtype=kind) for r in readers])
    ds[name] = ds[name].copy(data=stack)
    with netCDF4.Dataset(out) as nc:
        ds.attrs["history"] = nc.history  # the one attribute with the clock in it
    reference = tmp_path / "reference.nc"
    ds.to_netcdf(reference, engine="h5netcdf", encoding=encoding, format="NETCDF4")
    ours, theirs = _tree(out), _tree(reference)
    assert ours == theirs
    with h5py.File(out, "r") as f, h5py.File(reference, "r") as g:
        a, b = f[name][...], g[name][...]
        assert a.dtype == b.dtype == np.dtype(kind)
        np.testing.assert_array_equal(a.view(f"u{a.dtype.itemsize}"), b.view(f"u{b.dtype.itemsize}"))  # bit for bit
        np.testing.assert_array_equal(a.view(f"u{a.dtype.itemsize}"), data[::-1].view(f"u{a.dtype.itemsize}"))


def test_chunks_stream_with_bounded_memory(tmp_path):
    """write_chunks asks for a chunk only when few are unwritten (never a whole date in memory)."""
    grid = utm_grid(64, 64, chunk=8)                      # 64 chunks per date
    paths = [write_raster(tmp_path / f"m{i}.tif", grid, np.full(grid.shape, i, np.float32)) for i in range(2)]
    out = tmp_path / "m.nc"
    write_stack(paths, [date(2026, 1, 1), date(2026, 1, 2)], out, grid=grid,
                product=product_info("net_radiation", "days"), cell_methods="time: mean")
    with h5py.File(out, "r") as f:
        np.testing.assert_array_equal(f["net_radiation"][:, 5, 7], [0, 1])
    with h5py.File(tmp_path / "k.h5", "w") as f:
        dset = f.create_dataset("v", shape=(2, 64, 64), dtype="f4", chunks=(1, 8, 8), compression="gzip",
                                compression_opts=4, shuffle=True, fillvalue=np.nan)
        lag = []

        def jobs():
            for k, (t, r, c) in enumerate(itertools.product(range(2), range(0, 64, 8), range(0, 64, 8))):
                lag.append(k - dset.id.get_num_chunks())  # chunks handed out but not yet written
                yield (t, r, c), lambda v=float(k): np.full((8, 8), v, np.float32)

        assert write_chunks(dset, jobs(), workers=2, per_worker=2) == 128
        assert max(lag) <= 4
        np.testing.assert_array_equal(dset[1, 56:, 56:], 127.0)
