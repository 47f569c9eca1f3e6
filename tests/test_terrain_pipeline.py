"""methods.terrain end to end (run_config on synthetic DEMs) against outside references.

* Tilted planes: ``incident_shortwave`` against pvlib's isotropic tilted-surface model
  (``irradiance.erbs`` + ``get_total_irradiance(model="isotropic")`` with pvlib's SPA sun); the
  written slope and aspect against the planes' own (geometry), the aspect turned to true north by
  pyproj's meridian convergence (the planes lie 200 km west of their UTM zone's central meridian).
* Flat DEM: ``terrain: slope`` and ``shading`` give the products of ``terrain: none``.
* A long wall: the cast shadow's edge at H cos(delta) / tan(e) from it (geometry), the sky-view
  factor beside it against the closed form 1/2 + 1 / (2 sqrt(1 + (H/d)^2)) of an infinite wall.
* Days: 30-deg south and north slopes in December at 45 N against a 1-minute integration of the
  ASCE-EWRI (2005) App. D clear-sky beam and diffuse written here, with pvlib's SPA sun.

Tolerances are the issue's acceptance limits unless a comment says otherwise.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from pyproj import Proj

from radledger.config import load_config
from radledger.errors import ConfigError
from radledger.runner import run_config

from scenario import make_scenario, read as read_scenario
from terrain_cases import CRS, facets, pixel_lonlat, plane, read, terrain_config

pvlib = pytest.importorskip("pvlib")

SIZE = 24                                   # facet edge [pixel]
PLANES = [(30.0, 180.0), (30.0, 0.0), (20.0, 90.0), (40.0, 250.0)]   # (slope, aspect on the grid) [deg]
X_WEST = 300000.0                           # 200 km west of 117 W: meridian convergence ~1.8 deg


def _sun(time, lat, lon, altitude=0.0):
    """pvlib's SPA (nrel_numpy): geometric zenith and azimuth [deg] (no refraction, as radledger)."""
    times = pd.DatetimeIndex([pd.Timestamp(time)])
    sp = pvlib.solarposition.get_solarposition(times, lat, lon, altitude=altitude, method="nrel_numpy")
    return float(sp["zenith"].iloc[0]), float(sp["azimuth"].iloc[0])


@pytest.fixture(scope="module")
def planes_run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("planes")
    res = 30.0
    scenes = [("2026-12-21T19:00:00Z", 380.0), ("2026-06-21T17:30:00Z", 850.0),
              ("2026-03-20T22:00:00Z", 480.0), ("2026-12-21T21:00:00Z", None)]
    cfg = terrain_config(folder, facets(PLANES, SIZE, res), res=res, x0=X_WEST, scenes=scenes, terrain="slope")
    run_config(load_config(cfg))
    return folder / "out", res, scenes


def _true_aspect(grid_aspect, row, col, res):
    """Grid aspect turned to true north by pyproj's meridian convergence (its sign convention:
    true azimuth = grid azimuth + convergence; checked against a step due north)."""
    lon, lat = pixel_lonlat(row, col, res, x0=X_WEST)
    return (grid_aspect + Proj(CRS).get_factors(lon, lat).meridian_convergence) % 360.0


def test_written_slope_and_aspect_are_the_planes(planes_run):
    out, res, _ = planes_run
    slope, aspect = read(out / "terrain" / "slope.tif"), read(out / "terrain" / "aspect.tif")
    for k, (s, a) in enumerate(PLANES):
        inner = (slice(1, SIZE - 1), slice(k * SIZE + 1, (k + 1) * SIZE - 1))   # facet edges are not planar
        # geometry: a plane's slope is atan |grad z|
        np.testing.assert_allclose(slope[inner], s, atol=0.2)
        rows, cols = np.mgrid[inner]
        expected = _true_aspect(a, rows, cols, res)
        diff = (aspect[inner] - expected + 180.0) % 360.0 - 180.0
        assert np.abs(diff).max() < 0.2


