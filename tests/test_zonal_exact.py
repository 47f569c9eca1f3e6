"""Coverage-weighted zone statistics (radledger.zonal_exact) against geometry worked by hand,
brute-force shapely intersections, closed-form areas and unit definitions."""

from __future__ import annotations

import math

import numpy as np
import pytest
import shapely
from affine import Affine

from radledger.outputs.zonal_exact import (
    ZoneMoments,
    coverage_fractions,
    fold_window,
    merge_zone_moments,
    polygon_area_km2,
)

# A UTM-like 30 m window (invented fixture grid).
X0, Y0, RES = 500000.0, 4100000.0, 30.0
T30 = Affine(RES, 0.0, X0, 0.0, -RES, Y0)


def dense(cov, zone):
    """The sparse fractions of one zone as a dense window."""
    out = np.zeros(cov.shape)
    sel = cov.zone == zone
    out.ravel()[cov.pixel[sel]] = cov.fraction[sel]
    return out


def brute_fractions(geom, transform, shape):
    """Covered fraction of every pixel by shapely intersection (independent of exactextract)."""
    h, w = shape
    out = np.zeros(shape)
    for r in range(h):
        for c in range(w):
            x0, y1 = transform * (c, r)
            x1, y0 = transform * (c + 1, r + 1)
            cell = shapely.box(x0, y0, x1, y1)
            out[r, c] = shapely.intersection(geom, cell).area / cell.area
    return out


def test_square_offset_by_half_pixels_has_exact_edge_and_corner_fractions():
    # Closed-form geometry: a square whose edges lie on pixel mid-lines covers
    # half of each edge pixel, a quarter of each corner pixel, all of the inside.
    square = shapely.box(X0 + 1.5 * RES, Y0 - 8.5 * RES, X0 + 4.5 * RES, Y0 - 1.5 * RES)
    cov = coverage_fractions([square], T30, (10, 10))
    cols = np.array([0, 0.5, 1, 1, 0.5, 0, 0, 0, 0, 0])
    rows = np.array([0, 0.5, 1, 1, 1, 1, 1, 1, 0.5, 0])
    np.testing.assert_array_equal(dense(cov, 0), np.outer(rows, cols))
    assert cov.n_zones == 1 and cov.shape == (10, 10)


def test_circle_fractions_add_up_to_the_circle_area():
    # Closed form: area of a circle = pi r^2; the 1024-gon differs from it by ~6e-6 (relative).
    r = 10.3 * RES
    circle = shapely.Point(X0 + 20.37 * RES, Y0 - 19.81 * RES).buffer(r, quad_segs=256)
    cov = coverage_fractions([circle], T30, (40, 40))
    covered_area = cov.fraction.sum() * RES * RES
    assert covered_area == pytest.approx(math.pi * r * r, rel=1e-3)
    assert np.all((cov.fraction > 0) & (cov.fraction <= 1))


def _brute_moments(geom, transform, values, cell_weight):
    """Reference moments from shapely intersections and numpy (no radledger code)."""
    f = brute_fractions(geom, transform, values.shape)
    w = f * cell_weight
    ok = ~np.isnan(values) & (f > 0)
    ref = {"covered": w.sum(), "weight": w[ok].sum(), "ok": ok, "w": w}
    if ok.any():
        ref["mean"] = np.average(values[ok], weights=w[ok])
        ref["m2"] = np.sum(w[ok] * (values[ok] - ref["mean"]) ** 2)
        ref["min"], ref["max"] = values[ok].min(), values[ok].max()
    return ref


def _fixture_values(shape, seed):
    rng = np.random.default_rng(seed)
    values = rng.normal(350.0, 80.0, shape)
    values[rng.random(shape) < 0.2] = np.nan
    return values, rng.uniform(0.5, 2.0, shape)


# Non-square pixels (30 x 20) for the brute-force comparisons.
T3020 = Affine(30.0, 0.0, X0, 0.0, -20.0, Y0)
SHAPE = (14, 17)


def _x(c):
    return X0 + 30.0 * c


def _y(r):
    return Y0 - 20.0 * r


