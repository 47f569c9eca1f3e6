#!/usr/bin/env python
"""Generate the radledger demo tiles: the fictional Silvermoth Creek basin.

Every number written by this script is invented. The basin, its sub-basins,
the town, the reservoir and the peaks do not exist; the fields are built from
summed sinusoids, gaussian bumps and carved valleys, and are only meant to be
physically plausible for a mid-summer, late-morning (18:20 UTC, about 10:20
local solar time) satellite overpass over a snow-fed mountain basin on the
Sierra / Great Basin divide (about 38.6 N, 119.3 W).

Run from anywhere:

    python sample_tiles/make_sample_tiles.py

Outputs are written next to this script. The script is deterministic (fixed
seeds) and needs only numpy, rasterio and pyproj. It runs offline in a few
seconds.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import rasterio
from pyproj import Transformer
from rasterio.transform import from_origin

OUT = Path(__file__).resolve().parent
SEED = 20260612
NOTE = "synthetic demo data - invented"
SCENARIO = "fictional Silvermoth Creek basin (radledger demo); not a real place"

# --------------------------------------------------------------------------
# Grids
# --------------------------------------------------------------------------
UTM = "EPSG:32611"
GEO = "EPSG:4326"

# Fine grid: 640 x 512 cells of 60 m, UTM zone 11N, origin on 60 m multiples.
RES = 60.0
NCOL, NROW = 640, 512
X0, Y0 = 280800.0, 4290240.0          # upper-left corner (west, north)
X1, Y1 = X0 + NCOL * RES, Y0 - NROW * RES  # 319200, 4259520
FINE_TRANSFORM = from_origin(X0, Y0, RES, RES)

# Shortwave grid: 480 m UTM cells, the fine extent plus two cells each side.
RS_RES = 480.0
RS_MARGIN = 2
RS_X0, RS_Y0 = X0 - RS_MARGIN * RS_RES, Y0 + RS_MARGIN * RS_RES
RS_NCOL = int(round((X1 - X0) / RS_RES)) + 2 * RS_MARGIN
RS_NROW = int(round((Y0 - Y1) / RS_RES)) + 2 * RS_MARGIN
RS_TRANSFORM = from_origin(RS_X0, RS_Y0, RS_RES, RS_RES)

# Meteorology grid: 0.05 degree lon/lat cells covering the basin, margin >= 2.
MET_RES = 0.05
MET_MARGIN = 2

TO_GEO = Transformer.from_crs(UTM, GEO, always_xy=True)
TO_UTM = Transformer.from_crs(GEO, UTM, always_xy=True)


def met_grid():
    """0.05-degree grid snapped to multiples of 0.05 degree."""
    xs = np.concatenate([np.linspace(X0, X1, 65), np.full(65, X1),
                         np.linspace(X1, X0, 65), np.full(65, X0)])
    ys = np.concatenate([np.full(65, Y0), np.linspace(Y0, Y1, 65),
                         np.full(65, Y1), np.linspace(Y1, Y0, 65)])
    lon, lat = TO_GEO.transform(xs, ys)
    west = (math.floor(lon.min() / MET_RES) - MET_MARGIN) * MET_RES
    east = (math.ceil(lon.max() / MET_RES) + MET_MARGIN) * MET_RES
    south = (math.floor(lat.min() / MET_RES) - MET_MARGIN) * MET_RES
    north = (math.ceil(lat.max() / MET_RES) + MET_MARGIN) * MET_RES
    ncol = int(round((east - west) / MET_RES))
    nrow = int(round((north - south) / MET_RES))
    west, north = round(west, 6), round(north, 6)
    return from_origin(west, north, MET_RES, MET_RES), ncol, nrow


MET_TRANSFORM, MET_NCOL, MET_NROW = met_grid()

# --------------------------------------------------------------------------
# Dates
# --------------------------------------------------------------------------
SCENE_DATES = ["2026-06-12", "2026-07-06", "2026-07-30", "2026-08-23"]
DAY_DATES = ["2026-06-12", "2026-06-24", "2026-07-06", "2026-07-18",
             "2026-07-30", "2026-08-11", "2026-08-23", "2026-08-31"]
OVERPASS_UTC = 18 + 20 / 60.0
CLOUDY_SCENE = "2026-07-30"
SCANGAP_SCENE = "2026-06-12"

# Air temperature (degC) at 1500 m at overpass time, and scene vapour pressure
# (hPa) at 1500 m: invented but typical of a dry continental summer; the
# 2026-07-30 scene is a humid monsoon-surge day.
SCENE_T1500 = {"2026-06-12": 25.0, "2026-07-06": 29.0,
               "2026-07-30": 26.5, "2026-08-23": 26.0}
SCENE_EA1500 = {"2026-06-12": 9.5, "2026-07-06": 10.5,
                "2026-07-30": 15.0, "2026-08-23": 11.0}
# Daily tmax at 1500 m (degC), diurnal range (K), ea at 1500 m (hPa),
# basin-wide cloud attenuation of daily shortwave.
DAILY = {
    "2026-06-12": dict(tmax=28.5, dtr=16.5, ea=9.5, cloud=0.00),
    "2026-06-24": dict(tmax=31.0, dtr=17.0, ea=9.0, cloud=0.00),
    "2026-07-06": dict(tmax=33.5, dtr=17.0, ea=10.5, cloud=0.00),
    "2026-07-18": dict(tmax=32.5, dtr=15.5, ea=12.0, cloud=0.06),
    "2026-07-30": dict(tmax=30.5, dtr=12.5, ea=15.0, cloud=0.08),
    "2026-08-11": dict(tmax=29.0, dtr=12.0, ea=15.5, cloud=0.22),
    "2026-08-23": dict(tmax=30.5, dtr=16.0, ea=11.0, cloud=0.00),
    "2026-08-31": dict(tmax=28.0, dtr=17.5, ea=8.5, cloud=0.02),
}
LAPSE = 6.5e-3  # K per m


def doy(date: str) -> int:
    y, m, d = (int(p) for p in date.split("-"))
    days = [31, 28 + (y % 4 == 0), 31, 30, 31, 30, 31, 31, 30, 31, 30, 31]
    return sum(days[: m - 1]) + d


def ymd(date: str) -> str:
    return date.replace("-", "")


# --------------------------------------------------------------------------
# Smooth random fields
# --------------------------------------------------------------------------
def wavefield(x, y, seed, n=24, lmin=2000.0, lmax=12000.0):
    """Analytic smooth noise (sum of random plane waves), unit-ish std.

    Evaluable at any map coordinates, so different grids see the same field.
    """
    r = np.random.default_rng(seed)
    lam = np.exp(r.uniform(np.log(lmin), np.log(lmax), n))
    th = r.uniform(0, np.pi, n)
    ph = r.uniform(0, 2 * np.pi, n)
    k = 2 * np.pi / lam
    kx, ky = k * np.cos(th), k * np.sin(th)
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    if (x.ndim == 2 and x.shape == y.shape and np.all(x == x[:1, :])
            and np.all(y == y[:, :1])):
        # regular grid: separable sum as one complex matrix product
        ex = np.exp(1j * (np.outer(x[0], kx) + ph))      # (ncol, n)
        ey = np.exp(1j * np.outer(y[:, 0], ky))          # (nrow, n)
        return (ey @ ex.T).real * np.sqrt(2.0 / n)
    out = np.zeros(np.broadcast(x, y).shape)
    for i in range(n):
        out += np.cos(kx[i] * x + ky[i] * y + ph[i])
    return out * np.sqrt(2.0 / n)


def grid_noise(shape, sigma_px, seed):
    """Gaussian-filtered white noise on a grid (FFT), unit std."""
    r = np.random.default_rng(seed)
    w = r.standard_normal(shape)
    fy = np.fft.fftfreq(shape[0])[:, None]
    fx = np.fft.rfftfreq(shape[1])[None, :]
    g = np.exp(-2 * (np.pi * sigma_px) ** 2 * (fx ** 2 + fy ** 2))
    f = np.fft.irfft2(np.fft.rfft2(w) * g, s=shape)
    return (f - f.mean()) / f.std()


# --------------------------------------------------------------------------
# Terrain (analytic in UTM metres so coarse grids can be averaged from it)
# --------------------------------------------------------------------------
# Stream polylines in km from the fine grid's lower-left corner (X0, Y1):
# nodes, stream-bed elevation (m) at each node and the half-width (km) at
# which the valley walls reach the surrounding terrain. Distances are taken
# in domain-warped coordinates so the valleys meander.
TRUNK = dict(
    pts=[(-1.0, 21.0), (3.5, 19.8), (7.5, 18.3), (11.0, 16.4), (15.0, 15.2),
         (18.5, 14.8), (21.5, 15.6), (24.2, 16.0), (26.5, 16.9), (30.0, 17.3),
         (34.0, 17.0), (40.0, 18.0)],
    z=[2820, 2650, 2420, 2230, 2000, 1790, 1745, 1720, 1660, 1590, 1545, 1500],
    w=[1.6, 1.8, 2.1, 2.3, 2.5, 2.8, 2.8, 1.0, 2.5, 4.0, 5.0, 6.0],
)
TRIBS = [
    dict(pts=[(6.0, 30.5), (8.0, 25.5), (10.5, 19.5), (11.5, 16.6)],
         z=[2900, 2600, 2330, 2240], w=[1.2, 1.4, 1.6, 1.8]),
    dict(pts=[(5.5, 1.0), (9.0, 6.5), (13.5, 11.5), (15.8, 15.0)],
         z=[2880, 2500, 2200, 1995], w=[1.2, 1.4, 1.6, 1.8]),
    dict(pts=[(17.0, 30.0), (18.5, 23.5), (20.2, 15.4)],
         z=[2550, 2100, 1790], w=[1.1, 1.4, 1.8]),
    dict(pts=[(23.5, 0.5), (23.0, 7.5), (22.2, 15.7)],
         z=[2450, 2000, 1780], w=[1.1, 1.4, 1.8]),
    dict(pts=[(30.5, 31.5), (29.5, 24.0), (29.5, 17.5)],
         z=[2300, 1800, 1600], w=[1.0, 1.5, 2.0]),
    dict(pts=[(35.0, 2.0), (33.5, 10.0), (33.0, 16.9)],
         z=[2200, 1700, 1548], w=[1.0, 1.5, 2.0]),
]
LAKE_LEVEL = 1812.0      # Lantern Reservoir surface (m)
DAM_X_KM = 24.7          # dam at the reservoir's outlet gorge
TARNS = [(4.2, 23.6, 0.20), (6.4, 6.6, 0.17), (2.6, 15.2, 0.14)]  # x, y, r (km)
TOWN = (31.6, 16.4, 1.0, 0.65)   # Harrowgate: centre x, y and semi-axes (km)
PEAKS = [(3.5, 25.0, 300, 2.5), (6.5, 9.0, 280, 2.2), (2.0, 14.0, 220, 3.0),
         (10.5, 27.0, 200, 2.2), (12.0, 4.5, 200, 2.5), (16.5, 27.0, 200, 2.5),
         (27.0, 3.0, 300, 3.0), (37.0, 4.5, 650, 3.5), (36.0, 29.0, 450, 3.0)]


def _polyline(xk, yk, line):
    """Distance (km) to a polyline and interpolated bed elevation / width."""
    p = np.asarray(line["pts"], float)
    z = np.asarray(line["z"], float)
    w = np.asarray(line["w"], float)
    best = np.full(np.shape(xk), np.inf)
    zb = np.zeros(np.shape(xk))
    wb = np.zeros(np.shape(xk))
    for i in range(len(p) - 1):
        a, b = p[i], p[i + 1]
        d = b - a
        t = np.clip(((xk - a[0]) * d[0] + (yk - a[1]) * d[1]) / (d @ d), 0, 1)
        dist = np.hypot(xk - (a[0] + t * d[0]), yk - (a[1] + t * d[1]))
        sel = dist < best
        best = np.where(sel, dist, best)
        zb = np.where(sel, z[i] + t * (z[i + 1] - z[i]), zb)
        wb = np.where(sel, w[i] + t * (w[i + 1] - w[i]), wb)
    return best, zb, wb


def _warp(xk, yk):
    xw = xk + 0.35 * np.sin(yk / 1.3 + 0.5) + 0.18 * np.sin(yk / 0.55)
    yw = yk + 0.35 * np.sin(xk / 1.1 + 1.0) + 0.18 * np.sin(xk / 0.47 + 2.0)
    return xw, yw


def terrain(x, y, detail=True):
    """Elevation (m) at UTM coordinates; returns (elev, extras dict)."""
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    xk = (x - X0) / 1000.0
    yk = (y - Y1) / 1000.0
    # Regional tilt: Sierra-like crest to the west, Great Basin valley east.
    z = (1530.0 + 700.0 / (1.0 + np.exp((xk - 25.0) / 2.2))
         + 560.0 / (1.0 + np.exp((xk - 10.0) / 4.0)))
    # Bounding ridges north and south of the trunk valley.
    taper = 1.0 / (1.0 + np.exp((xk - 31.0) / 3.0))
    z += 380.0 * np.exp(-((yk - 28.5) / 4.5) ** 2) * taper
    z += 350.0 * np.exp(-((yk - 2.5) / 4.5) ** 2) * taper
    for px, py, h, r in PEAKS:
        z += h * np.exp(-((xk - px) ** 2 + (yk - py) ** 2) / (2 * r * r))
    # Ridge-and-spur texture, stronger where the relief is high.
    relief = np.clip((z - 1500.0) / 1200.0, 0.08, 1.3)
    tex = 115.0 * wavefield(x, y, SEED + 71, n=30, lmin=1500, lmax=9000)
    if detail:
        tex += 14.0 * wavefield(x, y, SEED + 72, n=24, lmin=600, lmax=1500)
    z += relief * tex
    # Carve valleys in warped coordinates (meanders).
    xw, yw = _warp(xk, yk)
    dmin = np.full(np.shape(z), np.inf)
    for line in TRIBS + [TRUNK]:
        d, zb, wb = _polyline(xw, yw, line)
        f = np.clip(d / wb, 0.0, 1.0) ** 1.1
        z = np.minimum(z, zb + np.maximum(z - zb, 0.0) * f + 4.0 * d)
        dmin = np.minimum(dmin, d)
    dtrunk, _, _ = _polyline(xw, yw, TRUNK)
    # Soft summit cap: the highest peaks top out just under 3300 m.
    z = np.where(z > 2950.0, 2950.0 + 350.0 * np.tanh((z - 2950.0) / 350.0), z)
    # Reservoir: flood the trunk valley behind the dam up to LAKE_LEVEL.
    lake = (z < LAKE_LEVEL) & (xk < DAM_X_KM) & (xk > 16.0) & (dmin < 4.0)
    z = np.where(lake, LAKE_LEVEL, z)
    # Cirque tarns: flat water at the lowest elevation inside the circle.
    tarn = np.zeros(np.shape(z), bool)
    for tx, ty, tr in TARNS:
        inside = np.hypot(xk - tx, yk - ty) < tr
        if inside.any():
            tarn |= inside
            z = np.where(inside, z[inside].min(), z)
    return z, dict(xk=xk, yk=yk, dstream=dmin, dtrunk=dtrunk, lake=lake,
                   tarn=tarn)


def block_mean_terrain(transform, ncol, nrow, crs_is_geo, nsub):
    """Cell-mean elevation on a coarse grid by sub-sampling the terrain."""
    a = transform
    off = (np.arange(nsub) + 0.5) / nsub
    cc = (np.arange(ncol)[None, :, None, None] + off[None, None, None, :])
    rr = (np.arange(nrow)[:, None, None, None] + off[None, None, :, None])
    cc, rr = np.broadcast_arrays(cc, rr)
    gx = a.c + cc * a.a
    gy = a.f + rr * a.e
    if crs_is_geo:
        gx, gy = TO_UTM.transform(gx, gy)
    z, _ = terrain(gx, gy, detail=False)
    return z.reshape(nrow, ncol, nsub * nsub).mean(axis=2)


def cell_centres(transform, ncol, nrow):
    a = transform
    x = a.c + (np.arange(ncol) + 0.5) * a.a
    y = a.f + (np.arange(nrow) + 0.5) * a.e
    return np.meshgrid(x, y)


# --------------------------------------------------------------------------
# Sun
# --------------------------------------------------------------------------
def sun_position(date, hour_utc, lon, lat):
    """Solar zenith and azimuth (deg, azimuth clockwise from north)."""
    g = 2 * np.pi / 365.0 * (doy(date) - 1 + (hour_utc - 12) / 24.0)
    decl = (0.006918 - 0.399912 * np.cos(g) + 0.070257 * np.sin(g)
            - 0.006758 * np.cos(2 * g) + 0.000907 * np.sin(2 * g)
            - 0.002697 * np.cos(3 * g) + 0.00148 * np.sin(3 * g))
    eot = 229.18 * (0.000075 + 0.001868 * np.cos(g) - 0.032077 * np.sin(g)
                    - 0.014615 * np.cos(2 * g) - 0.040849 * np.sin(2 * g))
    solar_time = hour_utc * 60 + eot + 4 * np.asarray(lon)
    ha = np.radians(solar_time / 4.0 - 180.0)
    phi = np.radians(lat)
    cosz = np.sin(phi) * np.sin(decl) + np.cos(phi) * np.cos(decl) * np.cos(ha)
    zen = np.arccos(np.clip(cosz, -1, 1))
    az = np.arctan2(np.sin(ha),
                    np.cos(ha) * np.sin(phi) - np.tan(decl) * np.cos(phi))
    az = (np.degrees(az) + 180.0) % 360.0
    return np.degrees(zen), az


def earth_sun_factor(date):
    return 1.0 + 0.033 * np.cos(2 * np.pi * doy(date) / 365.0)


def daily_ra(date, lat):
    """FAO-56 extraterrestrial radiation (MJ m-2 day-1)."""
    J = doy(date)
    dr = 1 + 0.033 * np.cos(2 * np.pi * J / 365)
    dec = 0.409 * np.sin(2 * np.pi * J / 365 - 1.39)
    phi = np.radians(lat)
    ws = np.arccos(np.clip(-np.tan(phi) * np.tan(dec), -1, 1))
    return (24 * 60 / np.pi * 0.0820 * dr
            * (ws * np.sin(phi) * np.sin(dec) + np.cos(phi) * np.cos(dec) * np.sin(ws)))


def esat_hpa(t_c):
    return 6.108 * np.exp(17.27 * t_c / (t_c + 237.3))


# --------------------------------------------------------------------------
# Writing
# --------------------------------------------------------------------------
def write_tif(name, data, transform, crs, nodata=None, scale=None, units="",
              description="", extra=None):
    data = np.ascontiguousarray(data)
    nrow, ncol = data.shape
    predictor = 3 if data.dtype.kind == "f" else 2   # float / horizontal
    block = 256 if min(nrow, ncol) >= 256 else (64 if min(nrow, ncol) >= 64 else 16)
    profile = dict(driver="GTiff", width=ncol, height=nrow, count=1,
                   dtype=data.dtype.name, crs=crs, transform=transform,
                   nodata=nodata, tiled=True, blockxsize=block,
                   blockysize=block, compress="deflate", zlevel=9,
                   predictor=predictor)
    path = OUT / name
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(data, 1)
        tags = dict(TIFFTAG_IMAGEDESCRIPTION=NOTE, NOTE=NOTE,
                    SCENARIO=SCENARIO, UNITS=units)
        if scale is not None:
            # also set as the GDAL band scale/offset below, so GIS tools show
            # physical values; a config's layers block states it explicitly
            tags["ENCODING"] = (f"physical = stored * {scale!r} "
                                f"({'dimensionless' if units == '1' else units}); "
                                f"nodata = {nodata}")
        if extra:
            tags.update(extra)
        dst.update_tags(**tags)
        dst.set_band_description(1, description)
        if units:
            dst.set_band_unit(1, units)
        if scale is not None:
            dst.scales = (scale,)
            dst.offsets = (0.0,)
    return path


def quantize(a, step):
    """Round to a power-of-two step so float32 mantissas compress well."""
    return (np.round(np.asarray(a, float) / step) * step).astype(np.float32)


# --------------------------------------------------------------------------
# Build
# --------------------------------------------------------------------------
def main():
    shape = (NROW, NCOL)
    fx, fy = cell_centres(FINE_TRANSFORM, NCOL, NROW)
    dem, ex = terrain(fx, fy)
    dem = quantize(dem, 1 / 4)
    xk, yk = ex["xk"], ex["yk"]
    lon_c, lat_c = TO_GEO.transform((X0 + X1) / 2, (Y0 + Y1) / 2)

    # Slope / aspect
    dzdy, dzdx = np.gradient(dem.astype(float), RES)
    dzdy = -dzdy  # rows run north -> south
    slope = np.arctan(np.hypot(dzdx, dzdy))
    aspect = (np.degrees(np.arctan2(-dzdx, -dzdy)) + 360) % 360  # downslope dir
    northness = np.cos(np.radians(aspect)) * np.sin(slope)
    slope_deg = np.degrees(slope)

    # ---------------- land cover ----------------
    n_static = grid_noise(shape, 6, SEED + 1)
    n_fine = grid_noise(shape, 1.5, SEED + 2)
    moist = (1.6 * np.exp(-ex["dstream"] / 0.35) + 0.9 * northness / 0.3
             + (dem - 1500) / 900.0 + 0.35 * n_static + 0.15 * n_fine)
    lc = np.full(shape, 20, np.uint8)                       # shrubland default
    trees = (dem > 2050) & (dem < 2950) & (moist > 1.15)
    trees |= (dem > 1850) & (dem <= 2050) & (moist > 1.9)   # riparian / pinyon
    lc[trees] = 10
    grass = (dem > 1950) & (slope_deg < 9) & (ex["dstream"] < 0.45) & ~trees
    grass |= (dem > 2750) & (dem < 3050) & (moist > 1.6)     # alpine meadows
    lc[grass] = 30
    alpine = dem + 60 * n_static + 30 * n_fine
    bare = (alpine > 2960) | (slope_deg > 34)
    bare |= (dem < 1800) & (moist < 0.25) & (slope_deg > 6) & (n_static > 0.6)
    lc[bare] = 60
    # Great Basin floor: sparse alluvial fans and a few grassy swales.
    lowland = (dem < 1750) & (ex["dtrunk"] > 2.5)
    lc[lowland & (n_static > 1.25) & (slope_deg > 1.5)] = 60
    lc[lowland & (n_static < -1.35)] = 30
    snow = (alpine > 3140) & ((northness > 0.05) | (alpine > 3260))
    lc[snow] = 70

    # Valley-floor irrigated fields (centre pivots and rectangles) and pasture.
    floor = (xk > 25.3) & (dem < 1625) & (slope_deg < 4.0) & (ex["dtrunk"] < 3.6)
    cell = 0.84  # km
    ci = np.floor(xk / cell).astype(int)
    cj = np.floor(yk / cell).astype(int)
    field_id = ci * 1000 + cj
    rf = np.random.default_rng(SEED + 3)
    uniq, inv = np.unique(field_id, return_inverse=True)
    inv = inv.reshape(shape)
    kind_u = rf.choice(np.array(["pivot", "rect", "rect", "pasture", "none"]),
                       size=len(uniq), p=[0.42, 0.23, 0.1, 0.13, 0.12])
    kinds = kind_u[inv]
    fx_c = (ci + 0.5) * cell
    fy_c = (cj + 0.5) * cell
    rfield = np.hypot(xk - fx_c, yk - fy_c)
    # field must sit on the valley floor at its centre
    ux, uy = (uniq // 1000 + 0.5) * cell, (uniq % 1000 + 0.5) * cell
    cz, _ = terrain(X0 + ux * 1000, Y1 + uy * 1000, detail=False)
    cdt, _, _ = _polyline(ux, uy, TRUNK)
    centre_ok = ((cz < 1625) & (cdt < 3.4) & (ux > 25.6))[inv]
    edge = (np.abs(xk - fx_c) > cell / 2 - 0.07) | (np.abs(yk - fy_c) > cell / 2 - 0.07)
    crop = floor & centre_ok & (((kinds == "pivot") & (rfield < 0.40))
                                | ((kinds == "rect") & ~edge))
    pasture = floor & centre_ok & (kinds == "pasture") & ~edge
    lc[pasture] = 30
    lc[crop] = 40
    # Riparian wetland: reservoir inflow delta and the lower river corridor.
    wet = (ex["dtrunk"] < 0.75) & (xk > 18.2) & (xk < 20.3) & (dem < 1830) & ~ex["lake"]
    wet |= (ex["dtrunk"] < 0.12 + 0.05 * n_static) & (xk > DAM_X_KM + 0.4) & (dem < 1700)
    lc[wet] = 90
    # Harrowgate: a small town on the valley floor.
    tx, ty, ta_, tb = TOWN
    town = (((xk - tx) / ta_) ** 2 + ((yk - ty) / tb) ** 2
            < 1 + 0.25 * n_fine) & (ex["dtrunk"] > 0.08)
    lc[town] = 50
    water = ex["lake"] | ex["tarn"]
    lc[water] = 80

    # field attributes per date: True = just cut / harvested (bright, hot)
    stage_u = rf.random((len(SCENE_DATES), len(uniq))) < 0.18
    stage = stage_u[:, inv]
    field_tone = (rf.random(len(uniq)) - 0.5)[inv]

    write_tif("dem.tif", dem, FINE_TRANSFORM, UTM, nodata=None, units="m",
              description="elevation above sea level (m), synthetic")
    write_tif("land_cover.tif", lc, FINE_TRANSFORM, UTM, nodata=0, units="",
              description="land cover class (WorldCover-style codes)",
              extra=dict(CLASSES="10 tree cover;20 shrubland;30 grassland;"
                         "40 cropland;50 built-up;60 bare/sparse;"
                         "70 snow and ice;80 permanent water;90 herbaceous wetland"))

    # ---------------- coarse grids: elevation ----------------
    met_z = block_mean_terrain(MET_TRANSFORM, MET_NCOL, MET_NROW, True, 10)
    met_z = np.clip(met_z, 1400, 3400)
    mx, my = cell_centres(MET_TRANSFORM, MET_NCOL, MET_NROW)
    mux, muy = TO_UTM.transform(mx, my)
    rs_z = block_mean_terrain(RS_TRANSFORM, RS_NCOL, RS_NROW, False, 6)
    rs_z = np.clip(rs_z, 1400, 3400)
    rx, ry = cell_centres(RS_TRANSFORM, RS_NCOL, RS_NROW)
    rlon, rlat = TO_GEO.transform(rx, ry)

    # ---------------- scenes ----------------
    for k, date in enumerate(SCENE_DATES):
        tag = ymd(date)
        dseed = SEED + 100 * (k + 1)
        zen, az = sun_position(date, OVERPASS_UTC, lon_c, lat_c)
        zr, ar = np.radians(zen), np.radians(az)
        cosi = (np.cos(zr) * np.cos(slope)
                + np.sin(zr) * np.sin(slope) * np.cos(ar - np.radians(aspect)))
        illum = np.clip(0.35 + 0.65 * np.clip(cosi, 0, None) / np.cos(zr), 0.3, 1.45)

        # air temperature / vapour pressure (coarse lon/lat grid)
        t15 = SCENE_T1500[date]
        wf = wavefield(mux, muy, dseed + 1, lmin=15000, lmax=60000)
        ta = t15 - LAPSE * (met_z - 1500) + 0.6 * wf + 0.4 * (mux - 300000) / 20000
        ea = SCENE_EA1500[date] * np.exp(-(met_z - 1500) / 3600) \
            * (1 + 0.05 * wavefield(mux, muy, dseed + 2, lmin=15000, lmax=60000))
        ea = np.minimum(ea, 0.85 * esat_hpa(ta))
        write_tif(f"ta_{tag}.tif", quantize(ta, 1 / 256), MET_TRANSFORM, GEO,
                  units="degC", description="air temperature at 2 m (degC) at overpass",
                  extra=dict(TIME=f"{date}T18:20:00Z"))
        write_tif(f"ea_{tag}.tif", quantize(ea, 1 / 256), MET_TRANSFORM, GEO,
                  units="hPa", description="vapour pressure at 2 m (hPa) at overpass",
                  extra=dict(TIME=f"{date}T18:20:00Z"))

        # fine-grid air temperature for the LST model (lapse from the fine DEM)
        wff = wavefield(fx, fy, dseed + 1, lmin=15000, lmax=60000)
        ta_f = t15 - LAPSE * (dem - 1500) + 0.6 * wff + 0.4 * (fx - 300000) / 20000

        # clouds (only on the cloudy scene): a SW-NE band of cumulus
        cloud = np.zeros(shape, bool)
        shadow = np.zeros(shape, bool)
        if date == CLOUDY_SCENE:
            dens = cloud_density(fx, fy, dseed)
            cloud = dens > 0.5
            L = 3000.0 * np.tan(zr) / RES               # shadow length (px)
            sdx = -np.sin(ar) * L                        # shadow points away from sun
            sdy = -np.cos(ar) * L                        # (northing)
            sh = np.roll(np.roll(cloud, int(round(-sdy)), axis=0),
                         int(round(sdx)), axis=1)
            # do not wrap around the edges
            if round(sdx) < 0:
                sh[:, int(round(sdx)):] = False
            elif round(sdx) > 0:
                sh[:, :int(round(sdx))] = False
            if round(-sdy) > 0:
                sh[:int(round(-sdy)), :] = False
            elif round(-sdy) < 0:
                sh[int(round(-sdy)):, :] = False
            shadow = sh & ~cloud

        # ---------------- albedo ----------------
        season = k / (len(SCENE_DATES) - 1)                 # 0 June .. 1 late Aug
        tx1 = 0.7 * n_static + 0.3 * grid_noise(shape, 3, dseed + 3)
        px = grid_noise(shape, 1.0, dseed + 4)
        alb = np.zeros(shape)
        m = lc == 10; alb[m] = 0.117 + 0.008 * tx1[m] - 0.012 * northness[m] / 0.3
        m = lc == 20; alb[m] = 0.205 + 0.008 * season + 0.018 * tx1[m]
        m = lc == 30; alb[m] = 0.185 + 0.04 * season + 0.015 * tx1[m]
        m = lc == 40
        st = stage[k]
        alb[m] = np.where(st[m], 0.245, 0.195) + 0.035 * field_tone[m] + 0.004 * tx1[m]
        m = lc == 50; alb[m] = 0.15 + 0.02 * grid_noise(shape, 0.8, SEED + 9)[m]
        m = lc == 60; alb[m] = 0.285 + 0.02 * tx1[m] + 0.01 * (dem[m] - 2900) / 300
        m = lc == 70
        alb[m] = 0.76 - 0.17 * season + 0.025 * tx1[m] + 0.03 * (alpine[m] - 3150) / 100
        alb[m] = np.clip(alb[m], 0.55, 0.80)
        m = lc == 80; alb[m] = 0.060 + 0.003 * tx1[m]
        m = ex["tarn"]; alb[m] = 0.07 + 0.003 * tx1[m]
        m = lc == 90; alb[m] = 0.150 + 0.008 * tx1[m] + 0.01 * season
        alb += 0.001 * px
        alb = np.clip(alb, 0.03, 0.9)
        alb_i = np.round(alb * 1000).astype(np.int16)
        alb_nd = cloud | shadow
        if date == SCANGAP_SCENE:
            alb_nd |= scan_gap(shape)
        alb_i[alb_nd] = 32767

        # ---------------- LST ----------------
        excess = {10: 4.0, 20: 15.0, 30: 8.5 + 3.0 * season, 40: 1.5,
                  50: 13.0, 60: 20.0, 90: 2.0}
        lst = ta_f + 273.15
        dT = np.zeros(shape)
        for c, e in excess.items():
            dT[lc == c] = e
        crop_hot = (lc == 40) & stage[k]
        dT[crop_hot] = 11.0
        # thinner air aloft: slightly larger surface-air contrast up high
        dT *= 1.0 + 0.08 * (dem - 1500) / 1000
        lst = lst + dT * illum + 0.8 * tx1 + 0.03 * px
        lake_t = {0: 289.0, 1: 292.5, 2: 293.5, 3: 294.0}[k]
        lst = np.where(ex["lake"], lake_t + 0.4 * tx1 + 0.6 * (xk - 20) / 4, lst)
        lst = np.where(ex["tarn"], 283.5 + k * 0.8 + 0.3 * tx1, lst)
        snowT = 273.15 - np.abs(1.4 * tx1 + 0.3 * px) - 0.8 * (1 - illum)
        lst = np.where(lc == 70, np.minimum(snowT, 273.15), lst)
        if shadow.any():
            lst = np.where(shadow, lst - 0.45 * dT * illum, lst)
        lst_i = np.round(lst / 0.02)
        lst_i = np.clip(lst_i, 1, 65534).astype(np.uint16)
        lst_nd = cloud.copy()
        if date == SCANGAP_SCENE:
            lst_nd |= scan_gap(shape)
        lst_i[lst_nd] = 0

        meta = dict(TIME=f"{date}T18:20:00Z",
                    SUN_ZENITH=f"{zen:.2f}", SUN_AZIMUTH=f"{az:.2f}")
        write_tif(f"albedo_{tag}.tif", alb_i, FINE_TRANSFORM, UTM, nodata=32767,
                  scale=0.001, units="1",
                  description="broadband surface albedo x 1000", extra=meta)
        write_tif(f"lst_{tag}.tif", lst_i, FINE_TRANSFORM, UTM, nodata=0,
                  scale=0.02, units="K",
                  description="land surface temperature / 0.02 K", extra=meta)

        # ---------------- instantaneous shortwave (480 m) ----------------
        rzen, _ = sun_position(date, OVERPASS_UTC, rlon, rlat)
        cosz = np.cos(np.radians(rzen))
        tau = 0.735 + 0.02 * rs_z / 1000.0
        rs = 1361.0 * earth_sun_factor(date) * cosz * tau
        if date == CLOUDY_SCENE:
            rs = rs * coarse_cloud_transmission(dseed)
        write_tif(f"rs_{tag}.tif", quantize(rs, 1 / 64), RS_TRANSFORM, UTM,
                  units="W m-2",
                  description="incoming shortwave at the surface (W m-2) at overpass",
                  extra=meta)

    # ---------------- daily inputs ----------------
    for k, date in enumerate(DAILY):
        tag = ymd(date)
        p = DAILY[date]
        dseed = SEED + 1000 + 10 * k
        wf = wavefield(mux, muy, dseed, lmin=15000, lmax=60000)
        # cold-air pooling widens the diurnal range on the valley floors
        dtr = p["dtr"] + 1.5 * np.clip((2000 - met_z) / 500, -1, 1) + 0.4 * wf
        dtr = np.clip(dtr, 10.0, 18.0)
        tmax = p["tmax"] - LAPSE * (met_z - 1500) + 0.5 * wf + 0.4 * (mux - 300000) / 20000
        tmin = tmax - dtr
        ead = p["ea"] * np.exp(-(met_z - 1500) / 3600) * (1 + 0.05 * wavefield(
            mux, muy, dseed + 1, lmin=15000, lmax=60000))
        ead = np.minimum(ead, 0.98 * esat_hpa(tmin))
        # daily shortwave: clear-sky FAO-56 Rso with a clear-day factor and
        # cloudiness; afternoon convection favours the high terrain.
        ra = daily_ra(date, rlat)
        rso = (0.75 + 2e-5 * rs_z) * ra
        conv = np.clip((rs_z - 1800) / 1200, 0, 1)
        cw = wavefield(rx, ry, dseed + 2, lmin=6000, lmax=30000)
        cloudf = p["cloud"] * (0.6 + 0.8 * conv + 0.3 * cw)
        if date == CLOUDY_SCENE:
            cloudf = cloudf + 0.35 * (1 - coarse_cloud_transmission(
                SEED + 100 * (SCENE_DATES.index(CLOUDY_SCENE) + 1)))
        rsd = rso * 0.92 * (1 - np.clip(cloudf, 0.0, 0.35))
        meta = dict(DATE=date)
        write_tif(f"rsd_{tag}.tif", quantize(rsd, 1 / 1024), RS_TRANSFORM, UTM,
                  units="MJ m-2 day-1",
                  description="daily incoming shortwave (MJ m-2 day-1)", extra=meta)
        write_tif(f"tmax_{tag}.tif", quantize(tmax, 1 / 256), MET_TRANSFORM, GEO,
                  units="degC", description="daily maximum air temperature (degC)",
                  extra=meta)
        write_tif(f"tmin_{tag}.tif", quantize(tmin, 1 / 256), MET_TRANSFORM, GEO,
                  units="degC", description="daily minimum air temperature (degC)",
                  extra=meta)
        write_tif(f"ead_{tag}.tif", quantize(ead, 1 / 256), MET_TRANSFORM, GEO,
                  units="hPa", description="daily mean vapour pressure (hPa)",
                  extra=meta)

    write_subbasins()
    write_station_tables()
    print(f"wrote {len(list(OUT.glob('*.tif')))} GeoTIFFs, subbasins.geojson, stations.csv and "
          f"towers.csv to {OUT}")


def cloud_density(x, y, seed):
    """Cumulus density (0..1+) for the 2026-07-30 band, analytic in UTM metres."""
    # band axis runs SW -> NE across the middle of the basin
    xk = (x - X0) / 1000.0
    yk = (y - Y1) / 1000.0
    u = (xk - 19.0) * np.cos(np.radians(35)) + (yk - 15.0) * np.sin(np.radians(35))
    v = -(xk - 19.0) * np.sin(np.radians(35)) + (yk - 15.0) * np.cos(np.radians(35))
    env = np.exp(-((v - 1.5 + 1.2 * np.sin(u / 6.0)) / 5.0) ** 2)
    cells = wavefield(x, y, seed + 11, n=40, lmin=1200, lmax=4500)
    return env * (0.35 + 0.3 * cells)


def coarse_cloud_transmission(seed):
    """Cell-mean shortwave transmission on the 480 m grid (30-60 % under cloud)."""
    nsub = 8
    step = RS_RES / nsub
    gx, gy = np.meshgrid(RS_X0 + (np.arange(RS_NCOL * nsub) + 0.5) * step,
                         RS_Y0 - (np.arange(RS_NROW * nsub) + 0.5) * step)
    dens = cloud_density(gx, gy, seed)
    opt = wavefield(gx, gy, seed + 12, lmin=3000, lmax=12000)
    cover = np.clip((dens - 0.35) / 0.3, 0, 1)          # 0 clear .. 1 overcast
    depth = np.clip(0.55 + 0.12 * opt, 0.40, 0.68)       # 1 - transmission
    trans = 1 - cover * depth
    return trans.reshape(RS_NROW, nsub, RS_NCOL, nsub).mean(axis=(1, 3))


def scan_gap(shape):
    """A short diagonal stripe of missing lines (sensor scan gap)."""
    r, c = np.mgrid[0:shape[0], 0:shape[1]]
    d = (r - 0.18 * c) - 330
    return (np.abs(d) < 2.5) & (c > 240) & (c < 600)


# --------------------------------------------------------------------------
# Sub-basins
# --------------------------------------------------------------------------
def _ytop(x):
    return 28.3 - 1.1 * np.sin(x / 3.1) - 0.7 * np.cos(x / 1.7 + 0.5) \
        - 0.3 * np.sin(x / 0.7) - 2.0 * np.clip((x - 26) / 10, 0, 1)


def _ybot(x):
    return 2.4 + 1.0 * np.sin(x / 2.6 + 1.0) + 0.6 * np.cos(x / 1.3) \
        + 0.3 * np.sin(x / 0.6) + 2.5 * np.clip((x - 27) / 9, 0, 1)


def _divider(c, phase):
    def xd(y):
        return c + 1.0 * np.sin(y / 2.3 + phase) + 0.45 * np.sin(y / 0.9 + 2 * phase)
    yb = 2.0
    for _ in range(60):
        yb = _ybot(xd(yb))
    yt = 28.0
    for _ in range(60):
        yt = _ytop(xd(yt))
    ys = np.linspace(yb, yt, 10)
    return np.stack([xd(ys), ys], axis=1)      # bottom -> top


def write_subbasins():
    XA, XB = 1.6, 36.8
    d1 = _divider(12.8, 0.3)
    d2 = _divider(DAM_X_KM + 0.15, 1.7)

    def bottom(xa, xb, n):
        xs = np.linspace(xa, xb, n)[1:-1]
        return np.stack([xs, _ybot(xs)], axis=1)

    def top(xa, xb, n):  # from xb back to xa
        xs = np.linspace(xb, xa, n)[1:-1]
        return np.stack([xs, _ytop(xs)], axis=1)

    def side(x0, y0, y1, n, phase):
        ys = np.linspace(y0, y1, n)
        xs = x0 + 0.5 * np.sin(ys / 1.9 + phase) + 0.25 * np.sin(ys / 0.8 + 2 * phase)
        ys[0] = _ytop(xs[0]) if y0 > y1 else _ybot(xs[0])
        ys[-1] = _ybot(xs[-1]) if y0 > y1 else _ytop(xs[-1])
        return np.stack([xs, ys], axis=1)

    left = side(XA, _ytop(XA), _ybot(XA), 7, 0.0)        # top -> bottom
    right = side(XB, _ybot(XB), _ytop(XB), 7, 1.1)       # bottom -> top

    upr = np.concatenate([left, bottom(left[-1, 0], d1[0, 0], 8), d1,
                          top(left[0, 0], d1[-1, 0], 8)])
    mid = np.concatenate([d1[:1], bottom(d1[0, 0], d2[0, 0], 9), d2,
                          top(d1[-1, 0], d2[-1, 0], 9), d1[::-1][:-1]])
    lwr = np.concatenate([d2[:1], bottom(d2[0, 0], right[0, 0], 8), right,
                          top(d2[-1, 0], right[-1, 0], 8), d2[::-1][:-1]])
    feats = []
    for bid, name, ring in [
            ("UPR", "Upper Silvermoth cirques", upr),
            ("MID", "Middle Silvermoth and Lantern Reservoir", mid),
            ("LWR", "Lower Silvermoth flats (Harrowgate)", lwr)]:
        lon, lat = TO_GEO.transform(X0 + ring[:, 0] * 1000, Y1 + ring[:, 1] * 1000)
        coords = [[round(float(a), 6), round(float(b), 6)] for a, b in zip(lon, lat)]
        coords.append(coords[0])
        # RFC 7946: exterior rings counter-clockwise
        area2 = sum(a[0] * b[1] - b[0] * a[1] for a, b in zip(coords[:-1], coords[1:]))
        if area2 < 0:
            coords = coords[::-1]
        feats.append(dict(type="Feature",
                          properties=dict(basin_id=bid, name=name, note=NOTE),
                          geometry=dict(type="Polygon", coordinates=[coords])))
    fc = dict(type="FeatureCollection",
              name="silvermoth_subbasins",
              description=f"{NOTE}; {SCENARIO}",
              features=feats)
    (OUT / "subbasins.geojson").write_text(json.dumps(fc, indent=1) + "\n")


# --------------------------------------------------------------------------
# Station tables: an invented weather-station network and two invented
# net-radiation towers. Written after the tiles (and read back from them for
# the towers), with their own seeds, so the tiles do not change.
# --------------------------------------------------------------------------
STATION_SEED = SEED + 7000
STATION_NAMES = ["glasspeak-cirque", "upper-tarn", "north-spur", "cedar-bench", "south-fork",
                 "lantern-inflow", "lantern-dam", "gorge-rim", "aspen-flat", "harrowgate",
                 "pivot-row", "east-fan", "alkali-flat", "ridge-saddle", "basin-rim-ne",
                 "sage-bench"]
# (name, land-cover class, near x, y in km from the fine grid's lower-left corner)
TOWER_SITES = [("tower-sage", 20, 29.5, 13.0), ("tower-meadow", 30, 14.5, 16.5)]
SIGMA_INST = 5.670374419e-8      # W m-2 K-4
SIGMA_DAY = 4.903e-9             # MJ K-4 m-2 day-1


def station_sites():
    """16 stations on a jittered 4 x 4 layout over the fine extent plus 1 km."""
    r = np.random.default_rng(STATION_SEED)
    gx = np.linspace(X0 + 3000, X1 - 3000, 4)
    gy = np.linspace(Y1 + 3000, Y0 - 3000, 4)
    sx, sy = (a.ravel() for a in np.meshgrid(gx, gy))
    sx = np.clip(sx + r.uniform(-3500, 3500, sx.size), X0 - 1000, X1 + 1000)
    sy = np.clip(sy + r.uniform(-3000, 3000, sy.size), Y1 - 1000, Y0 + 1000)
    sz, _ = terrain(sx, sy)
    return sx, sy, sz


def _rs_cell(x, y):
    col = np.clip(np.floor((np.asarray(x) - RS_X0) / RS_RES).astype(int), 0, RS_NCOL - 1)
    row = np.clip(np.floor((RS_Y0 - np.asarray(y)) / RS_RES).astype(int), 0, RS_NROW - 1)
    return row, col


def daily_weather_at(date, x, y, z):
    """The daily fields of main() at points: tmax, tmin (degC), ea (hPa), rs (MJ m-2 day-1)."""
    k = list(DAILY).index(date)
    p = DAILY[date]
    dseed = SEED + 1000 + 10 * k
    wf = wavefield(x, y, dseed, lmin=15000, lmax=60000)
    dtr = np.clip(p["dtr"] + 1.5 * np.clip((2000 - z) / 500, -1, 1) + 0.4 * wf, 10.0, 18.0)
    tmax = p["tmax"] - LAPSE * (z - 1500) + 0.5 * wf + 0.4 * (x - 300000) / 20000
    tmin = tmax - dtr
    ea = p["ea"] * np.exp(-(z - 1500) / 3600) * (1 + 0.05 * wavefield(x, y, dseed + 1, lmin=15000, lmax=60000))
    ea = np.minimum(ea, 0.98 * esat_hpa(tmin))
    _, lat = TO_GEO.transform(x, y)
    rso = (0.75 + 2e-5 * z) * daily_ra(date, lat)
    conv = np.clip((z - 1800) / 1200, 0, 1)
    cloudf = p["cloud"] * (0.6 + 0.8 * conv + 0.3 * wavefield(x, y, dseed + 2, lmin=6000, lmax=30000))
    if date == CLOUDY_SCENE:
        trans = coarse_cloud_transmission(SEED + 100 * (SCENE_DATES.index(CLOUDY_SCENE) + 1))
        cloudf = cloudf + 0.35 * (1 - trans[_rs_cell(x, y)])
    rs = rso * 0.92 * (1 - np.clip(cloudf, 0.0, 0.35))
    return tmax, tmin, ea, rs, rso


def _sample(name, x, y, scale=1.0, nodata=None):
    with rasterio.open(OUT / name) as ds:
        row, col = ds.index(x, y)
        v = float(ds.read(1, window=((row, row + 1), (col, col + 1)))[0, 0])
    return np.nan if nodata is not None and v == nodata else v * scale


def tower_sites():
    """Each tower at a pixel of its land-cover class near its nominal site (12 m east, 7 m north of the centre)."""
    with rasterio.open(OUT / "land_cover.tif") as ds:
        lc = ds.read(1)
    fx, fy = cell_centres(FINE_TRANSFORM, NCOL, NROW)
    sites = []
    for name, cls, xk, yk in TOWER_SITES:
        d = np.hypot(fx - (X0 + xk * 1000), fy - (Y1 + yk * 1000))
        d[lc != cls] = np.inf
        i = np.unravel_index(np.argmin(d), d.shape)
        sites.append((name, float(fx[i]) + 12.0, float(fy[i]) + 7.0))
    return sites


def tower_records(r):
    """Invented net-radiometer records: daily totals and values at the overpasses, from the tiles plus noise.

    A radiometer sees its own footprint, not a 60 m pixel: the values carry a few per cent of
    invented bias and noise.
    """
    rows = []
    for name, x, y in tower_sites():
        z, _ = terrain(np.array([x]), np.array([y]))
        lon, lat = TO_GEO.transform(x, y)
        albedo = np.nanmean([_sample(f"albedo_{ymd(d)}.tif", x, y, 0.001, 32767) for d in SCENE_DATES])
        for date in DAILY:
            tmax, tmin, ea, rs, rso = (float(v[0]) for v in daily_weather_at(date, np.array([x]),
                                                                            np.array([y]), z))
            rnl = (SIGMA_DAY * ((tmax + 273.15) ** 4 + (tmin + 273.15) ** 4) / 2
                   * (0.34 - 0.14 * np.sqrt(ea / 10)) * (1.35 * min(rs / rso, 1.0) - 0.35))
            rn = ((1 - albedo) * rs - rnl) * 0.97 + r.normal(0, 0.35)
            rows.append([name, f"{lon:.6f}", f"{lat:.6f}", date, "", f"{rn:.2f}"])
        for k, date in enumerate(SCENE_DATES):
            alb = _sample(f"albedo_{ymd(date)}.tif", x, y, 0.001, 32767)
            ts = _sample(f"lst_{ymd(date)}.tif", x, y, 0.02, 0)
            rs = _sample(f"rs_{ymd(date)}.tif", x, y)
            wff = wavefield(np.array([x]), np.array([y]), SEED + 100 * (k + 1) + 1, lmin=15000, lmax=60000)[0]
            ta = SCENE_T1500[date] - LAPSE * (z[0] - 1500) + 0.6 * wff + 0.4 * (x - 300000) / 20000 + 273.15
            ea = SCENE_EA1500[date] * np.exp(-(z[0] - 1500) / 3600)
            alb = albedo if np.isnan(alb) else alb
            ts = ta + 12.0 if np.isnan(ts) else ts
            eps_sky = 1.24 * (ea / ta) ** (1 / 7)         # Brutsaert (1975), ea in hPa
            rn = (1 - alb) * rs - 0.97 * SIGMA_INST * (ts ** 4 - eps_sky * ta ** 4)
            rn = rn * 0.97 + r.normal(0, 12.0)
            rows.append([name, f"{lon:.6f}", f"{lat:.6f}", "", f"{date}T18:20:00Z", f"{rn:.1f}"])
    return rows


def write_station_tables():
    r = np.random.default_rng(STATION_SEED + 1)
    sx, sy, sz = station_sites()
    lon, lat = TO_GEO.transform(sx, sy)
    lines = ["# " + NOTE + "; " + SCENARIO,
             "# daily weather at invented stations: tmax_c, tmin_c [degC], ea_hpa [hPa], rs_mj [MJ m-2 day-1]",
             "station,lon,lat,elevation,date,tmax_c,tmin_c,ea_hpa,rs_mj"]
    blanks = {(5, "2026-07-18", 0), (11, "2026-08-11", 3)}   # a sensor down for a day: left empty
    for date in DAILY:
        tmax, tmin, ea, rs, _ = daily_weather_at(date, sx, sy, sz)
        tmax = tmax + r.normal(0, 0.3, sx.size)
        tmin = tmin + r.normal(0, 0.3, sx.size)
        ea = ea * (1 + r.normal(0, 0.02, sx.size))
        rs = rs * (1 + r.normal(0, 0.02, sx.size))
        for i, name in enumerate(STATION_NAMES):
            values = [f"{tmax[i]:.1f}", f"{tmin[i]:.1f}", f"{ea[i]:.2f}", f"{rs[i]:.2f}"]
            for k in range(4):
                if (i, date, k) in blanks:
                    values[k] = ""
            lines.append(f"{name},{lon[i]:.5f},{lat[i]:.5f},{sz[i]:.0f},{date}," + ",".join(values))
    (OUT / "stations.csv").write_text("\n".join(lines) + "\n")
    towers = ["# " + NOTE + "; " + SCENARIO,
              "# invented net radiometers: daily totals [MJ m-2 day-1] (date) and values at the overpass [W m-2] (time, UTC)",
              "station,lon,lat,date,time,net_radiation"]
    towers += [",".join(row) for row in tower_records(r)]
    (OUT / "towers.csv").write_text("\n".join(towers) + "\n")


if __name__ == "__main__":
    main()
