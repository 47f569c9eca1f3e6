"""Synthetic DEMs and uniform weather for the terrain tests (test fixtures, not reference values).

``terrain_config`` writes a DEM, uniform scene/day inputs on its grid and a config, and returns
the config's path; the tests run it through ``run_config`` and compare with outside references.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import rasterio
import yaml
from affine import Affine

CRS = "EPSG:32611"
# UTM 11N central meridian (117 W), about 45 N: grid north is true north there
X_MERIDIAN, Y_45N = 500000.0, 4983000.0


def write_tif(path: Path, data: np.ndarray, transform: Affine, crs: str = CRS) -> str:
    with rasterio.open(path, "w", driver="GTiff", width=data.shape[1], height=data.shape[0], count=1,
                       dtype="float32", crs=crs, transform=transform) as ds:
        ds.write(data.astype(np.float32), 1)
    return str(path)


def plane(shape, res, slope, aspect, z0=1500.0):
    """z0 - tan(slope) (sin(aspect) x + cos(aspect) y): falls toward ``aspect`` (x east, y north) [m]."""
    rows, cols = np.mgrid[0:shape[0], 0:shape[1]]
    x, y = cols * res, -rows * res
    t = math.tan(math.radians(slope))
    return z0 - t * (math.sin(math.radians(aspect)) * x + math.cos(math.radians(aspect)) * y)


def facets(planes, size, res):
    """Square facets side by side, one plane each (their shared edges are not planar)."""
    return np.hstack([plane((size, size), res, s, a) for s, a in planes])


# invented, plausible weather (fixture values; the tests' references take them as inputs)
SCENE = dict(albedo=0.2, surface_temperature=285.0, air_temperature=280.0, vapour_pressure=0.8)
DAY = dict(air_temperature_max=283.0, air_temperature_min=271.0, vapour_pressure=0.6, albedo=0.2)


def terrain_config(folder: Path, dem: np.ndarray, *, res: float, x0: float = X_MERIDIAN, y0: float = Y_45N,
                   scenes=(), days=(), terrain="slope", chunk=16, products=("incident_shortwave",),
                   extra_scene: dict | None = None) -> Path:
    """A config over ``dem``: ``scenes`` = [(time, shortwave W m-2)], ``days`` = [(date, MJ m-2 day-1)]."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    t = Affine(res, 0.0, x0, 0.0, -res, y0)
    full = lambda v: np.full(dem.shape, v)   # noqa: E731
    static = {"elevation": write_tif(folder / "dem.tif", dem, t)}
    entries = []
    for k, (time, rs) in enumerate(scenes):      # rs None: modelled clear sky
        e = {"time": time} if rs is None else {"time": time,
                                               "shortwave_down": write_tif(folder / f"rs{k}.tif", full(rs), t)}
        e.update({n: write_tif(folder / f"{n}.tif", full(v), t) for n, v in SCENE.items()})
        e.update(extra_scene or {})
        entries.append(e)
    day_entries = []
    for k, (date, rs) in enumerate(days):
        e = {"date": date, "shortwave_down": write_tif(folder / f"rsd{k}.tif", full(rs), t)}
        e.update({n: write_tif(folder / f"d_{n}.tif", full(v), t) for n, v in DAY.items()})
        day_entries.append(e)
    cfg = {
        "title": "terrain test",
        "grid": {"like": "elevation", "chunk": chunk},
        "layers": {"shortwave_down": {"units": "W m-2"}},
        "static": static,
        "emissivity": {"constant": 0.97},
        "methods": {"terrain": terrain},
        "output": {"directory": str(folder / "out"), "products": list(products)},
    }
    if entries:
        cfg["scenes"] = entries
    if day_entries:
        cfg["days"] = day_entries   # shortwave in MJ m-2 day-1 (days take their own unit)
    path = folder / "config.yaml"
    path.write_text(yaml.safe_dump(cfg, sort_keys=False))
    return path


def read(path) -> np.ndarray:
    with rasterio.open(path) as ds:
        return ds.read(1)


def pixel_lonlat(row: float, col: float, res: float, x0: float = X_MERIDIAN, y0: float = Y_45N):
    """Longitude, latitude [deg] of a pixel centre of a ``terrain_config`` grid."""
    from pyproj import Transformer
    tr = Transformer.from_crs(CRS, "EPSG:4326", always_xy=True)
    return tr.transform(x0 + (col + 0.5) * res, y0 - (row + 0.5) * res)