def test_weighted_moments_match_brute_force_on_axis_aligned_zones():
    # Edges on 1/4 and 1/8 pixel lines: every fraction is a multiple of 1/32, exact in any float
    # format, so the moments must agree with shapely + numpy to rounding (1e-9 relative).
    zones = [
        shapely.box(_x(0.5), _y(13.5), _x(9.75), _y(5.25)).difference(
            shapely.box(_x(3.125), _y(10.25), _x(5.5), _y(7.75))),  # with a hole
        shapely.Polygon([(_x(2.25), _y(1.5)), (_x(15.875), _y(1.5)), (_x(15.875), _y(12.75)), (_x(11.5), _y(12.75)),
                         (_x(11.5), _y(4.25)), (_x(2.25), _y(4.25))]),  # an L, overlapping zone 0
        shapely.box(_x(100), _y(100), _x(110), _y(90)),  # does not reach the window
    ]
    values, cell_weight = _fixture_values(SHAPE, 42)
    moments = fold_window(values, coverage_fractions(zones, T3020, SHAPE), cell_weight=cell_weight)
    for i, geom in enumerate(zones):
        ref = _brute_moments(geom, T3020, values, cell_weight)
        assert moments.covered[i] == pytest.approx(ref["covered"], rel=1e-9, abs=1e-12)
        assert moments.weight[i] == pytest.approx(ref["weight"], rel=1e-9, abs=1e-12)
        if not ref["ok"].any():
            assert math.isnan(moments.mean[i]) and math.isnan(moments.min[i]) and math.isnan(moments.max[i])
            assert math.isnan(moments.std[i])
            continue
        for key in ("mean", "m2", "min", "max"):
            assert getattr(moments, key)[i] == pytest.approx(ref[key], rel=1e-9), key
    assert moments.weight[2] == 0 and moments.covered[2] == 0


def test_weighted_moments_match_brute_force_on_slanted_and_curved_zones():
    # exactextract stores coverage fractions in single precision (its maintainer, isciences/exactextract
    # issue #101), so each fraction may differ from the exact one by up to one float32 ulp, 2**-23
    # relative.  The bounds below follow from that to first order; everything else is exact arithmetic.
    ulp = 2.0**-23
    zones = [
        shapely.Polygon([(_x(1.3), _y(2.2)), (_x(15.1), _y(0.7)), (_x(8.4), _y(12.9))]),
        shapely.Point(_x(12.0), _y(9.0)).buffer(95.0),
    ]
    values, cell_weight = _fixture_values(SHAPE, 3)
    cov = coverage_fractions(zones, T3020, SHAPE)
    moments = fold_window(values, cov, cell_weight=cell_weight)
    for i, geom in enumerate(zones):
        np.testing.assert_allclose(dense(cov, i), brute_fractions(geom, T3020, SHAPE), rtol=ulp, atol=1e-15)
        ref = _brute_moments(geom, T3020, values, cell_weight)
        ok, w = ref["ok"], ref["w"]
        assert moments.covered[i] == pytest.approx(ref["covered"], rel=ulp)
        assert moments.weight[i] == pytest.approx(ref["weight"], rel=ulp)
        mean_bound = ulp * np.sum(w[ok] * np.abs(values[ok] - ref["mean"])) / ref["weight"]
        assert abs(moments.mean[i] - ref["mean"]) <= 2 * mean_bound
        assert moments.m2[i] == pytest.approx(ref["m2"], rel=2 * ulp)
        assert moments.min[i] == ref["min"] and moments.max[i] == ref["max"]


def _split_rows(transform, values, row):
    return [(transform, values[:row]), (transform * Affine.translation(0, row), values[row:])]


def _split_cols(transform, values, col):
    return [(transform, values[:, :col]), (transform * Affine.translation(col, 0), values[:, col:])]


def test_merging_windows_equals_the_whole_window():
    rng = np.random.default_rng(7)
    values = rng.normal(120.0, 30.0, (24, 30))
    values[rng.random(values.shape) < 0.15] = np.nan
    zones = [
        shapely.Point(X0 + 14.2 * RES, Y0 - 11.9 * RES).buffer(9.1 * RES),
        shapely.box(X0 + 0.25 * RES, Y0 - 23.5 * RES, X0 + 29.6 * RES, Y0 - 20.1 * RES),
        shapely.box(X0 + 2 * RES, Y0 - 6 * RES, X0 + 7 * RES, Y0 - 2 * RES),  # only in the top part
    ]
    whole = fold_window(values, coverage_fractions(zones, T30, values.shape))

    parts = [p for t, v in _split_rows(T30, values, 9) for p in _split_cols(t, v, 13)]
    folded = [fold_window(v, coverage_fractions(zones, t, v.shape)) for t, v in parts]
    left_first = merge_zone_moments(merge_zone_moments(merge_zone_moments(folded[0], folded[1]), folded[2]),
                                    folded[3])
    pairwise = merge_zone_moments(merge_zone_moments(folded[3], folded[1]),
                                  merge_zone_moments(folded[2], folded[0]))
    for merged in (left_first, pairwise):
        for field in ZoneMoments._fields:
            np.testing.assert_allclose(getattr(merged, field), getattr(whole, field), rtol=1e-12, atol=1e-9,
                                       err_msg=field)
    np.testing.assert_allclose(left_first.std, whole.std, rtol=1e-12)


