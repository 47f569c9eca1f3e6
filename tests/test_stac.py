"""The STAC catalog: opened with pystac, every asset on disk, projection fields equal to the grid."""

from __future__ import annotations

import datetime as dt
import json
import shutil

import pystac
import pytest
from pyproj import Transformer

from radledger.config import load_config
from radledger.kinds import TimeKind
from radledger.outputs.stac import DatedProducts, write_catalog
from radledger.runner import run_config

from helpers_outputs import two_by_two
from helpers_rasters import utm_grid
from scenario import RES, X0, Y0


@pytest.fixture(scope="module")
def run_dir(tmp_path_factory):
    sc = two_by_two(tmp_path_factory.mktemp("stac"), stac=True)
    sc.write_config(**{"methods.scene_to_day": "shortwave-ratio"})   # a scene's own daily estimate too
    report = run_config(load_config(sc.config))
    return sc, sc.folder / "out", report


def _items(catalog_path):
    catalog = pystac.Catalog.from_file(str(catalog_path))
    (collection,) = list(catalog.get_children())
    return collection, {item.id: item for item in collection.get_items()}


def test_catalog_opens_and_every_asset_exists(run_dir):
    _, out, report = run_dir
    assert out / "stac" / "catalog.json" in report.written
    collection, items = _items(out / "stac" / "catalog.json")
    assert isinstance(collection, pystac.Collection)
    assert sorted(items) == ["day-20260714", "day-20260715", "scene-20260714T1810", "scene-20260730T1755"]
    for item in items.values():
        scene_day = {"net_radiation_from_scene"} if item.id.startswith("scene-") else set()
        assert set(item.assets) == {"net_radiation", "net_shortwave", "net_longwave", "quality"} | scene_day
        for asset in item.assets.values():
            assert not asset.href.startswith("/")
            assert (out / "stac").joinpath(asset.get_absolute_href()).resolve().is_file()
        raw = json.loads((out / "stac" / collection.id / item.id / f"{item.id}.json").read_text())
        assert all(a["href"].startswith("../../../") for a in raw["assets"].values())   # relative to the item


def test_projection_fields_match_the_grid(run_dir):
    sc, out, _ = run_dir
    _, items = _items(out / "stac" / "catalog.json")
    h, w = sc.shape
    for item in items.values():
        p = item.properties
        assert p["proj:code"] == "EPSG:32611" and "UTM zone 11N" in p["proj:wkt2"]   # the fixture grid
        assert p["proj:shape"] == [h, w]
        assert p["proj:transform"] == [RES, 0.0, X0, 0.0, -RES, Y0]
        assert p["proj:bbox"] == [X0, Y0 - h * RES, X0 + w * RES, Y0]
        # the grid's centre, by pyproj, lies inside the lon/lat bbox
        lon, lat = Transformer.from_crs("EPSG:32611", "EPSG:4326", always_xy=True).transform(
            X0 + w * RES / 2, Y0 - h * RES / 2)
        assert item.bbox[0] < lon < item.bbox[2] and item.bbox[1] < lat < item.bbox[3]


def test_times_raster_bands_and_roles(run_dir):
    _, out, _ = run_dir
    collection, items = _items(out / "stac" / "catalog.json")
    scene, day = items["scene-20260714T1810"], items["day-20260714"]
    assert scene.datetime == dt.datetime(2026, 7, 14, 18, 10, tzinfo=dt.timezone.utc)
    assert day.properties["start_datetime"] == "2026-07-14T00:00:00Z"
    assert day.properties["end_datetime"] == "2026-07-15T00:00:00Z"
    rn = scene.assets["net_radiation"].to_dict()
    assert rn["roles"] == ["data"] and rn["type"] == pystac.MediaType.COG
    # raster extension: the stored type and no-value, and the CF unit of each kind
    band = rn["raster:bands"][0]
    assert (band["data_type"], band["nodata"], band["unit"]) == ("float32", "nan", "W m-2")
    assert day.assets["net_radiation"].to_dict()["raster:bands"][0]["unit"] == "MJ m-2 day-1"
    assert scene.assets["net_radiation_from_scene"].to_dict()["raster:bands"][0]["unit"] == "MJ m-2 day-1"
    q = day.assets["quality"].to_dict()
    assert q["roles"] == ["metadata", "quality"]
    assert q["raster:bands"][0]["data_type"] == "uint8" and q["raster:bands"][0]["nodata"] == 255
    interval = collection.extent.temporal.intervals[0]
    assert interval == [dt.datetime(2026, 7, 14, tzinfo=dt.timezone.utc),
                        dt.datetime(2026, 7, 30, 17, 55, tzinfo=dt.timezone.utc)]


def test_catalog_moves_with_the_products(run_dir, tmp_path):
    _, out, _ = run_dir
    moved = tmp_path / "elsewhere"
    shutil.copytree(out, moved)
    _, items = _items(moved / "stac" / "catalog.json")
    for item in items.values():
        for asset in item.assets.values():
            path = asset.get_absolute_href()
            assert path.startswith(str(moved)) and (moved / path[len(str(moved)) + 1:]).is_file()


def test_rewrite_drops_dates_no_longer_there(tmp_path):
    grid = utm_grid(8, 6, chunk=16)
    for d in ("20260714", "20260715"):
        (tmp_path / "days").mkdir(exist_ok=True)
        (tmp_path / "days" / f"net_radiation_{d}.tif").write_bytes(b"")
    both = [DatedProducts(TimeKind.DAYS, dt.date(2026, 7, d), {"net_radiation": tmp_path / "days" /
                                                               f"net_radiation_202607{d}.tif"}) for d in (14, 15)]
    write_catalog(tmp_path, grid, both)
    path = write_catalog(tmp_path, grid, both[:1], title="again")
    _, items = _items(path)
    assert list(items) == ["day-20260714"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["days", "stac"]   # no staging folder left
