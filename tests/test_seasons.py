"""Seasons: date ranges, templates, CF time stacks (NetCDF, Zarr), discovered scene times, albedo
between scenes and on_missing - whole maps against FAO-56 and Stefan-Boltzmann written out in the
tests (reference_fao56.py, test_methods_matrix.py), on weather warped by GDAL's whole-array warp.
"""

from __future__ import annotations

import csv
import datetime as dt
import json

import numpy as np
import pandas as pd
import pytest
import rasterio
import shapely
import xarray as xr
import yaml
from affine import Affine
from pyproj import Transformer
from rasterio.enums import Resampling
from rasterio.warp import reproject
from scipy.constants import Stefan_Boltzmann as SIGMA

from radledger.cli import main
from radledger.config import load_config
from radledger.model.products import DAY_QUALITY_BITS
from radledger.runner import run_config

from reference_fao56 import daily_net_radiation
from scenario import CLASSES, CRS_UTM, RES, X0, Y0, fields, read, write_tif

SHAPE = (48, 64)
DAYS = pd.date_range("2026-06-01", "2026-06-10", freq="D")
T_GRID = Affine(RES, 0, X0, 0, -RES, Y0)
D = 0.005   # weather grid spacing [deg]


def _lonlat_grid():
    tr = Transformer.from_crs(CRS_UTM, "EPSG:4326", always_xy=True)
    h, w = SHAPE
    lon, lat = tr.transform([X0, X0 + w * RES, X0, X0 + w * RES], [Y0, Y0, Y0 - h * RES, Y0 - h * RES])
    lon0, lat1 = np.floor(min(lon) / D) * D - 3 * D, np.ceil(max(lat) / D) * D + 3 * D
    nx = int(np.ceil((max(lon) - lon0) / D)) + 4
    ny = int(np.ceil((lat1 - min(lat)) / D)) + 4
    lons = lon0 + D * (np.arange(nx) + 0.5)
    lats = lat1 - D * (np.arange(ny) + 0.5)
    return lons, lats


def _pixel_lat():
    tr = Transformer.from_crs(CRS_UTM, "EPSG:4326", always_xy=True)
    h, w = SHAPE
    x, y = np.meshgrid(X0 + RES * (np.arange(w) + 0.5), Y0 - RES * (np.arange(h) + 0.5))
    return tr.transform(x, y)[1]


def _warp(values, lons, lats):
    """GDAL's whole-array bilinear warp of a lon/lat field onto the test grid (the reference)."""
    out = np.full(SHAPE, np.nan)
    src_t = Affine(D, 0, lons[0] - D / 2, 0, -D, lats[0] + D / 2)
    reproject(np.asarray(values, float), out, src_transform=src_t, src_crs="EPSG:4326", dst_transform=T_GRID,
              dst_crs=CRS_UTM, resampling=Resampling.bilinear, src_nodata=np.nan, dst_nodata=np.nan)
    return out


def _weather(lons, lats):
    """Invented daily weather on the lon/lat grid: tmax [degC], tmin [K], vp [Pa], rs [W m-2, 24-hour mean]."""
    gy, gx = np.meshgrid(np.arange(lats.size), np.arange(lons.size), indexing="ij")
    n = len(DAYS)
    k = np.arange(n)[:, None, None]
    return {"tmax": 24 + 0.2 * gx - 0.1 * gy + 0.3 * k, "tmin": 283 + 0.1 * gx + 0.05 * gy + 0.2 * k,
            "vp": 1100 + 10 * gx + 5 * gy + 20 * k, "rs": 260 + 2 * gx - gy + 3 * k}


