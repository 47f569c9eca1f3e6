"""The compiled terrain path equals the NumPy reference kernel, and the static layers' chunking.

* The fused loop with terrain (model/terrain_fast.py + model/fused.py) against the NumPy kernel
  (model/terrain.py, itself pinned to pvlib and closed-form geometry end to end in
  test_terrain_pipeline.py), product by product and bit by bit, on random chunks.
* Horizons computed for a chunk's own pixels equal those of the physics function over the whole
  DEM (whose rays tests/test_reference_horizon.py checks against the definition).
* The grid's north offset against pyproj's meridian convergence.
"""

from __future__ import annotations

import dataclasses
import datetime as dt

import numpy as np
import pytest
from affine import Affine
from pyproj import Proj
from rasterio.crs import CRS
from rasterio.windows import Window

from radledger import physics as ph
from radledger.grid import TargetGrid
from radledger.model.kernels import scene_kernel
from radledger.model.needs import scene_needs
from radledger.model.params import SceneParams
from radledger.model.sun import sun_geometry
from radledger.model.terrain import sun_lattice
from radledger.model.terrain_daily import clear_sky_slope_ratio_fast
from radledger.model.terrain_layers import HORIZON_AZIMUTHS, grid_north_offset, horizon_angles_inside, horizon_name

NOON = dt.datetime(2026, 12, 21, 19, 40, tzinfo=dt.timezone.utc)
DUSK = dt.datetime(2026, 12, 22, 0, 20, tzinfo=dt.timezone.utc)     # sun around the horizon at 116 W
GRID = TargetGrid(CRS.from_epsg(32611), Affine(30.0, 0, 400000.0, 0, -30.0, 4300000.0), 207, 200, chunk=256)
WINDOW = Window(0, 0, 207, 200)
PRODUCTS = ("net_radiation", "net_shortwave", "net_longwave", "incident_shortwave", "quality")


def _inputs(time, seed=3):
    rng = np.random.default_rng(seed)
    shape = (200, 207)
    a = {
        "albedo": rng.uniform(0.05, 0.6, shape),
        "surface_temperature": rng.uniform(260, 300, shape),
        "air_temperature": rng.uniform(260, 290, shape),
        "vapour_pressure": rng.uniform(0.1, 1.5, shape),
        "shortwave_down": rng.uniform(0, 600, shape),
        "slope": rng.uniform(0, 60, shape),
        "aspect": rng.uniform(0, 360, shape),
        "sky_view_factor": rng.uniform(0.6, 1.0, shape),
    }
    a["slope"][:, :20] = 0.0
    a["aspect"][:, :20] = np.nan           # flat: no aspect
    a = {k: v.astype(np.float32) for k, v in a.items()}
    a["albedo"][0, :10] = np.nan
    a["shortwave_down"][4, :10] = 2000.0
    a["slope"][7, 30:40] = np.nan
    a["sky_view_factor"][8, 30:40] = np.nan
    a["sun_lattice"], _ = sun_lattice(GRID, WINDOW, time)
    for k, az in enumerate(HORIZON_AZIMUTHS):
        a[horizon_name(az)] = rng.uniform(-5.0, 35.0, shape).astype(np.float32)
    return a


def _params(terrain, time, constant=0.97):
    given = ("albedo", "surface_temperature", "air_temperature", "vapour_pressure", "shortwave_down")
    needs = scene_needs(given, products=PRODUCTS, sky_emissivity="brutsaert", clouds="none",
                        emissivity_constant=True, terrain=terrain)
    return SceneParams(time=time, products=PRODUCTS, needs=needs, emissivity_constant=constant, terrain=terrain)


