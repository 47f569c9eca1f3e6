"""Small synthetic scenes for the pipeline tests (test fixtures, not reference values).

``make_scenario`` writes encoded rasters and a config into a folder and returns
the decoded physical fields on the target grid, so a test can evaluate the
physics point by point and compare with the maps the pipeline wrote.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import rasterio
import yaml
from affine import Affine

CRS_UTM = "EPSG:32611"
X0, Y0, RES = 300000.0, 4280000.0, 30.0
CLASSES = {10: 0.985, 30: 0.975, 60: 0.95, 80: 0.99}   # fixture table (values are inputs, not checks)


@dataclass
class Scenario:
    folder: Path
    config: Path
    shape: tuple[int, int]
    transform: Affine
    truth: dict[str, np.ndarray] = field(default_factory=dict)   # decoded physical values, NaN = missing
    raw: dict = field(default_factory=dict)

    def write_config(self, **changes) -> Path:
        cfg = yaml.safe_load(self.config.read_text())
        for key, value in changes.items():
            node = cfg
            parts = key.split(".")
            for p in parts[:-1]:
                node = node[int(p)] if isinstance(node, list) else node.setdefault(p, {})
            if value is _DELETE:
                (node.pop(int(parts[-1])) if isinstance(node, list) else node.pop(parts[-1], None))
            elif isinstance(node, list):
                node[int(parts[-1])] = value
            else:
                node[parts[-1]] = value
        self.config.write_text(yaml.safe_dump(cfg, sort_keys=False))
        return self.config


_DELETE = object()
DELETE = _DELETE


def write_tif(path: Path, data: np.ndarray, *, crs=CRS_UTM, transform=None, nodata=None, block=None,
              compress="deflate") -> Path:
    h, w = data.shape
    profile = dict(driver="GTiff", width=w, height=h, count=1, dtype=data.dtype, crs=crs,
                   transform=transform, nodata=nodata, compress=compress)
    if block and h >= block and w >= block:
        profile.update(tiled=True, blockxsize=block, blockysize=block)
    with rasterio.open(path, "w", **profile) as ds:
        ds.write(data, 1)
    return path


def fields(shape, seed=0):
    """Smooth, plausible summer late-morning fields (physical units)."""
    rng = np.random.default_rng(seed)
    h, w = shape
    yy, xx = np.mgrid[0:h, 0:w] / max(h, w)
    elev = 1500 + 900 * np.sin(3 * xx) * np.cos(2 * yy) + 300 * yy
    albedo = 0.12 + 0.1 * (np.sin(7 * xx + 2 * yy) + 1) / 2 + rng.normal(0, 0.005, shape)
    lst = 300 + 12 * np.cos(4 * yy) - 0.004 * (elev - 1500) + rng.normal(0, 0.3, shape)
    ta_c = 24 - 0.0065 * (elev - 1500) + 2 * xx
    ea_hpa = 9 + 4 * yy
    rs = 880 + 40 * xx - 30 * yy
    cls = np.where(elev > 2200, 60, np.where(xx < 0.3, 10, 30)).astype(np.uint8)
    cls[int(h * 0.4):int(h * 0.55), int(w * 0.6):int(w * 0.8)] = 80
    return dict(elev=elev.astype(np.float32), albedo=albedo, lst=lst, ta_c=ta_c, ea_hpa=ea_hpa, rs=rs,
                classes=cls)


def make_scenario(folder: Path, *, shape=(260, 300), coarse_weather=False, holes=True, chunk=128,
                  with_shortwave=True, time="2026-07-14T18:10:00Z") -> Scenario:
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    h, w = shape
    t = Affine(RES, 0, X0, 0, -RES, Y0)
    f = fields(shape)

    alb_i = np.round(f["albedo"] * 1000).astype(np.int16)
    lst_u = np.round(f["lst"] / 0.02).astype(np.uint16)
    if holes:
        alb_i[10:30, 40:70] = -9999
        lst_u[100:140, 200:215] = 0
        lst_u[0:5, :] = 0
    write_tif(folder / "albedo.tif", alb_i, transform=t, nodata=-9999, block=64)
    write_tif(folder / "lst.tif", lst_u, transform=t, nodata=0, block=64)
    write_tif(folder / "lc.tif", f["classes"], transform=t, block=64)
    write_tif(folder / "dem.tif", f["elev"], transform=t, block=64)
    (folder / "emis.csv").write_text("class,emissivity,label\n" +
                                     "".join(f"{c},{e},c{c}\n" for c, e in CLASSES.items()))
    truth = {
        "albedo": np.where(alb_i == -9999, np.nan, alb_i * 0.001),
        "surface_temperature": np.where(lst_u == 0, np.nan, lst_u * 0.02),
        "land_cover": f["classes"].astype(float),
        "elevation": f["elev"].astype(float),
    }
    if coarse_weather:
        # weather on a 0.02 deg lon/lat grid covering the UTM grid with a margin
        from pyproj import Transformer
        tr = Transformer.from_crs(CRS_UTM, "EPSG:4326", always_xy=True)
        lon, lat = tr.transform([X0, X0 + w * RES, X0, X0 + w * RES], [Y0, Y0, Y0 - h * RES, Y0 - h * RES])
        d = 0.02
        lon0, lat1 = np.floor(min(lon) / d) * d - 2 * d, np.ceil(max(lat) / d) * d + 2 * d
        nx = int(np.ceil((max(lon) - lon0) / d)) + 3
        ny = int(np.ceil((lat1 - min(lat)) / d)) + 3
        tg = Affine(d, 0, lon0, 0, -d, lat1)
        gy, gx = np.mgrid[0:ny, 0:nx]
        ta = (22 + 0.3 * gx - 0.2 * gy).astype(np.float32)
        ea = (10 + 0.1 * gx + 0.15 * gy).astype(np.float32)
        rs = (870 + 2 * gx - 1.5 * gy).astype(np.float32)
        write_tif(folder / "ta.tif", ta, crs="EPSG:4326", transform=tg)
        write_tif(folder / "ea.tif", ea, crs="EPSG:4326", transform=tg)
        write_tif(folder / "rs.tif", rs, crs="EPSG:4326", transform=tg)
        truth["coarse"] = {"transform": tg, "crs": "EPSG:4326", "ta": ta, "ea": ea, "rs": rs}
    else:
        write_tif(folder / "ta.tif", f["ta_c"].astype(np.float32), transform=t, block=64)
        write_tif(folder / "ea.tif", f["ea_hpa"].astype(np.float32), transform=t, block=64)
        write_tif(folder / "rs.tif", f["rs"].astype(np.float32), transform=t, block=64)
        truth["air_temperature"] = f["ta_c"].astype(np.float32) + 273.15
        truth["vapour_pressure"] = f["ea_hpa"].astype(np.float32) * 0.1
        truth["shortwave_down"] = f["rs"].astype(np.float32).astype(float)
    scene = {"time": time, "albedo": "albedo.tif", "surface_temperature": "lst.tif",
             "air_temperature": "ta.tif", "vapour_pressure": "ea.tif"}
    if with_shortwave:
        scene["shortwave_down"] = "rs.tif"
    cfg = {
        "title": "pipeline test scene",
        "grid": {"like": "land_cover", "resampling": "bilinear", "chunk": chunk},
        "layers": {"albedo": {"scale": 0.001, "nodata": -9999},
                   "surface_temperature": {"units": "K", "scale": 0.02, "nodata": 0},
                   "air_temperature": {"units": "degC"}, "vapour_pressure": {"units": "hPa"},
                   "shortwave_down": {"units": "W m-2"}},
        "static": {"land_cover": "lc.tif", "elevation": "dem.tif"},
        "emissivity": {"table": "emis.csv", "unknown": "error"},
        "methods": {"sky_emissivity": "brutsaert", "clouds": "none"},
        "scenes": [scene],
        "output": {"directory": "out", "products": ["net_radiation", "net_shortwave", "net_longwave", "quality"],
                   "compression": "zstd"},
    }
    path = folder / "config.yaml"
    path.write_text(yaml.safe_dump(cfg, sort_keys=False))
    return Scenario(folder, path, shape, t, truth)


def read(path) -> np.ndarray:
    with rasterio.open(path) as ds:
        return ds.read(1)
