"""Zone labels and statistics checked against point-in-polygon tests and NumPy on the same pixels."""

from __future__ import annotations

import csv
import json
import math
import tempfile
from pathlib import Path

import dask
import dask.array as da
import numpy as np
import pyogrio
import pytest
import shapely
from pyproj import Geod, Transformer
from rasterio.windows import Window

from helpers_rasters import utm_grid, write_raster
from scenario import make_scenario
from radledger.config import load_config
from radledger.errors import ConfigError
from radledger.io.lazy import read_product
from radledger.runner import run_config
from radledger.execution.events import RunEvents
from radledger.errors import InputError, OutputError
from radledger.grid import TargetGrid
from radledger.io.vectors import read_zones
from radledger.outputs.zones import (write_zone_csv, zone_labels, zone_statistics, zone_statistics_coverage,
                                     zones_off_the_grid)


@pytest.fixture(scope="module")
def grid():
    return utm_grid(40, 30, chunk=16)  # UTM 11N, 1200 m x 900 m, ragged chunks


def _full(grid):
    return Window(0, 0, grid.width, grid.height)


def _utm_ring_to_lonlat(grid, ring):
    to_ll = Transformer.from_crs(grid.crs, "EPSG:4326", always_xy=True)
    return [list(to_ll.transform(x, y)) for x, y in ring]


def _feature(props, ring):
    return {"type": "Feature", "properties": props, "geometry": {"type": "Polygon", "coordinates": [ring]}}


def _write_geojson(path, features):
    path.write_text(json.dumps({"type": "FeatureCollection", "features": features}))
    return path


@pytest.fixture(scope="module")
def lonlat_zones(grid, tmp_path_factory):
    """A GeoJSON in lon/lat (no CRS member) over the UTM grid: an irregular basin, one over the grid's
    east edge, one over the NaN part of the values, and one wholly outside the grid."""
    x0, y0, x1, y1 = grid.bounds
    rings = {
        "upper": [(x0 + 65, y1 - 70), (x0 + 520, y1 - 95), (x0 + 610, y1 - 400), (x0 + 260, y1 - 520),
                  (x0 + 95, y1 - 330), (x0 + 65, y1 - 70)],
        "edge": [(x1 - 310, y0 + 200), (x1 + 400, y0 + 200), (x1 + 400, y0 + 640), (x1 - 310, y0 + 640),
                 (x1 - 310, y0 + 200)],
        "dry": [(x0 + 40, y0 + 20), (x0 + 250, y0 + 20), (x0 + 250, y0 + 170), (x0 + 40, y0 + 170),
                (x0 + 40, y0 + 20)],
        "away": [(x1 + 5000, y1 + 5000), (x1 + 6000, y1 + 5000), (x1 + 6000, y1 + 6000), (x1 + 5000, y1 + 5000)],
    }
    features = [_feature({"basin_id": k, "name": k.title()}, _utm_ring_to_lonlat(grid, r)) for k, r in rings.items()]
    path = _write_geojson(tmp_path_factory.mktemp("zones") / "basins.geojson", features)
    return path, {k: shapely.Polygon(_utm_ring_to_lonlat(grid, r)) for k, r in rings.items()}


@pytest.fixture(scope="module")
def values(grid):
    """Smooth field with NaN holes; NaN over the 'dry' zone (the bottom-left corner)."""
    rows, cols = np.mgrid[0:grid.height, 0:grid.width]
    v = (300 + 4.0 * cols - 2.5 * rows + 10 * np.sin(rows * cols / 17.0)).astype(np.float32)
    v[(rows * 7 + cols * 3) % 11 == 0] = np.nan
    v[-7:, :10] = np.nan
    return v


def _expected_labels(grid, polygons_lonlat):
    """Independent membership: pixel centres -> lon/lat (pyproj), shapely point-in-polygon; later wins."""
    lon, lat = grid.lonlat(_full(grid))
    labels = np.zeros(grid.shape, np.int32)
    for i, poly in enumerate(polygons_lonlat, start=1):
        labels[shapely.contains_xy(poly, lon, lat)] = i
    return labels