def test_tilted_planes_match_pvlib_isotropic(planes_run):
    out, res, scenes = planes_run
    albedo = 0.2   # terrain_cases.SCENE
    for time, ghi in scenes:
        if ghi is None:
            continue
        got = read(out / "scenes" / f"incident_shortwave_{pd.Timestamp(time):%Y%m%dT%H%M}.tif")
        for k, (s, a) in enumerate(PLANES):
            row, col = SIZE // 2, k * SIZE + SIZE // 2
            lon, lat = pixel_lonlat(row, col, res, x0=X_WEST)
            zenith, azimuth = _sun(time, lat, lon)
            doy = pd.Timestamp(time).day_of_year
            split = pvlib.irradiance.erbs(ghi, zenith, doy)
            expected = pvlib.irradiance.get_total_irradiance(
                s, _true_aspect(a, row, col, res), zenith, azimuth, split["dni"], ghi, split["dhi"],
                albedo=albedo, model="isotropic")["poa_global"]
            assert got[row, col] == pytest.approx(float(expected), rel=0.015), (time, s, a)


def test_modelled_clear_sky_on_tilted_planes(planes_run):
    """No shortwave given: the App. D clear sky's own beam and diffuse on the planes (pvlib isotropic)."""
    out, res, scenes = planes_run
    time = next(t for t, ghi in scenes if ghi is None)
    got = read(out / "scenes" / f"incident_shortwave_{pd.Timestamp(time):%Y%m%dT%H%M}.tif")
    dem = facets(PLANES, SIZE, res)
    for k, (s, a) in enumerate(PLANES):
        row, col = SIZE // 2, k * SIZE + SIZE // 2
        lon, lat = pixel_lonlat(row, col, res, x0=X_WEST)
        zenith, azimuth = _sun(time, lat, lon)
        sin_b = math.cos(math.radians(zenith))
        g_on = float(pvlib.irradiance.get_extra_radiation(pd.Timestamp(time).day_of_year))
        # ASCE-EWRI (2005) App. D (coefficients from memory, as in app_d_ratio below), FAO-56 eq. 7
        p = 101.3 * ((293.0 - 0.0065 * dem[row, col]) / 293.0) ** 5.26
        w = 0.14 * 0.8 * p + 2.1                         # ea 0.8 kPa: terrain_cases.SCENE
        kb = 0.98 * math.exp(-0.00146 * p / sin_b - 0.075 * (w / sin_b) ** 0.4)
        kd = 0.35 - 0.36 * kb if kb >= 0.15 else 0.18 + 0.82 * kb
        dni, dhi = kb * g_on, kd * g_on * sin_b
        expected = pvlib.irradiance.get_total_irradiance(
            s, _true_aspect(a, row, col, res), zenith, azimuth, dni, dni * sin_b + dhi, dhi, albedo=0.2,
            model="isotropic")["poa_global"]
        assert got[row, col] == pytest.approx(float(expected), rel=0.015), (s, a)


@pytest.mark.parametrize("given", ["shortwave", "modelled"])
def test_flat_dem_gives_level_ground(tmp_path, given):
    scn = make_scenario(tmp_path, shape=(48, 64), chunk=16, with_shortwave=given == "shortwave")
    if given == "modelled":   # the App. D clear sky's beam and diffuse, and the cloud correction
        scn.write_config(**{"methods.clouds": "crawford-duchon"})
    dem = read_scenario(tmp_path / "dem.tif")
    import rasterio
    with rasterio.open(tmp_path / "dem.tif", "r+") as ds:
        ds.write(np.full(dem.shape, 1834.0, dtype=dem.dtype), 1)
    products = ["net_radiation", "net_shortwave", "net_longwave"]
    outs = {}
    for terrain in ("none", "slope", "shading"):
        want = products + (["incident_shortwave"] if terrain != "none" else []) + ["quality"]
        scn.write_config(**{"methods.terrain": terrain, "output.directory": f"out_{terrain}",
                            "output.products": want})
        run_config(load_config(scn.config))
        outs[terrain] = tmp_path / f"out_{terrain}" / "scenes"
    stamp = "20260714T1810"
    for terrain in ("slope", "shading"):
        for p in products:
            a, b = read(outs["none"] / f"{p}_{stamp}.tif"), read(outs[terrain] / f"{p}_{stamp}.tif")
            np.testing.assert_array_equal(np.isnan(a), np.isnan(b))
            assert np.nanmax(np.abs(a - b)) < 0.1, (terrain, p)
        if given == "shortwave":   # level ground: the shortwave reaching the surface is the given one
            got = read(outs[terrain] / f"incident_shortwave_{stamp}.tif")
            assert np.nanmax(np.abs(got - scn.truth["shortwave_down"])) < 0.1
        np.testing.assert_array_equal(read(outs["none"] / f"quality_{stamp}.tif"),
                                      read(outs[terrain] / f"quality_{stamp}.tif"))