def _write_stacks(folder, *, zarr=False):
    lons, lats = _lonlat_grid()
    w = _weather(lons, lats)
    coords = {"time": DAYS, "lat": ("lat", lats, {"units": "degrees_north", "standard_name": "latitude"}),
              "lon": ("lon", lons, {"units": "degrees_east", "standard_name": "longitude"})}
    tmax = w["tmax"].copy()
    tmax[:, 0, 0] = np.nan                                        # a fill value in the packed stack
    ds = xr.Dataset({"tmax": (("time", "lat", "lon"), tmax, {"units": "degC"}),
                     "tmin": (("time", "lat", "lon"), w["tmin"], {"units": "K"}),
                     "vp": (("time", "lat", "lon"), w["vp"], {"units": "Pa"}),
                     "rsds": (("time", "lat", "lon"), w["rs"], {"units": "W m-2"})}, coords=coords)
    enc = {"tmax": {"dtype": "int16", "scale_factor": 0.01, "add_offset": 20.0, "_FillValue": -32768}}
    path = folder / ("met.zarr" if zarr else "met.nc")
    if zarr:
        ds.to_zarr(path, encoding=enc, zarr_format=2, consolidated=True)
    else:
        ds.to_netcdf(path, encoding=enc, engine="h5netcdf")
    return path.name, w, lons, lats


def _stack_day(name, start, end):
    """A days: entry over [start, end] taking every input from the stack _write_stacks made."""
    return {"dates": {"start": start, "end": end}, **{layer: {"path": name, "variable": var} for layer, var in
            (("shortwave_down", "rsds"), ("air_temperature_max", "tmax"), ("air_temperature_min", "tmin"),
             ("vapour_pressure", "vp"))}}


def _static(folder):
    f = fields(SHAPE)
    write_tif(folder / "lc.tif", f["classes"], transform=T_GRID)
    write_tif(folder / "dem.tif", f["elev"], transform=T_GRID)
    (folder / "emis.csv").write_text("class,emissivity\n" + "".join(f"{c},{e}\n" for c, e in CLASSES.items()))
    return f


def _config(folder, days=None, scenes=None, **extra):
    cfg = {"grid": {"like": "land_cover", "chunk": 32}, "static": {"land_cover": "lc.tif", "elevation": "dem.tif"},
           "emissivity": {"table": "emis.csv"}, "output": {"directory": "out", "products": ["net_radiation", "quality"]}}
    if days:
        cfg["days"] = days
    if scenes:
        cfg["scenes"] = scenes
    cfg.update(extra)
    path = folder / "season.yaml"
    path.write_text(yaml.safe_dump(cfg, sort_keys=False))
    return path


@pytest.mark.parametrize("store", ["netcdf", "zarr"])
def test_a_season_from_cf_time_stacks_matches_fao56(tmp_path, store):
    f = _static(tmp_path)
    name, w, lons, lats = _write_stacks(tmp_path, zarr=store == "zarr")
    cfg = _config(tmp_path, days=[{
        "dates": {"start": "2026-06-01", "end": "2026-06-10", "every": 3},
        "shortwave_down": {"path": name, "variable": "rsds"},          # CF units W m-2: a 24-hour mean
        "air_temperature_max": {"path": name, "variable": "tmax"},     # packed int16, degC, _FillValue
        "air_temperature_min": {"path": name, "variable": "tmin"},
        "vapour_pressure": {"path": name, "variable": "vp"}}])         # Pa
    run_config(load_config(cfg))
    lat = _pixel_lat()
    for i in (0, 3, 6, 9):
        day = DAYS[i].date()
        got = read(tmp_path / "out" / "days" / f"net_radiation_{day:%Y%m%d}.tif")
        tmax = w["tmax"][i].copy()
        tmax[0, 0] = np.nan
        exp = daily_net_radiation(_warp(w["rs"][i], lons, lats) * 0.0864, _warp(tmax, lons, lats) + 273.15,
                                  _warp(w["tmin"][i], lons, lats), _warp(w["vp"][i], lons, lats) / 1000, lat,
                                  day.timetuple().tm_yday, f["elev"].astype(float))
        np.testing.assert_array_equal(np.isnan(got), np.isnan(exp))
        # int16 packing of tmax (0.01 K) is the largest difference: far below 0.02 MJ m-2 day-1
        assert np.nanmax(np.abs(got - exp)) < 0.02, (day, np.nanmax(np.abs(got - exp)))
    assert len(list((tmp_path / "out" / "days").glob("net_radiation_*.tif"))) == 4