def test_read_reprojects_and_keeps_order(grid, lonlat_zones):
    path, _ = lonlat_zones
    zones = read_zones(path, "basin_id", grid)
    assert zones.ids == ("upper", "edge", "dry", "away") and zones.id_field == "basin_id"
    assert zones.crs.to_epsg() == 32611
    x0, y0, x1, y1 = grid.bounds
    # the 'dry' box corners come back in UTM to well under a millimetre (pyproj round trip)
    assert np.allclose(shapely.bounds(zones.geometries[2]), (x0 + 40, y0 + 20, x0 + 250, y0 + 170), atol=1e-3)


def test_labels_follow_pixel_centres(grid, lonlat_zones):
    path, polys = lonlat_zones
    zones = read_zones(path, "basin_id", grid)
    labels = zone_labels(zones, grid)
    assert labels.dtype == np.int32 and labels.chunks == grid.chunks
    got = labels.compute(scheduler="sync")
    np.testing.assert_array_equal(got, _expected_labels(grid, polys.values()))
    assert set(np.unique(got)) == {0, 1, 2, 3}  # 'away' (4) has no pixel


def _shoelace_km2(ring):
    """Planar polygon area by the shoelace formula [km2] (ring in metres)."""
    x, y = np.asarray(ring, dtype=np.float64).T
    return abs(np.dot(x[:-1], y[1:]) - np.dot(x[1:], y[:-1])) / 2 / 1e6


def test_statistics_match_numpy(grid, lonlat_zones, values):
    path, polys = lonlat_zones
    zones = read_zones(path, "basin_id", grid)
    rows = zone_statistics(values, zone_labels(zones, grid), zones, grid)
    expected_labels = _expected_labels(grid, polys.values())
    assert [r["basin_id"] for r in rows] == ["upper", "edge", "dry", "away"]
    for i, row in enumerate(rows[:2], start=1):
        inside = values[expected_labels == i].astype(np.float64)
        ok = inside[~np.isnan(inside)]
        assert row["count"] == ok.size and isinstance(row["count"], int)
        assert row["mean"] == pytest.approx(ok.mean(), rel=1e-12)
        assert row["std"] == pytest.approx(ok.std(ddof=0), rel=1e-9)
        assert row["min"] == ok.min() and row["max"] == ok.max()
    upper = rows[0]   # wholly on the grid: coverage = valid / zone pixels
    inside = values[expected_labels == 1]
    assert upper["coverage"] == pytest.approx(np.isfinite(inside).sum() / inside.size, rel=1e-12)
    assert 0 < upper["coverage"] < 1  # the NaN holes
    # area_km2: the polygon's own area, shoelace over the UTM ring the fixture drew (0.1 %: lon/lat round trip)
    assert upper["area_km2"] == pytest.approx(_shoelace_km2(UPPER_RING(grid)), rel=1e-3)


def UPPER_RING(grid):
    x0, y0, x1, y1 = grid.bounds
    return [(x0 + 65, y1 - 70), (x0 + 520, y1 - 95), (x0 + 610, y1 - 400), (x0 + 260, y1 - 520),
            (x0 + 95, y1 - 330), (x0 + 65, y1 - 70)]


def test_edge_zone_counts_only_pixels_on_the_grid(grid, lonlat_zones, values):
    path, _ = lonlat_zones
    zones = read_zones(path, "basin_id", grid)
    edge = zone_statistics(values, zone_labels(zones, grid), zones, grid)[1]
    # hand count of centres inside: x > x1 - 310 -> columns 30..39 (10); 200 m <= y - y0 <= 640 m -> rows 9..22 (14)
    on_grid = values[9:23, 30:40]
    # the polygon by hand: 710 m x 440 m, of which 310 m x 440 m lie on the grid
    assert edge["area_km2"] == pytest.approx(0.710 * 0.440, rel=1e-3)
    assert edge["coverage"] == pytest.approx(np.isfinite(on_grid).sum() / 140 * 310 / 710, rel=1e-3)


def test_zone_without_valid_pixels_and_zone_off_grid(grid, lonlat_zones, values):
    path, _ = lonlat_zones
    zones = read_zones(path, "basin_id", grid)
    dry, away = zone_statistics(values, zone_labels(zones, grid), zones, grid)[2:]
    assert dry["count"] == 0 and dry["coverage"] == 0.0 and dry["area_km2"] > 0
    assert all(math.isnan(dry[k]) for k in ("mean", "min", "max", "std"))
    assert away["count"] == 0 and away["coverage"] == 0.0
    assert away["area_km2"] == pytest.approx(1.0 * 1.0 / 2, rel=1e-3)  # the 1 km right triangle, by hand
    assert zones_off_the_grid(zones, grid) == [("edge", pytest.approx(310 / 710, rel=1e-3)), ("away", 0.0)]