# --- a long wall: cast shadow and sky view ------------------------------------------------------

WALL_H, WALL_ROW, WALL_RES = 60.0, 96, 10.0      # the wall's height [m], its northern edge row, pixel [m]
WALL_TIME, WALL_GHI = "2026-12-21T19:46:00Z", 330.0


@pytest.fixture(scope="module")
def wall_run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("wall")
    dem = np.zeros((112, 48))
    dem[WALL_ROW:] = WALL_H          # the raised ground to the south; its shadow falls north
    cfg = terrain_config(folder, dem, res=WALL_RES, scenes=[(WALL_TIME, WALL_GHI)], terrain="shading")
    report = run_config(load_config(cfg))
    return folder, report


def test_cast_shadow_edge_behind_a_wall(wall_run):
    folder, _ = wall_run
    got = read(folder / "out" / "scenes" / f"incident_shortwave_{pd.Timestamp(WALL_TIME):%Y%m%dT%H%M}.tif")
    col = 24
    lon, lat = pixel_lonlat(WALL_ROW, col, WALL_RES)
    zenith, azimuth = _sun(WALL_TIME, lat, lon)
    # geometry: a wall of height H shades the ground to H / tan(e) along the sun's azimuth, i.e.
    # H cos(delta) / tan(e) straight north of it, delta = the sun's azimuth off south
    length = WALL_H * math.cos(math.radians(azimuth - 180.0)) / math.tan(math.radians(90.0 - zenith))
    distance = (WALL_ROW - np.arange(WALL_ROW)) * WALL_RES       # from the wall's top edge [m]
    profile = got[:WALL_ROW, col]
    open_value = profile[0]
    shaded = profile < 0.5 * open_value
    edge = distance[shaded].max()
    assert abs(edge - length) <= 2 * WALL_RES
    inside, outside = distance < length - 2 * WALL_RES, distance > length + 2 * WALL_RES
    assert (profile[inside] < 0.5 * open_value).all()
    # open ground in the sun gets the given (level-ground) shortwave within 5 %
    np.testing.assert_allclose(profile[outside], WALL_GHI, rtol=0.05)


def test_sky_view_beside_a_wall(wall_run):
    folder, _ = wall_run
    svf = read(folder / "out" / "terrain" / "sky_view_factor.tif")

    def wall(d):   # closed form beside an infinite wall (flat ground), see tests/test_reference_horizon.py
        return 0.5 + 0.5 / math.sqrt(1.0 + (WALL_H / d) ** 2)

    near = WALL_ROW - 3                     # 30 m from the wall (its 3 x 3 window is level)
    assert svf[near, 24] == pytest.approx(wall(3 * WALL_RES), rel=0.02)   # 2 %: 36 azimuths, 480 m of wall
    assert svf[near, 24] < 0.8
    # far away (beyond the halo, 690 m): the whole sky; the closed form is within 0.2 % of 1 there
    assert svf[0, 24] == pytest.approx(1.0, abs=1e-6)
    assert wall(WALL_ROW * WALL_RES) > 0.998


def test_static_layers_are_computed_once(wall_run):
    folder, first = wall_run
    terrain = sorted(p for p in first.written if "terrain" in p.parts)
    assert len(terrain) == 3 + 36 and all(p.exists() for p in terrain)
    again = run_config(load_config(folder / "config.yaml"))
    assert not [p for p in again.written if "terrain" in p.parts]
    assert sorted(p for p in again.skipped if "terrain" in p.parts) == terrain


