"""radledger.open_products: a lazy Dataset over the written COGs, checked against rasterio reads."""

from __future__ import annotations

import shutil

import dask.array as da
import numpy as np
import pytest
import rasterio
import shapely
from pyproj import CRS

import radledger
from radledger.config import load_config
from radledger.errors import InputError
from radledger.runner import run_config

from helpers_outputs import two_by_two


@pytest.fixture(scope="module")
def run_dir(tmp_path_factory):
    sc = two_by_two(tmp_path_factory.mktemp("cube"))
    run_config(load_config(sc.config))
    return sc, sc.folder / "out"


def _read(path):
    with rasterio.open(path) as src:   # the reference reader: rasterio, band 1 as stored
        return src.read(1)


def test_days_dataset_layout_and_cf_attributes(run_dir):
    sc, out = run_dir
    ds = radledger.open_products(out, kind="days")
    assert list(ds.data_vars) == ["net_radiation", "net_shortwave", "net_longwave", "quality"]
    assert ds.net_radiation.dims == ("time", "y", "x") and ds.net_radiation.shape == (2, *sc.shape)
    # the two configured dates at 00:00 UTC, plus their dates as text
    assert list(ds.time.values) == [np.datetime64("2026-07-14T00:00"), np.datetime64("2026-07-15T00:00")]
    assert list(ds.date.values) == ["2026-07-14", "2026-07-15"]
    rn = ds.net_radiation.attrs
    # CF standard name table: surface_net_downward_radiative_flux; FAO-56 daily unit MJ m-2 day-1
    assert rn["standard_name"] == "surface_net_downward_radiative_flux" and rn["units"] == "MJ m-2 day-1"
    # CF standard name table: net longwave kept as a loss maps to the upward name
    assert ds.net_longwave.attrs["standard_name"] == "surface_net_upward_longwave_flux"
    assert "long_name" in rn and ds.quality.dtype == np.uint8
    assert ds.quality.attrs["flag_meanings"].split()[0] == "input_missing"
    assert ds.quality.encoding["_FillValue"] == 255 and np.isnan(ds.net_radiation.encoding["_FillValue"])


def test_scene_times_crs_and_transform(run_dir):
    sc, out = run_dir
    ds = radledger.open_products(out, kind="scenes")
    # the scene times of the fixture config, UTC
    assert list(ds.time.values) == [np.datetime64("2026-07-14T18:10"), np.datetime64("2026-07-30T17:55")]
    assert "date" not in ds.coords
    assert ds.net_radiation.attrs["units"] == "W m-2"
    assert CRS.from_user_input(ds.rio.crs) == CRS.from_epsg(32611)   # the fixture grid: UTM 11N
    assert ds.rio.transform().almost_equals(sc.transform)
    assert ds.net_radiation.encoding["grid_mapping"] == "spatial_ref"
    assert ds.x.attrs["standard_name"] == "projection_x_coordinate"   # CF coordinate names


@pytest.mark.parametrize("kind", ["days", "scenes"])
def test_values_equal_the_cogs(run_dir, kind):
    _, out = run_dir
    ds = radledger.open_products(out, kind=kind, chunks=48)
    for name in ds.data_vars:
        stack = ds[name].values
        for i, stamp in enumerate(sorted({p.stem.rsplit("_", 1)[1] for p in (out / kind).glob("*.tif")})):
            np.testing.assert_array_equal(stack[i], _read(out / kind / f"{name}_{stamp}.tif"))


def test_opening_reads_no_pixel(run_dir, no_compute):
    _, out = run_dir
    ds = radledger.open_products(out, kind="days", chunks=32)
    assert all(isinstance(v.data, da.Array) for v in ds.data_vars.values())
    assert ds.net_radiation.data.chunks[1:] == ((32, 32, 32), (32, 32, 32, 16))


def test_product_missing_on_a_date_is_a_no_value_slice(run_dir, tmp_path):
    _, out = run_dir
    copy = tmp_path / "out"
    shutil.copytree(out, copy)
    (copy / "days" / "net_shortwave_20260715.tif").unlink()
    (copy / "days" / "quality_20260714.tif").unlink()
    ds = radledger.open_products(copy, kind="days", products=["net_shortwave", "quality"])
    assert list(ds.data_vars) == ["net_shortwave", "quality"] and ds.sizes["time"] == 2
    assert np.isnan(ds.net_shortwave.isel(time=1).values).all()
    assert (ds.quality.isel(time=0).values == 255).all() and ds.quality.dtype == np.uint8


def test_clip_to_a_sub_basin_and_time_series(run_dir):
    """The README's notebook example: clip with rioxarray, mean over the basin per date."""
    sc, out = run_dir
    ds = radledger.open_products(out, kind="scenes")
    x0, y0 = sc.transform.c, sc.transform.f
    basin = shapely.Polygon([(x0 + 300, y0 - 200), (x0 + 2500, y0 - 350), (x0 + 1800, y0 - 2200),
                             (x0 + 400, y0 - 1500)])
    series = ds.net_radiation.rio.clip([basin], ds.rio.crs).mean(dim=("y", "x")).values
    # reference: pixel centres inside the polygon (shapely), rasterio read, NumPy mean
    xs, ys = np.meshgrid(ds.x.values, ds.y.values)
    inside = shapely.contains_xy(basin, xs, ys)
    for value, stamp in zip(series, ("20260714T1810", "20260730T1755")):
        expected = np.nanmean(_read(out / "scenes" / f"net_radiation_{stamp}.tif")[inside].astype(np.float64))
        assert value == pytest.approx(expected, rel=1e-5)


def test_nothing_there_and_unknown_product(tmp_path, run_dir):
    with pytest.raises(InputError, match=r"no days products found"):
        radledger.open_products(tmp_path, kind="days")
    with pytest.raises(ValueError, match=r"unknown scenes product 'clear_sky_shortwave'"):
        radledger.open_products(run_dir[1], kind="scenes", products=["clear_sky_shortwave"])
    with pytest.raises(ValueError):
        radledger.open_products(run_dir[1], kind="weeks")