def test_dask_values_from_a_product_file(grid, lonlat_zones, values, tmp_path):
    path, _ = lonlat_zones
    zones = read_zones(path, "basin_id", grid)
    lazy = read_product(write_raster(tmp_path / "rn.tif", grid, values), grid)
    from_file = zone_statistics(lazy, zone_labels(zones, grid), zones, grid)
    from_numpy = zone_statistics(values, zone_labels(zones, grid), zones, grid)
    for a, b in zip(from_file, from_numpy):
        assert a.keys() == b.keys()
        for k in a:
            assert a[k] == b[k] or (isinstance(a[k], float) and math.isnan(a[k]) and math.isnan(b[k])), k


def test_labels_are_lazy(grid, lonlat_zones):
    path, _ = lonlat_zones
    zones = read_zones(path, "basin_id", grid)

    def refuse(*args, **kwargs):
        raise AssertionError("zone_labels computed while building")

    with dask.config.set(scheduler=refuse):
        zone_labels(zones, grid)


def test_overlap_later_zone_wins_and_gpkg_integer_ids(grid, tmp_path):
    x0, y0, x1, y1 = grid.bounds
    a = shapely.box(x0 + 100, y0 + 100, x0 + 700, y0 + 700)
    b = shapely.box(x0 + 400, y0 + 400, x0 + 1000, y0 + 800)
    to_merc = Transformer.from_crs(grid.crs, "EPSG:3857", always_xy=True)
    merc = [shapely.transform(g, lambda xy: np.column_stack(to_merc.transform(xy[:, 0], xy[:, 1]))) for g in (a, b)]
    path = tmp_path / "zones.gpkg"
    pyogrio.raw.write(path, geometry=shapely.to_wkb(merc), field_data=[np.array([7, 3], dtype=np.int64)],
                      fields=["code"], crs="EPSG:3857", driver="GPKG", geometry_type="Polygon")
    zones = read_zones(path, "code", grid)
    assert zones.ids == (7, 3) and all(type(i) is int for i in zones.ids)
    labels = zone_labels(zones, grid).compute(scheduler="sync")
    xs, ys = grid.pixel_centres(_full(grid))
    both = shapely.contains_xy(a, xs, ys) & shapely.contains_xy(b, xs, ys)
    assert both.any() and (labels[both] == 2).all()


def _geographic_case(tmp_path, weighting="centre"):
    grid = TargetGrid.from_bounds("EPSG:4326", 0.01, (10.0, 45.0, 10.3, 45.2), chunk=8)
    zone = shapely.box(10.05, 45.05, 10.25, 45.15)   # edges on pixel edges
    path = _write_geojson(tmp_path / "z.geojson", [_feature({"id_": "Z"}, list(zone.exterior.coords))])
    zones = read_zones(path, "id_", grid)
    ones = np.ones(grid.shape, np.float32)
    if weighting == "centre":
        row = zone_statistics(ones, zone_labels(zones, grid), zones, grid)[0]
    else:
        row = zone_statistics_coverage(ones, zones, grid)[0]
    labels = zone_labels(zones, grid).compute(scheduler="sync")
    return grid, row, labels, zone


@pytest.mark.parametrize("weighting", ["centre", "coverage"])
def test_geographic_grid_area_is_the_geodesic_area(tmp_path, weighting):
    grid, row, labels, zone = _geographic_case(tmp_path, weighting)
    # pyproj's ellipsoidal (Karney 2013) area of the box with its parallels traced by 2000 points a side
    dense = shapely.segmentize(zone, 0.0001)
    geodesic = abs(Geod(ellps="WGS84").geometry_area_perimeter(dense)[0]) / 1e6
    assert row["area_km2"] == pytest.approx(geodesic, rel=1e-6)
    assert row["count"] == labels.sum() == 20 * 10 and row["mean"] == pytest.approx(1.0) and row["std"] < 1e-6
    assert row["coverage"] == pytest.approx(1.0, rel=1e-5)   # every pixel valid, the whole zone on the grid