def test_templates_and_ranges_expand_and_check_prints_them(tmp_path, capsys):
    f = _static(tmp_path)
    lat = _pixel_lat()
    for d in DAYS[:5]:
        write_tif(tmp_path / f"rsd_{d:%Y%m%d}.tif", np.full(SHAPE, 20 + d.day, np.float32), transform=T_GRID)
    for n in ("tmax", "tmin", "ea"):
        write_tif(tmp_path / f"{n}.tif", np.full(SHAPE, {"tmax": 301.0, "tmin": 287.0, "ea": 1.4}[n], np.float32),
                  transform=T_GRID)
    cfg = _config(tmp_path, days=[{"dates": {"start": "2026-06-01", "end": "2026-06-05"},
                                   "shortwave_down": "rsd_{date:%Y%m%d}.tif", "air_temperature_max": "tmax.tif",
                                   "air_temperature_min": "tmin.tif", "vapour_pressure": "ea.tif",
                                   "albedo": "alb.tif"}],
                  layers={"albedo": {"scale": 0.001}})
    write_tif(tmp_path / "alb.tif", np.full(SHAPE, 180, np.int16), transform=T_GRID)
    assert main(["check", str(cfg)]) == 0
    out = capsys.readouterr().out
    assert "days[0]: 5 dates 2026-06-01 .. 2026-06-05" in out and "rsd_{date:%Y%m%d}.tif" in out
    run_config(load_config(cfg))
    for d in DAYS[:5]:
        got = read(tmp_path / "out" / "days" / f"net_radiation_{d:%Y%m%d}.tif")
        exp = daily_net_radiation(20.0 + d.day, 301.0, 287.0, 1.4, lat, d.day_of_year, f["elev"].astype(float), 0.18)
        assert np.nanmax(np.abs(got - exp)) < 0.02


def test_on_missing_error_names_the_date_and_skip_leaves_it_out(tmp_path, capsys):
    _static(tmp_path)
    for d in DAYS[:3]:
        if d.day != 2:     # 2 June is missing
            write_tif(tmp_path / f"rsd_{d:%Y%m%d}.tif", np.full(SHAPE, 22, np.float32), transform=T_GRID)
    for n, v in (("tmax", 301.0), ("tmin", 287.0), ("ea", 1.4)):
        write_tif(tmp_path / f"{n}.tif", np.full(SHAPE, v, np.float32), transform=T_GRID)
    day = {"dates": {"start": "2026-06-01", "end": "2026-06-03"}, "shortwave_down": "rsd_{date:%Y%m%d}.tif",
           "air_temperature_max": "tmax.tif", "air_temperature_min": "tmin.tif", "vapour_pressure": "ea.tif"}
    cfg = _config(tmp_path, days=[day])
    assert main(["run", "--quiet", str(cfg)]) == 2
    err = capsys.readouterr().err
    assert "rsd_20260602.tif" in err and "not found" in err and "Traceback" not in err
    assert not (tmp_path / "out").exists() or not list((tmp_path / "out").rglob("*.tif"))
    cfg = _config(tmp_path, days=[{**day, "on_missing": "skip"}])
    assert main(["run", str(cfg)]) == 0
    out = capsys.readouterr().out
    assert "skipped" in out and "20260602" in out
    written = sorted(p.name for p in (tmp_path / "out" / "days").glob("net_radiation_*.tif"))
    assert written == ["net_radiation_20260601.tif", "net_radiation_20260603.tif"]


def _scene_files(folder, times, f):
    albedo = {}
    for k, t in enumerate(times):
        a = (0.15 + 0.05 * k + 0.0005 * np.arange(SHAPE[1]))[None, :] * np.ones(SHAPE)
        if k == 1:
            a[:10, :10] = np.nan            # a cloud in the second scene's albedo
        stored = np.where(np.isnan(a), -9999, np.round(a * 1000)).astype(np.int16)
        albedo[t] = np.where(stored == -9999, np.nan, stored * 0.001)      # the decoded values
        write_tif(folder / f"albedo_{t:%Y%m%dT%H%M}.tif", stored, transform=T_GRID, nodata=-9999)
        write_tif(folder / f"lst_{t:%Y%m%dT%H%M}.tif", (f["lst"] + k).astype(np.float32), transform=T_GRID)
        write_tif(folder / f"rs_{t:%Y%m%dT%H%M}.tif", np.full(SHAPE, 850.0, np.float32), transform=T_GRID)
    return albedo


