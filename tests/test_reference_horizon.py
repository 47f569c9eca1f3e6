"""Horizons, cast shadows and sky-view factors against closed-form geometry.

* A long straight wall (a cliff of height H) on flat ground: the horizon
  straight toward it is atan(H/d); in direction phi off its normal it is
  atan(H cos(phi) / d), so the flat-ground sky-view factor
  (1/2pi) int cos^2(h) dphi = 1/2 + (1/2pi) int_{-pi/2}^{pi/2}
  dphi / (1 + (H/d)^2 cos^2 phi) = 1/2 + 1 / (2 sqrt(1 + (H/d)^2)),
  using int_0^{pi/2} dphi / (1 + a^2 cos^2 phi) = pi / (2 sqrt(1 + a^2))
  (substitute t = tan phi).  Equivalently (1 + cos h)/2 with h = atan(H/d).
* Its shadow: with the sun at elevation e, azimuth alpha off the wall's
  normal, the shadow reaches H cos(alpha) / tan(e) from the wall.
* A tilted facet whose horizon is the horizontal: sky-view factor
  (1 + cos s)/2 (Liu & Jordan 1963; Duffie & Beckman 2013, section 2.15,
  from memory); a pixel inside a uniform slope, whose horizon is its own
  plane, sees the whole hemisphere above it: 1.
* Pixel-centre horizons on a random DEM along the grid axes, computed from
  the definition (max over the pixels of atan(dz / d)) in plain NumPy.
* numpy.interp with period=360 for the interpolation between azimuths.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from radledger.physics import horizon as hz
from radledger.physics import terrain as tr


def cliff(rows, cols, height, top_row):
    """Flat ground at 0 m with rows 0..top_row (the north) raised to `height`."""
    z = np.zeros((rows, cols))
    z[: top_row + 1] = height
    return z


def wall_svf(height, distance):
    return 0.5 + 0.5 / math.sqrt(1.0 + (height / distance) ** 2)


def test_horizon_toward_a_wall_is_its_elevation_angle():
    z = cliff(40, 21, 50.0, 4)
    h = hz.horizon_angles(z, 10.0, 10.0, [0.0], 1000.0)[0]
    for row in (5, 10, 25, 39):
        distance = (row - 4) * 10.0  # to the cliff top at row 4's centre line
        assert h[row, 10] == pytest.approx(math.degrees(math.atan(50.0 / distance)), abs=1e-4)


@pytest.mark.parametrize("distance_px", [5, 20])
def test_sky_view_factor_beside_a_long_wall(distance_px):
    height, top = 20.0, 2
    z = cliff(top + distance_px + 3, 20 * distance_px + 1, height, top)
    azimuths = np.arange(0.0, 360.0, 1.0)
    dx = 2.0
    h = hz.horizon_angles(z, dx, dx, azimuths, 1e6)
    svf = hz.dozier_frew_1990_sky_view_factor(h, azimuths)
    row, col = top + distance_px, 10 * distance_px
    # 1 %: the wall is 20 distances long, not infinite, and 360 azimuths.
    assert svf[row, col] == pytest.approx(wall_svf(height, distance_px * dx), rel=1e-2)


def test_sky_view_factor_far_from_the_wall_is_one():
    z = cliff(60, 30, 100.0, 2)
    azimuths = np.arange(0.0, 360.0, 10.0)
    # Looking no farther than 200 m, pixels over 200 m from the wall see only
    # flat ground: horizons of 0 in every direction.
    svf = hz.dozier_frew_1990_sky_view_factor(hz.horizon_angles(z, 10, 10, azimuths, 200.0), azimuths)
    assert (svf[25:, :] == 1.0).all()


@pytest.mark.parametrize("sun_elevation, off_normal", [(30.0, 0.0), (15.0, 0.0), (25.0, 30.0)])
def test_shadow_length_behind_a_wall(sun_elevation, off_normal):
    height, top, dx = 30.0, 3, 5.0
    z = cliff(80, 120, height, top)
    # Sun in the north (azimuth 0 +- off_normal): the shadow falls south.
    shadow = hz.shadow_mask(z, dx, dx, 360.0 - off_normal, sun_elevation, 5000.0)
    length = height * math.cos(math.radians(off_normal)) / math.tan(math.radians(sun_elevation))
    distance = (np.arange(80) - top) * dx  # south of the cliff top
    column = shadow[:, 60]
    shaded = distance[(distance > 0) & column]
    lit = distance[(distance > 0) & ~column]
    # Shadow edge within 1.5 pixels of the geometry; all further pixels lit.
    assert shaded.max() == pytest.approx(length, abs=1.5 * dx)
    assert lit.min() == pytest.approx(length, abs=1.5 * dx)
    assert (distance[column] < length + 1.5 * dx).all()


def test_stored_horizons_give_the_same_shadow():
    rng = np.random.default_rng(3)
    z = np.cumsum(np.cumsum(rng.normal(size=(60, 70)), axis=0), axis=1)
    azimuths = np.arange(0.0, 360.0, 10.0)
    h = hz.horizon_angles(z, 30.0, 30.0, azimuths, 3000.0)
    direct = hz.shadow_mask(z, 30.0, 30.0, 130.0, 12.0, 3000.0)
    stored = hz.cast_shadow(hz.horizon_at(h, azimuths, 130.0), 12.0)
    np.testing.assert_array_equal(direct, stored)


@pytest.mark.parametrize("slope", [10.0, 30.0, 45.0, 80.0])
@pytest.mark.parametrize("aspect", [0.0, 123.0, 270.0])
def test_tilted_facet_on_flat_ground(slope, aspect):
    # Horizon = the horizontal in every direction: V = (1 + cos s) / 2.
    azimuths = np.arange(0.0, 360.0, 5.0)
    svf = hz.dozier_frew_1990_sky_view_factor(np.zeros((72, 1)), azimuths, np.array([slope]),
                                              np.array([aspect]))
    # 1e-4: trapezoid rule over 72 azimuths (the integrand has kinks).
    assert svf[0] == pytest.approx(0.5 * (1.0 + math.cos(math.radians(slope))), rel=1e-4)


def test_pixel_inside_a_uniform_slope_sees_the_whole_sky():
    # The terrain horizon is the pixel's own plane in every direction, so the
    # whole hemisphere above the surface is sky: V = 1 (geometry).
    dx = 10.0
    rows, cols = np.mgrid[0:41, 0:41]
    z = 500.0 + 0.4 * cols * dx - 0.25 * (-rows * dx)  # rises east and south
    slope, aspect = tr.horn_1981_slope_aspect(z, dx, dx)
    azimuths = np.arange(0.0, 360.0, 15.0)
    h = hz.horizon_angles(z, dx, dx, azimuths, 1e5)
    svf = hz.dozier_frew_1990_sky_view_factor(h, azimuths, slope, aspect)
    np.testing.assert_allclose(svf[1:-1, 1:-1], 1.0, atol=1e-5)  # float32 horizons


@pytest.mark.parametrize("azimuth", [0.0, 90.0, 180.0, 270.0, 45.0])
def test_horizons_along_grid_lines_match_the_definition(azimuth):
    rng = np.random.default_rng(7)
    z = np.cumsum(rng.normal(scale=20.0, size=(45, 45)), axis=0) + rng.normal(size=(45, 45))
    d = 15.0
    got = hz.horizon_angles(z, d, d, [azimuth], 1e6)[0]
    step = {0.0: (-1, 0), 90.0: (0, 1), 180.0: (1, 0), 270.0: (0, -1), 45.0: (-1, 1)}[azimuth]
    for r, c in [(0, 0), (22, 22), (44, 3), (10, 40), (30, 11)]:
        best = -90.0
        k = 1
        while 0 <= r + k * step[0] < 45 and 0 <= c + k * step[1] < 45:
            dist = k * d * math.hypot(*step)
            rise = z[r + k * step[0], c + k * step[1]] - z[r, c]
            best = max(best, math.degrees(math.atan(rise / dist)))
            k += 1
        assert got[r, c] == pytest.approx(best, abs=1e-4)  # float32 output


def test_horizon_at_interpolates_like_numpy_interp_with_period():
    azimuths = np.array([0.0, 40.0, 90.0, 180.0, 300.0])
    h = np.array([1.0, 5.0, -2.0, 8.0, 3.0])[:, None, None] * np.ones((1, 2, 3))
    for target in [0.0, 20.0, 65.0, 299.0, 330.0, 359.5, -10.0, 725.0]:
        expected = np.interp(target, azimuths, h[:, 0, 0], period=360.0)
        np.testing.assert_allclose(hz.horizon_at(h, azimuths, target), expected, rtol=1e-12)
    per_pixel = np.array([[10.0, 200.0, 350.0], [45.0, 90.0, 315.0]])
    expected = np.interp(per_pixel, azimuths, h[:, 0, 0], period=360.0)
    np.testing.assert_allclose(hz.horizon_at(h, azimuths, per_pixel), expected, rtol=1e-12)


def test_chunks_with_a_halo_agree_with_the_whole_dem():
    rng = np.random.default_rng(5)
    z = np.cumsum(np.cumsum(rng.normal(size=(90, 90)), axis=0), axis=1)
    z = 60.0 * (z - z.min()) / np.ptp(z)  # 60 m of relief: an 18-pixel halo
    res, min_elevation = 20.0, 10.0
    halo = hz.halo_pixels(np.ptp(z), res, min_elevation, max_pixels=90)
    # Closed form: ceil(relief / tan(e) / resolution).
    assert halo == min(math.ceil(np.ptp(z) / math.tan(math.radians(min_elevation)) / res), 90)
    reach = halo * res
    whole = hz.shadow_mask(z, res, res, 220.0, min_elevation, 1e6)
    r0, r1, c0, c1 = 30, 60, 40, 70
    chunk = z[max(r0 - halo, 0) : r1 + halo, max(c0 - halo, 0) : c1 + halo]
    part = hz.shadow_mask(chunk, res, res, 220.0, min_elevation, reach)
    top, left = r0 - max(r0 - halo, 0), c0 - max(c0 - halo, 0)
    np.testing.assert_array_equal(part[top : top + r1 - r0, left : left + c1 - c0],
                                  whole[r0:r1, c0:c1])


def test_halo_is_capped_and_at_least_one():
    assert hz.halo_pixels(3000.0, 10.0, 2.0, max_pixels=500) == 500
    assert hz.halo_pixels(0.0, 30.0) == 1