# --- coverage weighting ---------------------------------------------------------------------
def _shapely_fractions(grid, polygon):
    """Covered fraction of every pixel by shapely intersection, pixel by pixel (independent of exactextract)."""
    out = np.zeros(grid.shape)
    t = grid.transform
    for r in range(grid.height):
        for c in range(grid.width):
            cell = shapely.box(t.c + c * t.a, t.f + (r + 1) * t.e, t.c + (c + 1) * t.a, t.f + r * t.e)
            out[r, c] = shapely.intersection(polygon, cell).area / cell.area
    return out


def test_coverage_weighted_statistics_match_shapely_fractions(grid, lonlat_zones, values):
    path, _ = lonlat_zones
    zones = read_zones(path, "basin_id", grid)
    rows = zone_statistics_coverage(da.from_array(values, chunks=16), zones, grid)
    assert [r["basin_id"] for r in rows] == ["upper", "edge", "dry", "away"]
    x0, y0, x1, _ = grid.bounds
    areas = {"upper": _shoelace_km2(UPPER_RING(grid)), "edge": 0.710 * 0.440}   # the fixture's rings, by hand
    for row, polygon in zip(rows[:2], zones.geometries[:2]):
        f = _shapely_fractions(grid, polygon)
        ok = (f > 0) & np.isfinite(values)
        w, v = f[ok], values[ok].astype(np.float64)
        mean = np.sum(w * v) / np.sum(w)
        assert row["mean"] == pytest.approx(mean, rel=1e-4)
        assert row["std"] == pytest.approx(np.sqrt(np.sum(w * (v - mean) ** 2) / np.sum(w)), rel=1e-4)
        assert (row["min"], row["max"]) == (v.min(), v.max()) and row["count"] == ok.sum()
        assert row["area_km2"] == pytest.approx(areas[row["basin_id"]], rel=1e-3)
        assert row["coverage"] == pytest.approx(np.sum(w) * 900 / 1e6 / areas[row["basin_id"]], rel=1e-3)
    dry, away = rows[2:]
    assert dry["count"] == 0 and math.isnan(dry["mean"]) and dry["coverage"] == 0.0
    assert away["count"] == 0 and away["coverage"] == 0.0 and away["area_km2"] > 0


@pytest.mark.parametrize("weighting", ["centre", "coverage"])
def test_zone_half_off_the_grid_has_coverage_one_half(grid, tmp_path, weighting):
    x0, y0, x1, y1 = grid.bounds
    ring = [(x1 - 300, y0 + 300), (x1 + 300, y0 + 300), (x1 + 300, y0 + 600), (x1 - 300, y0 + 600),
            (x1 - 300, y0 + 300)]
    path = _write_geojson(tmp_path / "half.geojson", [_feature({"id": "half"}, _utm_ring_to_lonlat(grid, ring))])
    zones = read_zones(path, "id", grid)
    full = np.full(grid.shape, 250.0, np.float32)   # every pixel valid
    if weighting == "centre":
        row = zone_statistics(full, zone_labels(zones, grid), zones, grid)[0]
    else:
        row = zone_statistics_coverage(full, zones, grid)[0]
    assert row["coverage"] == pytest.approx(0.5, abs=2e-3)       # 300 m of 600 m lie on the grid (by hand)
    assert row["area_km2"] == pytest.approx(0.6 * 0.3, rel=1e-3)  # the whole 600 m x 300 m box
    assert row["mean"] == pytest.approx(250.0)
    assert zones_off_the_grid(zones, grid) == [("half", pytest.approx(0.5, abs=2e-3))]