# --- days ---------------------------------------------------------------------------------------

DAY_PLANES = [(30.0, 180.0), (0.0, 0.0), (30.0, 0.0)]


def app_d_ratio(lat, lon, slope, aspect, elevation, ea, albedo):
    """Clear-sky shortwave on a plane / on flat ground over 21 Dec 2026 (1-minute trapezoid).

    ASCE-EWRI (2005) App. D: K_B = 0.98 exp(-0.00146 P / sin(b) - 0.075 (W / sin(b))^0.4) (eq. D.2,
    K_t = 1), K_D = 0.35 - 0.36 K_B for K_B >= 0.15, else 0.18 + 0.82 K_B (eq. D.4), W = 0.14 ea P + 2.1
    (eq. D.3) - coefficients from memory; P = 101.3 ((293 - 0.0065 z) / 293)^5.26 (FAO-56 eq. 7).
    Sun (zenith, azimuth, extraterrestrial normal) from pvlib; incidence from its aoi_projection.
    Isotropic sky on the plane: V = (1 + cos s) / 2, ground reflection albedo (1 - V) (Liu & Jordan).
    """
    noon = pd.Timestamp("2026-12-21T12:00:00Z") - pd.Timedelta(hours=lon / 15.0)
    times = pd.date_range(noon - pd.Timedelta(hours=12), noon + pd.Timedelta(hours=12), freq="1min")
    sp = pvlib.solarposition.get_solarposition(times, lat, lon, method="nrel_numpy")
    zen, azi = sp["zenith"].to_numpy(), sp["azimuth"].to_numpy()
    sin_b = np.cos(np.radians(zen))
    up = sin_b > 0
    sb = np.where(up, sin_b, 1.0)
    p = 101.3 * ((293.0 - 0.0065 * elevation) / 293.0) ** 5.26
    w = 0.14 * ea * p + 2.1
    kb = np.where(up, 0.98 * np.exp(-0.00146 * p / sb - 0.075 * (w / sb) ** 0.4), 0.0)
    kd = np.where(up, np.where(kb >= 0.15, 0.35 - 0.36 * kb, 0.18 + 0.82 * kb), 0.0)
    g_on = np.asarray(pvlib.irradiance.get_extra_radiation(times.day_of_year.to_numpy()))
    cos_i = np.maximum(pvlib.irradiance.aoi_projection(slope, aspect, zen, azi), 0.0)
    v = 0.5 * (1.0 + math.cos(math.radians(slope)))
    minutes = np.arange(times.size, dtype=float)
    flat = np.trapezoid(g_on * (kb + kd) * np.where(up, sin_b, 0.0), minutes)
    beam = np.trapezoid(g_on * kb * np.where(up, cos_i, 0.0), minutes)
    diffuse = np.trapezoid(g_on * kd * np.where(up, sin_b, 0.0), minutes)
    return (beam + v * diffuse + albedo * (1.0 - v) * flat) / flat


def test_december_slopes_follow_the_clear_sky_ratio(tmp_path):
    res, size, rs = 30.0, 16, 5.0
    dem = np.hstack([plane((size, size), res, s, a) for s, a in DAY_PLANES])
    cfg = terrain_config(tmp_path, dem, res=res, days=[("2026-12-21", rs)], terrain="slope")
    run_config(load_config(cfg))
    got = read(tmp_path / "out" / "days" / "incident_shortwave_20261221.tif")
    values = []
    for k, (s, a) in enumerate(DAY_PLANES):
        row, col = size // 2, k * size + size // 2
        lon, lat = pixel_lonlat(row, col, res)
        expected = rs * app_d_ratio(lat, lon, s, a, dem[row, col], 0.6, 0.2)   # terrain_cases.DAY
        assert got[row, col] == pytest.approx(expected, rel=0.05), (s, a)
        values.append(got[row, col])
    south, flat, north = values
    assert flat == pytest.approx(rs, rel=1e-6)          # level ground keeps the given shortwave
    assert south > flat > north


# --- snow ----------------------------------------------------------------------------------------

