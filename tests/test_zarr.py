"""CF Zarr stores: read back with xarray.open_zarr and compared with the COGs (rasterio reads)."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest
import rasterio
import xarray as xr
from pyproj import CRS

from radledger.config import load_config
from radledger.errors import OutputError
from radledger.outputs.zarr import HASHES_ATTR, ZarrProductStore
from radledger.runner import run_config

from helpers_outputs import two_by_two
from helpers_rasters import utm_grid


@pytest.fixture(scope="module")
def run_dir(tmp_path_factory):
    sc = two_by_two(tmp_path_factory.mktemp("zarr"), zarr=True)
    sc.write_config(**{"methods.scene_to_day": "shortwave-ratio"})   # kept out of the day store
    report = run_config(load_config(sc.config))
    return sc, sc.folder / "out", report


def _read(path):
    with rasterio.open(path) as src:
        return src.read(1), src.tags()


def _chunk_files(store):
    return {p: p.stat().st_mtime_ns for p in store.rglob("*") if p.is_file() and not p.name.startswith(".z")}


@pytest.mark.parametrize("kind,stamps", [("scenes", ("20260714T1810", "20260730T1755")),
                                         ("days", ("20260714", "20260715"))])
def test_store_equals_the_cogs(run_dir, kind, stamps):
    _, out, report = run_dir
    store = out / "zarr" / f"{kind}.zarr"
    assert store in report.written
    ds = xr.open_zarr(store, mask_and_scale=False)
    assert set(ds.data_vars) == {"net_radiation", "net_shortwave", "net_longwave", "quality"}
    for name in ds.data_vars:
        for i, stamp in enumerate(stamps):
            expected, tags = _read(out / kind / f"{name}_{stamp}.tif")
            np.testing.assert_array_equal(ds[name].isel(time=i).values, expected)
            assert ds.attrs[HASHES_ATTR][name][i] == tags["settings_hash"]


def test_cf_attributes_time_and_crs(run_dir):
    sc, out, _ = run_dir
    days = xr.open_zarr(out / "zarr" / "days.zarr")
    rn = days.net_radiation
    # CF standard name table; FAO-56 daily unit
    assert rn.attrs["standard_name"] == "surface_net_downward_radiative_flux"
    assert rn.attrs["units"] == "MJ m-2 day-1" and rn.attrs["grid_mapping"] == "spatial_ref"
    assert list(days.time.values) == [np.datetime64("2026-07-14T00:00"), np.datetime64("2026-07-15T00:00")]
    assert list(days.date.values) == ["2026-07-14", "2026-07-15"]
    assert CRS.from_wkt(days.spatial_ref.attrs["crs_wkt"]) == CRS.from_epsg(32611)   # the fixture grid
    assert CRS.from_user_input(days.rio.crs) == CRS.from_epsg(32611)                # rioxarray reads it too
    assert days.rio.transform().almost_equals(sc.transform)
    assert days.quality.encoding["_FillValue"] == 255 and days.quality.attrs["flag_meanings"]
    scenes = xr.open_zarr(out / "zarr" / "scenes.zarr")
    assert scenes.net_radiation.attrs["units"] == "W m-2"
    assert list(scenes.time.values) == [np.datetime64("2026-07-14T18:10"), np.datetime64("2026-07-30T17:55")]
    # chunks: 16 dates (here all 2) by 512 x 512 pixels, clipped to the 96 x 112 grid
    assert scenes.net_radiation.encoding["chunks"] == (2, 96, 112)


def test_rerun_with_unchanged_products_rewrites_nothing(run_dir):
    sc, out, _ = run_dir
    before = {kind: _chunk_files(out / "zarr" / f"{kind}.zarr") for kind in ("scenes", "days")}
    report = run_config(load_config(sc.config))
    assert {out / "zarr" / "scenes.zarr", out / "zarr" / "days.zarr"} <= set(report.skipped)
    for kind in ("scenes", "days"):
        assert _chunk_files(out / "zarr" / f"{kind}.zarr") == before[kind]


@pytest.fixture
def small(tmp_path):
    grid = utm_grid(40, 30, chunk=32)
    times = [dt.datetime(2026, 7, d, 18, 10, tzinfo=dt.timezone.utc) for d in (14, 15, 16)]
    store = ZarrProductStore(tmp_path / "scenes.zarr", grid, "scenes", times, ["net_radiation", "quality"],
                             time_chunk=2, space_chunk=16).open()
    return grid, times, store


def test_write_date_by_region_and_skip_by_hash(small):
    grid, times, store = small
    rng = np.random.default_rng(1)
    a = rng.normal(400, 50, grid.shape).astype(np.float32)   # fixture values
    q = rng.integers(0, 64, grid.shape).astype(np.uint8)
    assert store.write_date(2, {"net_radiation": a, "quality": q}, hashes={"net_radiation": "h1", "quality": "h1"}) \
        == ["net_radiation", "quality"]
    assert store.write_date(store.index(times[2]), {"net_radiation": a * 0}, hashes={"net_radiation": "h1"}) == []
    ds = xr.open_zarr(store.path, mask_and_scale=False)
    np.testing.assert_array_equal(ds.net_radiation.isel(time=2).values, a)
    np.testing.assert_array_equal(ds.quality.isel(time=2).values, q)
    assert np.isnan(ds.net_radiation.isel(time=slice(0, 2)).values).all()     # never written: no value
    assert (ds.quality.isel(time=0).values == 255).all()
    assert ds.net_radiation.encoding["chunks"] == (2, 16, 16)
    assert store.write_date(2, {"net_radiation": a + 1}, hashes={"net_radiation": "h2"}) == ["net_radiation"]
    np.testing.assert_array_equal(xr.open_zarr(store.path).net_radiation.isel(time=2).values, a + 1)
    # a store opened again for the same layout keeps the hashes; overwrite forgets them
    again = ZarrProductStore(store.path, grid, "scenes", times, ["net_radiation", "quality"],
                             time_chunk=2, space_chunk=16).open()
    assert again.is_current(2, "net_radiation", "h2") and not again.is_current(2, "quality", "h2")
    again.open(overwrite=True)
    assert not again.is_current(2, "net_radiation", "h2")


def test_other_layout_makes_a_new_store_and_foreign_folder_is_refused(small, tmp_path):
    grid, times, store = small
    store.write_date(0, {"net_radiation": np.ones(grid.shape, np.float32)}, hashes={"net_radiation": "x"})
    longer = ZarrProductStore(store.path, grid, "scenes", times + [times[-1] + dt.timedelta(days=1)],
                              ["net_radiation"]).open()
    ds = xr.open_zarr(longer.path)
    assert ds.sizes["time"] == 4 and list(ds.data_vars) == ["net_radiation"]
    assert np.isnan(ds.net_radiation.values).all()
    foreign = tmp_path / "mine.zarr"
    foreign.mkdir()
    (foreign / "notes.txt").write_text("not a store")
    with pytest.raises(OutputError, match=r"mine\.zarr: exists and is not a radledger Zarr store"):
        ZarrProductStore(foreign, grid, "scenes", times, ["net_radiation"]).open()
    with pytest.raises(KeyError, match="net_longwave"):
        store.write_date(0, {"net_longwave": np.ones(grid.shape, np.float32)})