def test_run_warns_of_a_zone_off_the_grid_and_writes_coverage_tables(tmp_path):
    sc = make_scenario(tmp_path, shape=(64, 80), chunk=32)
    x0, y0 = sc.transform.c, sc.transform.f
    x1, ymin = x0 + 80 * 30, y0 - 64 * 30
    rings = {"inner": [(x0 + 100, y0 - 100), (x0 + 1000, y0 - 150), (x0 + 800, y0 - 1200), (x0 + 100, y0 - 100)],
             "half": [(x1 - 400, ymin + 200), (x1 + 400, ymin + 200), (x1 + 400, ymin + 900), (x1 - 400, ymin + 900),
                      (x1 - 400, ymin + 200)]}
    to_ll = Transformer.from_crs("EPSG:32611", "EPSG:4326", always_xy=True)
    _write_geojson(tmp_path / "basins.geojson", [_feature({"basin": k}, [list(to_ll.transform(*p)) for p in r])
                                                 for k, r in rings.items()])
    sc.write_config(**{"zones.path": "basins.geojson", "zones.id": "basin", "zones.weighting": "coverage"})
    class Heard(RunEvents):
        said: list = []

        def warn(self, text):
            self.said.append(text)

    run_config(load_config(sc.config), events=Heard())
    assert len(Heard.said) == 1 and "zone 'half' has only 50.0% of its area on the grid" in Heard.said[0]
    with open(tmp_path / "out" / "zones" / "net_radiation_20260714T1810.csv", newline="") as fh:
        table = {r["basin"]: r for r in csv.DictReader(fh)}
    assert set(table) == {"inner", "half"}
    # the 800 m x 700 m box, half of it on the grid, every pixel there valid (by hand)
    assert float(table["half"]["coverage"]) == pytest.approx(0.5, abs=1e-3)
    assert float(table["half"]["area_km2"]) == pytest.approx(0.8 * 0.7, rel=1e-3)


def test_unknown_weighting_is_a_config_error(tmp_path):
    sc = make_scenario(tmp_path, shape=(32, 32), chunk=32)
    (tmp_path / "z.geojson").write_text(json.dumps({"type": "FeatureCollection", "features": []}))
    sc.write_config(**{"zones.path": "z.geojson", "zones.id": "basin", "zones.weighting": "area"})
    with pytest.raises(ConfigError, match=r"zones\.weighting: unknown value 'area'.*valid: centre, coverage"):
        load_config(sc.config)


# --- CSV -------------------------------------------------------------------------------------
def test_csv_columns_numbers_and_atomic(grid, lonlat_zones, values, tmp_path):
    path, _ = lonlat_zones
    zones = read_zones(path, "basin_id", grid)
    rows = zone_statistics(values, zone_labels(zones, grid), zones, grid)
    out = tmp_path / "net_radiation_20260714.csv"
    out.write_text("old contents\n")
    write_zone_csv(rows, out, "basin_id")
    assert sorted(p.name for p in tmp_path.iterdir()) == [out.name]  # no temporary left behind
    with open(out, newline="") as fh:
        table = list(csv.reader(fh))
    assert table[0] == ["basin_id", "mean", "min", "max", "std", "count", "coverage", "area_km2"]
    assert [r[0] for r in table[1:]] == list(zones.ids)
    for row, line in zip(rows, table[1:]):
        assert line[5] == str(row["count"])
        for k, text in zip(("mean", "min", "max", "std"), line[1:5]):
            if math.isnan(row[k]):
                assert text == ""
            else:
                assert "e" not in text and float(text) == pytest.approx(row[k], rel=5e-6)  # 6 significant digits
    assert table[3][1:5] == ["", "", "", ""] and table[3][5] == "0"  # the 'dry' zone


def test_csv_number_format():
    rows = [{"z": 1, "mean": 512.3456789, "min": 0.000123456789, "max": 1234567.89, "std": math.nan,
             "count": 12, "coverage": 1.0, "area_km2": 0.25}]
    with tempfile.TemporaryDirectory() as d:
        out = write_zone_csv(rows, Path(d) / "z.csv", "z")
        line = out.read_text().splitlines()[1]
    assert line == "1,512.346,0.000123457,1234570,,12,1,0.25"  # rounding to 6 significant digits by hand


def test_csv_unwritable_folder(tmp_path):
    with pytest.raises(OutputError, match=r"missing[/\\]z\.csv: cannot write there .*output directory exists"):
        write_zone_csv([], tmp_path / "missing" / "z.csv", "id")


# --- errors ----------------------------------------------------------------------------------
def _box_feature(props, grid, dx=100):
    x0, y0, _, _ = grid.bounds
    ring = [(x0 + dx, y0 + dx), (x0 + 3 * dx, y0 + dx), (x0 + 3 * dx, y0 + 3 * dx), (x0 + dx, y0 + dx)]
    return _feature(props, _utm_ring_to_lonlat(grid, ring))


def test_missing_file(grid, tmp_path):
    with pytest.raises(InputError, match=r"zones\.path: .*nowhere\.geojson: file not found; check the path"):
        read_zones(tmp_path / "nowhere.geojson", "basin_id", grid)