@pytest.mark.parametrize("terrain", ["slope", "shading"])
@pytest.mark.parametrize("time", [NOON, DUSK], ids=["noon", "dusk"])
@pytest.mark.parametrize("with_sun", [False, True], ids=["sun-from-lattice", "sun-given"])
def test_fused_terrain_equals_numpy(terrain, time, with_sun):
    p = _params(terrain, time)
    assert p.needs.fused
    arrays = _inputs(time)
    sun = sun_geometry(GRID, WINDOW, time) if with_sun else None
    fused = scene_kernel({k: v.copy() for k, v in arrays.items()}, sun, None, p)
    numpy = scene_kernel({k: v.copy() for k, v in arrays.items()}, sun, None,
                         dataclasses.replace(p, needs=dataclasses.replace(p.needs, fused=False)))
    for name in PRODUCTS:
        got, exp = fused[name], numpy[name]
        if name == "quality":
            np.testing.assert_array_equal(got, exp)
        else:
            np.testing.assert_array_equal(np.isnan(got), np.isnan(exp))
            # float32 loop vs float64 NumPy (and the sun interpolated two ways): 2e-3 W m-2
            np.testing.assert_allclose(got, exp, atol=2e-3, equal_nan=True)
    q = fused["quality"]
    assert (q[7, 30:40] & 1).all() and (q[8, 30:40] & 1).all()      # no slope / no sky view: input missing
    assert (q[4, :10] & 2).all()                                    # shortwave out of range


def test_horizons_of_a_chunk_equal_those_of_the_whole_dem():
    rng = np.random.default_rng(5)
    z = np.cumsum(np.cumsum(rng.normal(0, 3, (70, 90)), 0), 1)
    halo = 12
    inner = horizon_angles_inside(z, halo, 20.0, 25.0, HORIZON_AZIMUTHS, halo * 20.0)
    whole = ph.horizon_angles(z, 20.0, 25.0, HORIZON_AZIMUTHS, halo * 20.0)
    np.testing.assert_array_equal(inner, whole[:, halo:-halo, halo:-halo])


def test_grid_north_offset_is_the_meridian_convergence():
    got = grid_north_offset(GRID, WINDOW)
    x, y = GRID.pixel_centres(WINDOW)
    lon, lat = GRID.to_lonlat(x[::50, ::50], y[::50, ::50])
    # pyproj's convergence is the angle from grid north to true north, counter-clockwise positive
    expected = -np.asarray(Proj("EPSG:32611").get_factors(lon, lat).meridian_convergence)
    np.testing.assert_allclose(got[::50, ::50], expected, atol=1e-3)


@pytest.mark.parametrize("latitude, day", [(45.0, 355), (45.0, 172), (0.0, 80), (62.0, 172), (-40.0, 355),
                                           (68.0, 172)])
@pytest.mark.parametrize("shading", [False, True], ids=["slope", "shading"])
def test_daily_ratio_fast_path_equals_the_physics(latitude, day, shading):
    rng = np.random.default_rng(day)
    n = 4000
    slope, aspect = rng.uniform(0, 70, n), rng.uniform(0, 360, n)
    slope[:100], aspect[:100] = 0.0, np.nan                      # flat ground: no aspect
    pressure, water = rng.uniform(60, 101, n), rng.uniform(1, 50, n)
    svf, albedo = rng.uniform(0.6, 1.0, n), rng.uniform(0.05, 0.8, n)
    slope[7], pressure[9] = np.nan, np.nan
    horizons = rng.uniform(-10, 25, (36, n)).astype(np.float32) if shading else None
    azimuths = HORIZON_AZIMUTHS if shading else None
    args = (latitude, day, slope, aspect, pressure, water, svf, albedo)
    expected = ph.clear_sky_slope_ratio_daily(*args, horizons, azimuths)
    got = clear_sky_slope_ratio_fast(*args, None if horizons is None else horizons.T,
                                     np.arange(36) if shading else None)
    np.testing.assert_array_equal(np.isnan(got), np.isnan(expected))
    # the indices interpolated on a lattice of (P, W^0.4): 0.05 %
    np.testing.assert_allclose(got, expected, rtol=5e-4)