def test_snow_cover_blends_snow_emissivity_and_flags(tmp_path):
    from terrain_cases import write_tif
    from affine import Affine
    dem = np.full((16, 32), 2000.0)
    t = Affine(30.0, 0.0, 500000.0, 0.0, -30.0, 4983000.0)
    fraction = np.tile(np.repeat([0.0, 0.25, 1.0, np.nan], 8), (16, 1))
    snow = write_tif(tmp_path / "snow.tif", fraction, t)
    cfg = terrain_config(tmp_path, dem, res=30.0, scenes=[("2026-03-01T19:00:00Z", 500.0)], terrain="none",
                         products=("surface_emissivity", "quality"), extra_scene={"snow_cover": snow})
    run_config(load_config(cfg))
    eps = read(tmp_path / "out" / "scenes" / "surface_emissivity_20260301T1900.tif")[0, ::8]
    # area-weighted mean of the surface's 0.97 (the config's constant) and snow's 0.99 (common
    # practice); nodata in the snow layer: the surface's own emissivity
    np.testing.assert_allclose(eps, [0.97, 0.975, 0.99, 0.97], atol=1e-6)
    q = read(tmp_path / "out" / "scenes" / "quality_20260301T1900.tif")[0, ::8]
    assert [bool(v & 128) for v in q] == [False, True, True, False]


def test_ndsi_threshold_of_hall_1995(tmp_path):
    from terrain_cases import write_tif
    from affine import Affine
    dem = np.full((16, 32), 2000.0)
    t = Affine(30.0, 0.0, 500000.0, 0.0, -30.0, 4983000.0)
    ndsi = write_tif(tmp_path / "ndsi.tif", np.tile(np.repeat([-0.2, 0.39, 0.4, 0.8], 8), (16, 1)), t)
    cfg = terrain_config(tmp_path, dem, res=30.0, scenes=[("2026-03-01T19:00:00Z", 500.0)], terrain="none",
                         products=("surface_emissivity",), extra_scene={"ndsi": ndsi})
    run_config(load_config(cfg))
    eps = read(tmp_path / "out" / "scenes" / "surface_emissivity_20260301T1900.tif")[0, ::8]
    # Hall et al. (1995): snow where NDSI >= 0.4
    np.testing.assert_allclose(eps, [0.97, 0.97, 0.99, 0.99], atol=1e-6)


# --- config ---------------------------------------------------------------------------------------

def test_terrain_config_messages(tmp_path):
    dem = np.full((16, 16), 100.0)
    cfg = terrain_config(tmp_path, dem, res=30.0, scenes=[("2026-03-01T19:00:00Z", 500.0)], terrain="slope")
    text = cfg.read_text()
    cfg.write_text(text.replace("terrain: slope", "terrain: shadows"))
    with pytest.raises(ConfigError, match=r"methods\.terrain: unknown value 'shadows'.*shading"):
        load_config(cfg)
    cfg.write_text(text.replace("terrain: slope", "terrain: slope\n  diffuse_fraction: perez"))
    with pytest.raises(ConfigError, match=r"methods\.diffuse_fraction: unknown value 'perez'.*erbs"):
        load_config(cfg)
    import yaml
    raw = yaml.safe_load(text)
    raw["static"].pop("elevation")
    raw["grid"] = {"crs": CRS, "resolution": 30, "bounds": [500000, 4982520, 500480, 4983000], "chunk": 16}
    cfg.write_text(yaml.safe_dump(raw))
    with pytest.raises(ConfigError, match=r"static\.elevation: needed for methods\.terrain: slope.*give a DEM"):
        load_config(cfg)


# --- on a Dask cluster ------------------------------------------------------------------------------