def test_unreadable_file(grid, tmp_path):
    bad = tmp_path / "junk.geojson"
    bad.write_text("this is not json")
    with pytest.raises(InputError, match=r"junk\.geojson: cannot be read as a vector file"):
        read_zones(bad, "basin_id", grid)


def test_missing_id_field_lists_fields(grid, lonlat_zones):
    path, _ = lonlat_zones
    with pytest.raises(InputError, match=r"zones\.id: .*basins\.geojson has no field 'basin'; "
                                         r"available fields: basin_id, name$"):
        read_zones(path, "basin", grid)


def test_duplicate_ids(grid, tmp_path):
    path = _write_geojson(tmp_path / "dup.geojson", [_box_feature({"id": "A"}, grid), _box_feature({"id": "B"}, grid),
                                                     _box_feature({"id": "A"}, grid)])
    with pytest.raises(InputError, match=r"dup\.geojson: duplicate id values 'A'; every zone needs its own id"):
        read_zones(path, "id", grid)


def test_empty_id(grid, tmp_path):
    features = [_box_feature({"id": "A"}, grid), _box_feature({"id": None}, grid)]
    path = _write_geojson(tmp_path / "noid.geojson", features)
    with pytest.raises(InputError, match=r"noid\.geojson: feature 2 has no id"):
        read_zones(path, "id", grid)


def test_no_polygons(grid, tmp_path):
    point = {"type": "Feature", "properties": {"id": 1}, "geometry": {"type": "Point", "coordinates": [-117, 37.9]}}
    path = _write_geojson(tmp_path / "points.geojson", [point])
    with pytest.raises(InputError, match=r"points\.geojson: has no polygons \(geometry: Point\); zones must be "):
        read_zones(path, "id", grid)


def test_no_features(grid, tmp_path):
    path = tmp_path / "empty.gpkg"
    pyogrio.raw.write(path, geometry=np.array([], dtype=object), field_data=[np.array([], dtype=np.int64)],
                      fields=["id"], crs="EPSG:4326", driver="GPKG", geometry_type="Polygon")
    with pytest.raises(InputError, match=r"empty\.gpkg: has no features; it needs at least one polygon"):
        read_zones(path, "id", grid)


def test_self_intersecting_polygon_is_repaired(grid, tmp_path):
    x0, y0, _, _ = grid.bounds
    bowtie = [(x0 + 100, y0 + 100), (x0 + 400, y0 + 400), (x0 + 400, y0 + 100), (x0 + 100, y0 + 400),
              (x0 + 100, y0 + 100)]
    path = _write_geojson(tmp_path / "bowtie.geojson", [_feature({"id": "X"}, _utm_ring_to_lonlat(grid, bowtie))])
    zones = read_zones(path, "id", grid)
    assert zones.geometries[0].is_valid
    assert shapely.area(zones.geometries[0]) == pytest.approx(2 * 0.5 * 300 * 150, rel=1e-3)  # two triangles


def test_unrepairable_polygon(grid, tmp_path):
    flat = [(-116.999, 37.941), (-116.998, 37.941), (-116.997, 37.941), (-116.999, 37.941)]  # zero area
    path = _write_geojson(tmp_path / "flat.geojson", [_feature({"id": "F"}, flat)])
    with pytest.raises(InputError, match=r"flat\.geojson: zone 'F' has an invalid polygon .* cannot be repaired"):
        read_zones(path, "id", grid)


def test_zones_off_the_grid(grid, tmp_path):
    far = utm_grid(40, 30, x0=600_000.0)
    path = _write_geojson(tmp_path / "far.geojson", [_box_feature({"id": "A"}, far)])
    with pytest.raises(InputError, match=r"far\.geojson: no zone overlaps the grid .*check the file's CRS "
                                         r"\(EPSG:4326\) and the grid bounds"):
        read_zones(path, "id", grid)


@pytest.mark.filterwarnings("ignore:'crs' was not provided")
def test_gpkg_without_crs(grid, tmp_path):
    path = tmp_path / "nocrs.gpkg"
    x0, y0, _, _ = grid.bounds
    pyogrio.raw.write(path, geometry=shapely.to_wkb([shapely.box(x0, y0, x0 + 300, y0 + 300)]),
                      field_data=[np.array([1])], fields=["id"], driver="GPKG", geometry_type="Polygon")
    with pytest.raises(InputError, match=r"nocrs\.gpkg: has no CRS; assign one"):
        read_zones(path, "id", grid)