def _hourly_stacks(folder):
    lons, lats = _lonlat_grid()
    hours = pd.date_range("2026-06-01T00:00", "2026-06-10T23:00", freq="h")
    h = np.arange(hours.size)[:, None, None]
    ta = 288 + 8 * np.sin(2 * np.pi * (h - 9) / 24) + 0.0 * lons[None, None, :] + 0.0 * lats[None, :, None]
    ea = 12 + 0.01 * h + 0 * lons[None, None, :] + 0 * lats[None, :, None]
    coords = {"time": hours, "lat": ("lat", lats, {"units": "degrees_north"}), "lon": ("lon", lons,
                                                                                         {"units": "degrees_east"})}
    xr.Dataset({"ta": (("time", "lat", "lon"), ta, {"units": "K"}),
                "ea": (("time", "lat", "lon"), ea, {"units": "hPa"})}, coords=coords).to_netcdf(
        folder / "hourly.nc", engine="h5netcdf")
    return hours, ta[:, 0, 0], ea[:, 0, 0]


def test_discovered_scenes_with_hourly_stacks_and_albedo_between_them(tmp_path):
    f = _static(tmp_path)
    times = [dt.datetime(2026, 6, 3, 18, 20, tzinfo=dt.timezone.utc),
             dt.datetime(2026, 6, 7, 18, 50, tzinfo=dt.timezone.utc)]
    albedo = _scene_files(tmp_path, times, f)
    hours, ta, ea = _hourly_stacks(tmp_path)
    for n, v in (("tmax", 301.0), ("tmin", 287.0), ("ead", 1.4), ("rsd", 24.0)):
        write_tif(tmp_path / f"{n}.tif", np.full(SHAPE, v, np.float32), transform=T_GRID)
    cfg = _config(tmp_path, scenes=[{
        "times": "discover", "albedo": "albedo_{time:%Y%m%dT%H%M}.tif",
        "surface_temperature": "lst_{time:%Y%m%dT%H%M}.tif", "shortwave_down": "rs_{time:%Y%m%dT%H%M}.tif",
        "air_temperature": {"path": "hourly.nc", "variable": "ta"},
        "vapour_pressure": {"path": "hourly.nc", "variable": "ea"}}],
        days=[{"dates": {"start": "2026-06-01", "end": "2026-06-10"}, "shortwave_down": "rsd.tif",
               "air_temperature_max": "tmax.tif", "air_temperature_min": "tmin.tif", "vapour_pressure": "ead.tif",
               "albedo": {"interpolate": "scenes", "max_gap": 5}}],
        layers={"albedo": {"scale": 0.001}})
    run_config(load_config(cfg))
    out = tmp_path / "out"
    eps = np.vectorize(CLASSES.get)(f["classes"].astype(int)).astype(float)
    for k, t in enumerate(times):
        got = read(out / "scenes" / f"net_radiation_{t:%Y%m%dT%H%M}.tif")
        # linear in time between the two hourly steps around the scene time
        x = (t - hours[0].tz_localize("UTC").to_pydatetime()).total_seconds() / 3600
        ta_t, ea_t = np.interp(x, np.arange(hours.size), ta), np.interp(x, np.arange(hours.size), ea) / 10
        sky = 1.24 * (10 * ea_t / ta_t) ** (1 / 7)                       # Brutsaert (1975), e in hPa
        lst = (f["lst"] + k).astype(np.float32).astype(float)
        exp = (1 - albedo[t]) * 850 - eps * (SIGMA * lst ** 4 - sky * SIGMA * ta_t ** 4)
        np.testing.assert_array_equal(np.isnan(got), np.isnan(exp))
        assert np.nanmax(np.abs(got - exp)) < 0.1
    lat, z = _pixel_lat(), f["elev"].astype(float)
    for day in range(1, 11):
        # the contract's rule, per pixel: the nearest valid scene before (<= 0 days) and after (> 0 days)
        # the day's noon within max_gap; both: linear in time; one: that value; none: 0.23
        noon = dt.datetime(2026, 6, day, 12, tzinfo=dt.timezone.utc)
        near = sorted(((t - noon).total_seconds() / 86400, albedo[t]) for t in times)
        near = [(d, a) for d, a in near if abs(d) <= 5]
        e, te, lv, tl = (np.full(SHAPE, np.nan) for _ in range(4))
        for d, a in sorted((x for x in near if x[0] <= 0), key=lambda x: -x[0]):
            take = np.isnan(e) & ~np.isnan(a)
            e[take], te[take] = a[take], d
        for d, a in sorted((x for x in near if x[0] > 0), key=lambda x: x[0]):
            take = np.isnan(lv) & ~np.isnan(a)
            lv[take], tl[take] = a[take], d
        both = ~np.isnan(e) & ~np.isnan(lv)
        one = np.where(np.isnan(e), lv, e)
        alb = np.where(both, e + (lv - e) * (0 - te) / (tl - te), np.where(np.isnan(one), 0.23, one))
        exp = daily_net_radiation(24.0, 301.0, 287.0, 1.4, lat, 151 + day, z, alb)
        got = read(out / "days" / f"net_radiation_202606{day:02d}.tif")
        assert np.nanmax(np.abs(got - exp)) < 0.01, day
        q = read(out / "days" / f"quality_202606{day:02d}.tif")
        flag = np.where(both, DAY_QUALITY_BITS["albedo_interpolated"],
                        np.where(np.isnan(one), DAY_QUALITY_BITS["albedo_default"], DAY_QUALITY_BITS["albedo_held"]))
        np.testing.assert_array_equal(q & 28, flag)


