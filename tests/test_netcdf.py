"""CF-NetCDF stacks: reopened by xarray (decode_cf) and by GDAL, attributes against the CF tables.

CF standard-name table values below were read from the table's XML source,
cf-convention/cf-convention.github.io: Data/cf-standard-names/current/src/cf-standard-name-table.xml
(stored copy, version 57): <entry id=...><canonical_units>.
"""

from __future__ import annotations

from datetime import date, datetime, timedelta, timezone

import netCDF4
import numpy as np
import pytest
import rasterio
import xarray as xr
from pyproj import CRS

from helpers_rasters import utm_grid, write_raster
from radledger.errors import InputError, OutputError
from radledger.grid import TargetGrid
from radledger.outputs.netcdf import write_stack
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
    grid, _, days, _ = days_stack
    paths = [write_raster(tmp_path / "a.tif", grid, np.ones(grid.shape, np.float32))]
    target = tmp_path / "stack.nc"
    target.write_bytes(b"previous")

    def broken(self, path, **kwargs):
        with open(path, "wb") as fh:
            fh.write(b"partial")
        raise OSError("disk full")

    monkeypatch.setattr(xr.Dataset, "to_netcdf", broken)
    with pytest.raises(OSError, match="disk full"):
        write_stack(paths, days[:1], target, grid=grid, product=product_info("net_radiation", "days"),
                    cell_methods="time: mean")
    assert target.read_bytes() == b"previous"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.tif", "stack.nc"]


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
