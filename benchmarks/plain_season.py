"""The baseline for a season: a per-day loop written by hand with rasterio, xarray and NumPy.

For every day: read the day's slice of each weather stack (lon/lat NetCDF), warp it onto the basin
grid with rasterio.warp.reproject (bilinear), evaluate FAO-56 daily net radiation (eqs. 21-25,
37-40; latitude per pixel computed once), write one COG per day, and keep a running mean for the
season composite, written at the end.  Used by bench_season.py as a separate process.

    python benchmarks/plain_season.py WORK_DIR OUT_DIR NDAYS
"""

import sys
from pathlib import Path

import numpy as np
import rasterio
import xarray as xr
from pyproj import Transformer
from rasterio.warp import Resampling, reproject

SIGMA = 4.903e-9


def main(work, out, ndays):
    work, out = Path(work), Path(out)
    out.mkdir(parents=True, exist_ok=True)
    with rasterio.open(work / "dem.tif") as src:
        z = src.read(1).astype(np.float64)
        profile, transform, crs = src.profile, src.transform, src.crs
    h, w = z.shape
    x = transform.c + transform.a * (np.arange(w) + 0.5)
    y = transform.f + transform.e * (np.arange(h) + 0.5)
    xx, yy = np.meshgrid(x, y)
    lat = np.radians(Transformer.from_crs(crs, "EPSG:4326", always_xy=True).transform(xx, yy)[1])
    del xx, yy
    stacks = {v: xr.open_dataset(work / f"{v}.nc") for v in ("tmax", "tmin", "vp", "rs")}
    lon0, lat0 = (float(stacks["tmax"].lon[0]), float(stacks["tmax"].lat[0]))
    d = float(stacks["tmax"].lon[1] - stacks["tmax"].lon[0])
    src_transform = rasterio.Affine(d, 0, lon0 - d / 2, 0, -d, lat0 + d / 2)
    profile.update(driver="COG", dtype="float32", count=1, nodata=None, compress="ZSTD", predictor="YES",
                   blocksize=512, overviews="AUTO", overview_resampling="AVERAGE", num_threads="ALL_CPUS")
    for key in ("tiled", "blockxsize", "blockysize", "interleave"):
        profile.pop(key, None)
    total = np.zeros((h, w))
    count = np.zeros((h, w))
    times = stacks["tmax"].time.values[:ndays]
    for i, t in enumerate(times):
        grids = {}
        for v, ds in stacks.items():
            dst = np.empty((h, w), np.float32)
            reproject(ds[v].isel(time=i).values.astype(np.float32), dst, src_transform=src_transform,
                      src_crs="EPSG:4326", dst_transform=transform, dst_crs=crs, resampling=Resampling.bilinear)
            grids[v] = dst.astype(np.float64)
        day = np.datetime64(str(t)[:10])
        doy = int((day - day.astype("datetime64[Y]")).astype(int)) + 1
        dr = 1 + 0.033 * np.cos(2 * np.pi / 365 * doy)
        dec = 0.409 * np.sin(2 * np.pi / 365 * doy - 1.39)
        ws = np.arccos(np.clip(-np.tan(lat) * np.tan(dec), -1, 1))
        ra = 24 * 60 / np.pi * 0.0820 * dr * (ws * np.sin(lat) * np.sin(dec) + np.cos(lat) * np.cos(dec) * np.sin(ws))
        rso = (0.75 + 2e-5 * z) * ra
        rs = grids["rs"]
        tmax, tmin = grids["tmax"] + 273.15, grids["tmin"] + 273.15
        ratio = np.clip(rs / rso, 0.3, 1.0)
        rnl = SIGMA * (tmax ** 4 + tmin ** 4) / 2 * (0.34 - 0.14 * np.sqrt(grids["vp"])) * (1.35 * ratio - 0.35)
        rn = (1 - 0.23) * rs - rnl
        with rasterio.open(out / f"net_radiation_{str(t)[:10].replace('-', '')}.tif", "w", **profile) as dst:
            dst.write(rn.astype(np.float32), 1)
        ok = ~np.isnan(rn)
        total[ok] += rn[ok]
        count += ok
    with rasterio.open(out / "season_mean.tif", "w", **profile) as dst:
        dst.write(np.where(count > 0, total / np.maximum(count, 1), np.nan).astype(np.float32), 1)


if __name__ == "__main__":
    if len(sys.argv) != 4:
        sys.exit("usage: python plain_season.py WORK_DIR OUT_DIR NDAYS")
    main(sys.argv[1], sys.argv[2], int(sys.argv[3]))