def test_a_multiband_raster_is_refused_with_its_band_count(tmp_path, capsys):
    _static(tmp_path)
    with rasterio.open(tmp_path / "stack.tif", "w", driver="GTiff", width=SHAPE[1], height=SHAPE[0], count=3,
                       dtype="float32", crs=CRS_UTM, transform=T_GRID) as ds:
        ds.write(np.full((3,) + SHAPE, 20.0, np.float32))
    for n, v in (("tmax", 301.0), ("tmin", 287.0), ("ea", 1.4)):
        write_tif(tmp_path / f"{n}.tif", np.full(SHAPE, v, np.float32), transform=T_GRID)
    cfg = _config(tmp_path, days=[{"date": "2026-06-01", "shortwave_down": "stack.tif", "air_temperature_max": "tmax.tif",
                                   "air_temperature_min": "tmin.tif", "vapour_pressure": "ea.tif"}])
    assert main(["check", str(cfg)]) == 2
    err = capsys.readouterr().err
    assert "stack.tif" in err and "3 bands" in err and "variable" in err


@pytest.mark.parametrize("layout", ["utm-grid-mapping", "lat-increasing"])
def test_a_stack_with_a_cf_grid_mapping_or_south_up_rows_equals_the_same_field_as_rasters(tmp_path, layout):
    f = _static(tmp_path)
    h, w = SHAPE
    rng = np.random.default_rng(5)
    field = (290 + 5 * rng.random((2,) + SHAPE)).astype(np.float32)       # Tmax [K], two days, on the grid
    x = X0 + RES * (np.arange(w) + 0.5)
    y = Y0 - RES * (np.arange(h) + 0.5)
    if layout == "utm-grid-mapping":
        from pyproj import CRS as ProjCRS
        ds = xr.Dataset({"tmax": (("time", "y", "x"), field, {"units": "K", "grid_mapping": "crs"}),
                         "crs": ((), 0, ProjCRS.from_user_input(CRS_UTM).to_cf())},
                        coords={"time": DAYS[:2], "x": x, "y": y})
    else:   # the same field on lon/lat rows stored south to north: warped, so compare with GDAL's warp
        pytest.importorskip("h5netcdf")
        lons, lats = _lonlat_grid()
        vals = np.stack([np.add.outer(290 + 0.5 * np.arange(lats.size), 0.3 * np.arange(lons.size))] * 2)
        ds = xr.Dataset({"tmax": (("time", "lat", "lon"), vals[:, ::-1].astype(np.float32), {"units": "K"})},
                        coords={"time": DAYS[:2], "lat": ("lat", lats[::-1], {"units": "degrees_north"}),
                                "lon": ("lon", lons, {"units": "degrees_east"})})
        field = np.stack([_warp(v, lons, lats) for v in vals]).astype(np.float32)
    ds.to_netcdf(tmp_path / "tmax.nc", engine="h5netcdf")
    for n, v in (("tmin", 285.0), ("ea", 1.3), ("rsd", 23.0)):
        write_tif(tmp_path / f"{n}.tif", np.full(SHAPE, v, np.float32), transform=T_GRID)
    day = {"dates": {"start": "2026-06-01", "end": "2026-06-02"}, "shortwave_down": "rsd.tif",
           "air_temperature_min": "tmin.tif", "vapour_pressure": "ea.tif"}
    cfg = _config(tmp_path, days=[{**day, "air_temperature_max": {"path": "tmax.nc", "variable": "tmax"}}])
    run_config(load_config(cfg))
    lat = _pixel_lat()
    for k in range(2):
        got = read(tmp_path / "out" / "days" / f"net_radiation_2026060{k + 1}.tif")
        exp = daily_net_radiation(23.0, field[k].astype(float), 285.0, 1.3, lat, 152 + k, f["elev"].astype(float))
        np.testing.assert_array_equal(np.isnan(got), np.isnan(exp))
        assert np.nanmax(np.abs(got - exp)) < 0.02