def test_merge_with_an_empty_window_keeps_the_other():
    a = ZoneMoments(*(np.array([2.0, 0.0]), np.array([5.0, np.nan]), np.array([3.0, 0.0]),
                      np.array([4.0, np.nan]), np.array([6.0, np.nan]), np.array([2.5, 1.0])))
    empty = ZoneMoments(np.zeros(2), np.full(2, np.nan), np.zeros(2), np.full(2, np.nan), np.full(2, np.nan),
                        np.zeros(2))
    merged = merge_zone_moments(empty, a)
    for field in ZoneMoments._fields:
        np.testing.assert_array_equal(getattr(merged, field), getattr(a, field))


def test_rotated_or_south_up_window_is_refused():
    with pytest.raises(ValueError, match="north-up"):
        coverage_fractions([shapely.box(0, 0, 1, 1)], Affine(1, 0, 0, 0, 1, 0), (4, 4))


def _wgs84_cell_area_km2(lon_width, lat0, lat1):
    # Closed form: area between two parallels on the ellipsoid, a^2 dlon (q1 - q0) / 2 with
    # q(phi) = (1 - e^2) [sin phi / (1 - e^2 sin^2 phi) - ln((1 - e sin phi) / (1 + e sin phi)) / (2 e)]
    # (Snyder 1987, Map Projections - A Working Manual, the authalic q; equation number 3-12 from memory).
    a, f = 6378137.0, 1 / 298.257223563  # WGS 84 ellipsoid (NIMA TR8350.2)
    e2 = f * (2 - f)
    e = math.sqrt(e2)

    def q(phi):
        s = math.sin(math.radians(phi))
        return (1 - e2) * (s / (1 - e2 * s * s) - math.log((1 - e * s) / (1 + e * s)) / (2 * e))

    return a * a * math.radians(lon_width) * (q(lat1) - q(lat0)) / 2 / 1e6


@pytest.mark.parametrize("lat", [0.0, 45.0, -70.0])
def test_geodesic_area_of_a_one_degree_cell(lat):
    cell = shapely.box(10.0, lat, 11.0, lat + 1.0)
    assert polygon_area_km2(cell, "EPSG:4326") == pytest.approx(_wgs84_cell_area_km2(1.0, lat, lat + 1.0), rel=1e-7)


def test_geodesic_area_subtracts_holes_and_adds_parts():
    outer = shapely.box(-3.0, 50.0, -1.0, 52.0)
    hole = shapely.box(-2.5, 50.5, -1.5, 51.5)
    other = shapely.box(5.0, 10.0, 6.0, 11.0)
    geom = shapely.MultiPolygon([outer.difference(hole), other])
    expected = (_wgs84_cell_area_km2(2.0, 50.0, 52.0) - _wgs84_cell_area_km2(1.0, 50.5, 51.5)
                + _wgs84_cell_area_km2(1.0, 10.0, 11.0))
    assert polygon_area_km2(geom, "EPSG:4326") == pytest.approx(expected, rel=1e-7)


def test_planar_area_in_metres_and_us_survey_feet():
    # Unit definitions: 1 US survey foot = 1200/3937 m (NIST Handbook 44, appendix C).
    assert polygon_area_km2(shapely.box(400000, 5000000, 401000, 5002000), "EPSG:32633") == pytest.approx(2.0)
    square_ft = shapely.box(1_000_000, 200_000, 1_001_000, 201_000)  # EPSG:2263 is in US survey feet
    assert polygon_area_km2(square_ft, "EPSG:2263") == pytest.approx((1000 * 1200 / 3937) ** 2 / 1e6, rel=1e-12)
