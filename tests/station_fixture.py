"""An invented mountain grid with weather stations and net radiometers (test fixture, not reference values).

The DEM is analytic (a massif, ridges and a second peak, about 1900 m of relief over 12 km), so the
"known" fields can be evaluated exactly at the stations and at every pixel centre:

* Tmax = 301.15 K - 6.5 K/km x elevation + a smooth anomaly (the lapse rate of the ICAO standard
  atmosphere, common practice; the anomaly and the base values are invented);
* Tmin = Tmax - 14 K, ea and Rs smooth invented fields.

``make_station_scenario`` writes the DEM, ``stations.csv`` (35 stations, values in degC, hPa and
MJ m-2 day-1), ``towers.csv`` and a config; the known fields are returned for the comparisons.
"""

from __future__ import annotations

import csv
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import yaml
from affine import Affine
from pyproj import Transformer

from scenario import CRS_UTM, write_tif

X0, Y0, RES, N = 400000.0, 4300000.0, 100.0, 120      # 12 km x 12 km, UTM 11N (about 38.8 N, 118.1 W)
LAPSE = -6.5e-3        # K m-1, ICAO standard atmosphere (common practice)
DATES = ("2026-07-14", "2026-07-15")


@dataclass
class StationScenario:
    folder: Path
    config: Path
    transform: Affine
    dem: np.ndarray
    truth: dict = field(default_factory=dict)    # (layer, date) -> known field on the grid, internal units
    stations: dict = field(default_factory=dict)  # name -> (x, y, z)

    def write_config(self, **changes) -> Path:
        cfg = yaml.safe_load(self.config.read_text())
        for key, value in changes.items():
            node = cfg
            parts = key.split(".")
            for p in parts[:-1]:
                node = node[int(p)] if isinstance(node, list) else node.setdefault(p, {})
            if isinstance(node, list):
                node[int(parts[-1])] = value
            else:
                node[parts[-1]] = value
        self.config.write_text(yaml.safe_dump(cfg, sort_keys=False))
        return self.config


def elevation(x, y):
    """The invented DEM at map coordinates [m]."""
    u = (np.asarray(x) - X0) / (N * RES)
    w = (Y0 - np.asarray(y)) / (N * RES)
    return (400.0 + 1750.0 * np.exp(-((u - 0.55) ** 2 + (w - 0.45) ** 2) / 0.06)
            + 350.0 * np.sin(2 * np.pi * 3 * u) * np.cos(2 * np.pi * 2.5 * w)
            + 300.0 * np.exp(-((u - 0.15) ** 2 + (w - 0.8) ** 2) / 0.01))


def known(layer: str, x, y, z, day: int):
    """The invented "true" weather at points (internal units: K, kPa, MJ m-2 day-1)."""
    u = (np.asarray(x) - X0) / (N * RES)
    w = (Y0 - np.asarray(y)) / (N * RES)
    anomaly = 1.5 * np.sin(2 * np.pi * u / 1.5 + 0.3 + day) * np.cos(2 * np.pi * w / 2.0) + 0.8 * u
    tmax = 301.15 + LAPSE * z + anomaly
    if layer == "air_temperature_max":
        return tmax
    if layer == "air_temperature_min":
        return tmax - 14.0 + 0.5 * w
    if layer == "vapour_pressure":
        return 1.2 * np.exp(-z / 3000.0) + 0.05 * u
    if layer == "shortwave_down":
        return 27.0 - 1.5 * w + 0.0004 * z + 0.3 * day
    raise KeyError(layer)


def _centres(transform, n):
    c = np.arange(n) + 0.5
    return np.meshgrid(transform.c + transform.a * c, transform.f + transform.e * c)


def make_station_scenario(folder: Path, *, n_stations: int = 35, method: str = "spline", chunk: int = 64,
                          towers: list | None = None) -> StationScenario:
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    t = Affine(RES, 0, X0, 0, -RES, Y0)
    X, Y = _centres(t, N)
    dem = elevation(X, Y).astype(np.float32)
    write_tif(folder / "dem.tif", dem, transform=t, block=64)
    to_geo = Transformer.from_crs(CRS_UTM, "EPSG:4326", always_xy=True)
    rng = np.random.default_rng(11)
    # stations scattered over the grid and a little beyond it (2 km margin), at invented points
    sx = rng.uniform(X0 - 2000, X0 + N * RES + 2000, n_stations)
    sy = rng.uniform(Y0 - N * RES - 2000, Y0 + 2000, n_stations)
    sz = elevation(sx, sy)
    lon, lat = to_geo.transform(sx, sy)
    truth, stations = {}, {}
    rows = []
    for d, date in enumerate(DATES):
        for layer in ("air_temperature_max", "air_temperature_min", "vapour_pressure", "shortwave_down"):
            truth[(layer, date)] = known(layer, X, Y, dem.astype(float), d)
        for k in range(n_stations):
            name = f"st{k:02d}"
            stations[name] = (sx[k], sy[k], sz[k])
            rows.append([name, f"{lon[k]:.7f}", f"{lat[k]:.7f}", f"{sz[k]:.3f}", date,
                         f"{known('air_temperature_max', sx[k], sy[k], sz[k], d) - 273.15:.4f}",
                         f"{known('air_temperature_min', sx[k], sy[k], sz[k], d) - 273.15:.4f}",
                         f"{known('vapour_pressure', sx[k], sy[k], sz[k], d) * 10:.5f}",
                         f"{known('shortwave_down', sx[k], sy[k], sz[k], d):.4f}"])
    with open(folder / "stations.csv", "w", newline="") as handle:
        w = csv.writer(handle)
        w.writerow(["station", "lon", "lat", "elevation", "date", "tmax_c", "tmin_c", "ea_hpa", "rs_mj"])
        w.writerows(rows)
    with open(folder / "towers.csv", "w", newline="") as handle:
        w = csv.writer(handle)
        w.writerow(["station", "lon", "lat", "date", "net_radiation"])
        w.writerows(towers or [])
    cfg = {
        "title": "station test grid",
        "grid": {"like": "elevation", "chunk": chunk},
        "layers": {"air_temperature": {"units": "degC"}, "vapour_pressure": {"units": "hPa"}},
        "static": {"elevation": "dem.tif"},
        "stations": {"path": "stations.csv", "crs": "EPSG:4326", "method": method,
                     "columns": {"air_temperature_max": "tmax_c", "air_temperature_min": "tmin_c",
                                 "vapour_pressure": "ea_hpa", "shortwave_down": "rs_mj"}},
        "days": [{"dates": {"start": DATES[0], "end": DATES[-1]}, "air_temperature_max": "stations",
                  "air_temperature_min": "stations", "vapour_pressure": "stations", "shortwave_down": "stations"}],
        "output": {"directory": "out", "products": ["net_radiation", "net_shortwave", "net_longwave", "quality"]},
    }
    if towers is not None:
        cfg["validation"] = {"path": "towers.csv", "crs": "EPSG:4326"}
    path = folder / "config.yaml"
    path.write_text(yaml.safe_dump(cfg, sort_keys=False))
    return StationScenario(folder, path, t, dem, truth, stations)