def test_season_composites_streamed_and_read_back_equal_numpy_over_the_days(tmp_path):
    _static(tmp_path)
    name, _, _, _ = _write_stacks(tmp_path)
    day = _stack_day(name, "2026-06-01", "2026-06-10")
    streamed = ["mean", "total", "sum", "count", "std", "min", "max"]
    comps = [{"name": "early", "from": "days", "start": "2026-06-01", "end": "2026-06-06", "statistics": streamed,
              "min_count": 2},
             {"name": "whole", "from": "days", "start": "2026-06-01", "end": "2026-06-10",
              "statistics": ["median", "mean"]}]
    cfg = _config(tmp_path, days=[day], composites=comps)
    for attempt in ("first run (accumulated while the days stream)", "rerun with one day to redo (read back)"):
        run_config(load_config(cfg))
        days = np.stack([read(tmp_path / "out" / "days" / f"net_radiation_{d:%Y%m%d}.tif") for d in DAYS])
        early = days[:6].astype(np.float64)
        n = np.sum(~np.isnan(early), axis=0)
        with np.errstate(all="ignore"):
            expected = {"mean": np.nanmean(early, 0), "total": np.nanmean(early, 0) * 6, "sum": np.nansum(early, 0),
                        "count": n, "std": np.nanstd(early, 0), "min": np.nanmin(early, 0), "max": np.nanmax(early, 0)}
        for s, exp in expected.items():
            if s != "count":
                exp = np.where(n >= 2, exp, np.nan)
            got = read(tmp_path / "out" / "composites" / f"early_{s}.tif")
            np.testing.assert_allclose(got, exp, rtol=1e-5, atol=1e-4, equal_nan=True, err_msg=f"{attempt}: {s}")
        with np.errstate(all="ignore"):
            np.testing.assert_allclose(read(tmp_path / "out" / "composites" / "whole_median.tif"),
                                       np.nanmedian(days, 0), rtol=1e-5, atol=1e-4, equal_nan=True)
        assert not list((tmp_path / "out" / "composites").glob(".*")), "no accumulation files left behind"
        # one day and the composites to redo: the other days are on disk, so the composites read them back
        (tmp_path / "out" / "days" / "net_radiation_20260603.tif").unlink()
        for p in (tmp_path / "out" / "composites").glob("*.tif"):
            p.unlink()


def _zones_file(folder):
    """Two invented sub-basins in the grid's CRS (GeoJSON with a named CRS member); no vertex or edge
    passes through a pixel centre, so the pixel-centre rule has no ties."""
    x0, y0 = X0, Y0
    rings = {"upper": [(x0 + 91.3, y0 - 61.7), (x0 + 903.1, y0 - 97.2), (x0 + 702.4, y0 - 801.9),
                       (x0 + 91.3, y0 - 61.7)],
             "lower": [(x0 + 601, y0 - 831), (x0 + 1801, y0 - 831), (x0 + 1801, y0 - 1401), (x0 + 601, y0 - 1401),
                       (x0 + 601, y0 - 831)]}
    feats = [{"type": "Feature", "properties": {"basin": k},
              "geometry": {"type": "Polygon", "coordinates": [[list(p) for p in r]]}} for k, r in rings.items()]
    gj = {"type": "FeatureCollection", "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32611"}},
          "features": feats}
    (folder / "basins.geojson").write_text(json.dumps(gj))
    return {k: shapely.Polygon(r) for k, r in rings.items()}