def test_terrain_on_a_dask_cluster_equals_local_threads(tmp_path):
    distributed = pytest.importorskip("distributed")
    dem = np.zeros((112, 48))
    dem[WALL_ROW:] = WALL_H
    runs = {}
    for where in ("local", "cluster"):
        runs[where] = terrain_config(tmp_path / where, dem, res=WALL_RES, scenes=[(WALL_TIME, WALL_GHI)],
                                     terrain="shading", chunk=48, products=("incident_shortwave", "net_radiation"))
    run_config(load_config(runs["local"]))
    # an in-process cluster: the distributed code path (locks, files reopened by the workers)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                                  dashboard_address=":0") as cluster:
        run_config(load_config(runs["cluster"]), scheduler=cluster.scheduler_address)
    local = sorted((tmp_path / "local" / "out").rglob("*.tif"))
    assert len(local) == 3 + 36 + 2
    for path in local:
        other = tmp_path / "cluster" / "out" / path.relative_to(tmp_path / "local" / "out")
        np.testing.assert_array_equal(read(path), read(other))


def test_terrain_beyond_the_grid_casts_its_shadow_into_it(tmp_path):
    # the wall's DEM reaches 16 rows further south than the grid: its shadow still falls on the grid
    dem = np.zeros((112, 48))
    dem[WALL_ROW:] = WALL_H
    cfg = terrain_config(tmp_path, dem, res=WALL_RES, scenes=[(WALL_TIME, WALL_GHI)], terrain="shading")
    import yaml
    raw = yaml.safe_load(cfg.read_text())
    top = 4983000.0
    raw["grid"] = {"crs": CRS, "resolution": WALL_RES, "chunk": 16,
                   "bounds": [500000.0, top - WALL_ROW * WALL_RES, 500000.0 + 48 * WALL_RES, top]}
    cfg.write_text(yaml.safe_dump(raw))
    run_config(load_config(cfg))
    got = read(tmp_path / "out" / "scenes" / f"incident_shortwave_{pd.Timestamp(WALL_TIME):%Y%m%dT%H%M}.tif")
    assert got.shape == (WALL_ROW, 48)
    lon, lat = pixel_lonlat(WALL_ROW, 24, WALL_RES)
    zenith, azimuth = _sun(WALL_TIME, lat, lon)
    length = WALL_H * math.cos(math.radians(azimuth - 180.0)) / math.tan(math.radians(90.0 - zenith))
    distance = (WALL_ROW - np.arange(WALL_ROW)) * WALL_RES
    shaded = got[:, 24] < 0.5 * got[0, 24]
    # geometry as behind the wall above: the edge within 2 pixels of H cos(delta) / tan(e)
    assert abs(distance[shaded].max() - length) <= 2 * WALL_RES


def test_terrain_layers_do_not_depend_on_the_chunk_edge(tmp_path, monkeypatch):
    # Rays are turned by the grid's convergence and scaled by the ground pixel size of the grid-aligned
    # block a pixel is in, not of its chunk: any chunk edge gives the same layers and products.
    # (Blocks of 32 pixels here so a small grid has several; common practice: results of a chunked
    # computation must not depend on the chunking.)
    from radledger.model import terrain_layers
    monkeypatch.setattr(terrain_layers, "TERRAIN_BLOCK", 32)
    yy, xx = np.mgrid[0:96, 0:80]
    dem = 900.0 + 400.0 * np.exp(-((yy - 40) ** 2 + (xx - 30) ** 2) / 300.0) + 3.0 * np.sin(xx / 3.0) * np.cos(yy / 4.0)
    outs = []
    for chunk in (16, 48, 64):
        cfg = terrain_config(tmp_path / f"c{chunk}", dem, res=30.0, scenes=[("2026-06-21T15:00:00Z", 700.0)],
                             terrain="shading", chunk=chunk, products=("incident_shortwave", "net_radiation"))
        run_config(load_config(cfg))
        outs.append(tmp_path / f"c{chunk}" / "out")
    paths = sorted(outs[0].rglob("*.tif"))
    assert len(paths) == 3 + 36 + 2
    for path in paths:
        for other in outs[1:]:
            got, want = read(other / path.relative_to(outs[0])), read(path)
            if path.parent.name == "horizons":
                np.testing.assert_array_equal(got, want, err_msg=path.name)
            else:    # grid north and the sun are interpolated on lattices anchored at each chunk: float32
                np.testing.assert_allclose(got, want, rtol=1e-6, atol=1e-4, err_msg=path.name)   # rounding