def test_a_season_gets_one_long_zone_table_and_a_rerun_redoes_only_tables_whose_sources_changed(tmp_path):
    _static(tmp_path)
    polygons = _zones_file(tmp_path)
    name, _, _, _ = _write_stacks(tmp_path)
    day = _stack_day(name, "2026-06-01", "2026-06-05")
    cfg = _config(tmp_path, days=[day], zones={"path": "basins.geojson", "id": "basin"},
                  composites=[{"name": "early", "from": "days", "start": "2026-06-01", "end": "2026-06-05"}])
    run_config(load_config(cfg))
    zones = tmp_path / "out" / "zones"
    assert (zones / "early_mean.csv").exists() and (zones / "early_count.csv").exists()   # composites too
    with open(zones / "net_radiation_days.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert list(rows[0]) == ["date", "basin", "mean", "min", "max", "std", "count", "coverage", "area_km2", "units"]
    assert [r["date"] for r in rows] == [f"{d:%Y-%m-%d}" for d in DAYS[:5] for _ in range(2)]
    assert {r["units"] for r in rows} == {"MJ m-2 day-1"}
    # each row is the day's own table, and its mean the NumPy mean of the pixels whose centres lie
    # inside the polygon (shapely; the 'centre' weighting)
    ys, xs = np.mgrid[0:SHAPE[0], 0:SHAPE[1]]
    cx, cy = X0 + RES * (xs + 0.5), Y0 - RES * (ys + 0.5)
    for i, d in enumerate(DAYS[:5]):
        with open(zones / f"net_radiation_{d:%Y%m%d}.csv", newline="") as fh:
            daily = {r["basin"]: r for r in csv.DictReader(fh)}
        values = read(tmp_path / "out" / "days" / f"net_radiation_{d:%Y%m%d}.tif")
        for r in rows[2 * i:2 * i + 2]:
            assert {k: v for k, v in r.items() if k not in ("date", "units")} == daily[r["basin"]]
            inside = shapely.contains_xy(polygons[r["basin"]], cx, cy)
            assert float(r["mean"]) == pytest.approx(np.nanmean(values[inside]), rel=1e-5)
    # an unchanged rerun keeps every table (not rewritten), a redone day redoes its table and the long one
    before = {p.name: p.stat().st_mtime_ns for p in [*zones.glob("*.csv"), zones / ".radledger-zones.json"]}
    report = run_config(load_config(cfg))
    assert not [p for p in report.written if p.parent == zones]
    assert {p.name: p.stat().st_mtime_ns for p in [*zones.glob("*.csv"), zones / ".radledger-zones.json"]} == before
    # a lost day table is made again (from the same product: the long table stays as it is)
    (zones / "net_radiation_20260603.csv").unlink()
    report = run_config(load_config(cfg))
    assert [p.name for p in report.written if p.parent == zones] == ["net_radiation_20260603.csv"]
    # other zones (here: another weighting) redo every table
    cfg.write_text(cfg.read_text().replace("id: basin", "id: basin\n  weighting: coverage"))
    report = run_config(load_config(cfg))
    assert len([p for p in report.written if p.parent == zones]) == 8   # 5 days, 2 composite files, the series


def test_netcdf_takes_the_listed_products_and_an_unchanged_rerun_keeps_stacks_and_quicklooks(tmp_path):
    _static(tmp_path)
    name, _, _, _ = _write_stacks(tmp_path)
    day = _stack_day(name, "2026-06-01", "2026-06-04")
    cfg = _config(tmp_path, days=[day])
    text = yaml.safe_load(cfg.read_text())
    text["output"].update(netcdf=["net_radiation"], quicklooks=True)
    cfg.write_text(yaml.safe_dump(text))
    out = tmp_path / "out"
    run_config(load_config(cfg))
    assert sorted(p.name for p in (out / "netcdf").iterdir()) == ["net_radiation_days.nc"]
    with xr.open_dataset(out / "netcdf" / "net_radiation_days.nc", engine="h5netcdf") as ds:
        stack = ds["net_radiation"].values
    days = [read(out / "days" / f"net_radiation_{d:%Y%m%d}.tif") for d in DAYS[:4]]
    np.testing.assert_array_equal(stack, np.stack(days))
    made = {p: p.stat().st_mtime_ns for p in [*(out / "netcdf").iterdir(), *(out / "quicklooks").iterdir()]}
    assert len(made) == 1 + 8                            # the stack; net_radiation and quality PNGs per day

    report = run_config(load_config(cfg))                # unchanged: nothing rewritten, everything kept
    assert report.written == [] and set(made) <= set(report.skipped)
    assert {p: p.stat().st_mtime_ns for p in made} == made

    # a lost day is made again: its PNG with it; the stack holds the same product, so it is kept
    (out / "days" / "net_radiation_20260603.tif").unlink()
    report = run_config(load_config(cfg))
    assert sorted(p.name for p in report.written) == ["net_radiation_20260603.png", "net_radiation_20260603.tif"]

    # other weather (a stack input is fingerprinted as one file: every day is redone) redoes the stack
    with xr.open_dataset(tmp_path / name, engine="h5netcdf") as ds:
        ds = ds.load()
    ds["vp"][2] = ds["vp"][2] + 100.0
    ds.to_netcdf(tmp_path / "new.nc", engine="h5netcdf",
                 encoding={"tmax": {"dtype": "int16", "scale_factor": 0.01, "add_offset": 20.0, "_FillValue": -32768}})
    (tmp_path / "new.nc").replace(tmp_path / name)
    report = run_config(load_config(cfg))
    assert out / "netcdf" / "net_radiation_days.nc" in report.written
    with xr.open_dataset(out / "netcdf" / "net_radiation_days.nc", engine="h5netcdf") as ds:
        np.testing.assert_array_equal(ds["net_radiation"].values[2], read(out / "days" / "net_radiation_20260603.tif"))
        assert not np.array_equal(ds["net_radiation"].values[2], days[2])


@pytest.mark.filterwarnings("ignore:variable .t. has multiple fill values")
def test_stack_reads_decode_cf_packing_as_xarray_does(tmp_path):
    """NetCDF-4 stacks are read with h5py and decoded by radledger; xarray's CF decoding
    (mask_and_scale) is the reference: packed int16 with _FillValue and missing_value, and a
    signed byte variable flagged _Unsigned."""
    from radledger.io.timestacks import _block

    rng = np.random.default_rng(7)
    raw = rng.integers(-300, 300, size=(4, 6, 5)).astype(np.int16)
    raw[0, 0, 0], raw[1, 2, 3] = -32768, -999
    b = rng.integers(-128, 127, size=(4, 6, 5)).astype(np.int8)
    ds = xr.Dataset({"t": (("time", "y", "x"), raw, {"scale_factor": 0.05, "add_offset": 280.0,
                                                     "missing_value": np.int16(-999)}),
                     "u": (("time", "y", "x"), b, {"_Unsigned": "true", "scale_factor": 0.5})},
                    coords={"time": pd.date_range("2026-06-01", periods=4)})
    path = tmp_path / "packed.nc"
    ds.to_netcdf(path, engine="h5netcdf", encoding={"t": {"_FillValue": np.int16(-32768)},
                                                   "u": {"_FillValue": None}})
    with xr.open_dataset(path, engine="h5netcdf") as ref:
        for name in ("t", "u"):
            want = ref[name].isel(time=[0, 1, 3], y=slice(1, 5), x=slice(0, 4)).values
            got = _block(str(path), name, False, [0, 1, 3], slice(1, 5), slice(0, 4))
            np.testing.assert_allclose(got, want, rtol=1e-6, equal_nan=True, err_msg=name)
            assert np.isnan(got).sum() == np.isnan(want).sum()
