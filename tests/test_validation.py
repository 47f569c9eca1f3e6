"""Validation against net radiometers: the pairs and every summary statistic against an independent
computation (rasterio's pixel index, numpy, scipy.stats.linregress) on the same pairs.

Tower positions and their "observed" values are invented fixtures.
"""

from __future__ import annotations

import csv
import math

import matplotlib.image
import numpy as np
import pytest
import rasterio
from pyproj import Transformer
from scipy import stats

from radledger.config import load_config
from radledger.execution.events import RunEvents
from radledger.runner import run_config

from scenario import CRS_UTM, make_scenario
from station_fixture import DATES, X0, Y0, make_station_scenario

TO_GEO = Transformer.from_crs(CRS_UTM, "EPSG:4326", always_xy=True)
# invented towers: map position (grid CRS) and observed daily net radiation [MJ m-2 day-1] per date
TOWERS = {
    "ridge": ((X0 + 6130.0, Y0 - 5410.0), (13.1, 14.2)),
    "meadow": ((X0 + 2250.0, Y0 - 9870.0), (15.6, 14.9)),
    "edge": ((X0 + 40.0, Y0 - 11960.0), (14.0, 15.3)),      # in the corner pixel: a clipped 3 x 3 block
    "valley": ((X0 + 10480.0, Y0 - 1720.0), (16.2, 15.1)),
}
OFF_GRID = ((X0 - 900.0, Y0 - 3000.0), 14.0)                 # west of the grid
NO_PRODUCT_DATE = "2026-07-20"                                 # no day product on this date


def _tower_rows():
    rows = []
    for name, ((x, y), values) in TOWERS.items():
        lon, lat = TO_GEO.transform(x, y)
        rows += [[name, f"{lon:.8f}", f"{lat:.8f}", date, f"{v}"] for date, v in zip(DATES, values)]
    lon, lat = TO_GEO.transform(*OFF_GRID[0])
    rows.append(["faraway", f"{lon:.8f}", f"{lat:.8f}", DATES[0], f"{OFF_GRID[1]}"])
    lon, lat = TO_GEO.transform(*TOWERS["ridge"][0])
    rows.append(["ridge", f"{lon:.8f}", f"{lat:.8f}", NO_PRODUCT_DATE, "12.0"])
    return rows


class _Warnings(RunEvents):
    def __init__(self):
        self.lines = []

    def warn(self, text):
        self.lines.append(text)


@pytest.fixture(scope="module")
def validated(tmp_path_factory):
    scn = make_station_scenario(tmp_path_factory.mktemp("validation"), towers=_tower_rows())
    events = _Warnings()
    run_config(load_config(scn.config), events=events)
    return scn, events


def _csv(path):
    with open(path) as handle:
        return list(csv.DictReader(handle))


def _expected_pairs(scn):
    """Each tower's pixel by rasterio's index(), its 3 x 3 mean by numpy, from the written products."""
    out = {}
    for date in DATES:
        s = date.replace("-", "")
        with rasterio.open(scn.folder / "out" / "days" / f"net_radiation_{s}.tif") as ds:
            rn = ds.read(1).astype(float)
            index = ds.index
        with rasterio.open(scn.folder / "out" / "days" / f"quality_{s}.tif") as ds:
            quality = ds.read(1)
        for name, ((x, y), values) in TOWERS.items():
            r, c = index(x, y)
            block = rn[max(r - 1, 0):r + 2, max(c - 1, 0):c + 2]
            out[(name, date)] = (values[DATES.index(date)], rn[r, c], np.nanmean(block), int(quality[r, c]))
    return out


def test_pairs_equal_an_independent_sampling(validated):
    scn, _ = validated
    pairs = _csv(scn.folder / "out" / "validation" / "pairs.csv")
    assert list(pairs[0]) == ["kind", "station", "date", "time", "observed", "modelled", "modelled_3x3", "quality"]
    expected = _expected_pairs(scn)
    assert sorted((p["station"], p["date"]) for p in pairs) == sorted(expected)
    for p in pairs:
        obs, pixel, mean, quality = expected[(p["station"], p["date"])]
        assert p["kind"] == "days" and p["time"] == ""
        assert float(p["observed"]) == pytest.approx(obs, rel=1e-3)
        assert float(p["modelled"]) == pytest.approx(pixel, rel=1e-3)
        assert float(p["modelled_3x3"]) == pytest.approx(mean, rel=1e-3)
        assert int(p["quality"]) == quality


def _reference(obs, mod):
    """n, bias, MAE, RMSE (numpy) and r2, slope, intercept (scipy.stats.linregress: modelled on observed)."""
    obs, mod = np.asarray(obs, float), np.asarray(mod, float)
    d = mod - obs
    fit = stats.linregress(obs, mod)
    return {"n": obs.size, "bias": d.mean(), "mae": np.abs(d).mean(), "rmse": np.sqrt((d ** 2).mean()),
            "r2": fit.rvalue ** 2, "slope": fit.slope, "intercept": fit.intercept}


def test_every_summary_statistic_equals_numpy_and_scipy(validated):
    scn, _ = validated
    pairs = _csv(scn.folder / "out" / "validation" / "pairs.csv")
    summary = _csv(scn.folder / "out" / "validation" / "summary.csv")
    assert [s["station"] for s in summary] == sorted(TOWERS) + ["all"]
    for row in summary:
        mine = [p for p in pairs if row["station"] in ("all", p["station"])]
        ref = _reference([float(p["observed"]) for p in mine], [float(p["modelled"]) for p in mine])
        assert row["kind"] == "days"
        for key, value in ref.items():
            assert float(row[key]) == pytest.approx(value, rel=1e-3, abs=1e-9), (row["station"], key)


def test_off_grid_and_unmatched_observations_are_listed_not_fatal(validated):
    scn, events = validated
    assert any("'faraway'" in w and "outside the grid" in w for w in events.lines), events.lines
    assert any("'ridge'" in w and NO_PRODUCT_DATE in w and "no day product" in w for w in events.lines)
    pairs = _csv(scn.folder / "out" / "validation" / "pairs.csv")
    assert "faraway" not in {p["station"] for p in pairs}


def test_scatter_and_time_series_plots_are_written(validated):
    scn, _ = validated
    folder = scn.folder / "out" / "validation"
    assert not (folder / "scatter_scenes.png").exists()   # no scene observations
    for name in ["scatter_days.png"] + [f"timeseries_{t}.png" for t in TOWERS]:
        image = matplotlib.image.imread(folder / name)
        assert image.ndim == 3 and image.shape[0] > 200, name


def test_scene_observations_pair_with_the_scene_within_one_minute(tmp_path):
    scn = make_scenario(tmp_path, shape=(64, 64), chunk=64, holes=False)   # one scene at 2026-07-14T18:10Z
    x, y = 300000.0 + 30 * 20.5, 4280000.0 - 30 * 40.5                    # the centre of pixel (40, 20)
    lon, lat = TO_GEO.transform(x, y)
    (tmp_path / "towers.csv").write_text(
        "station,lon,lat,time,net_radiation\n"
        f"a,{lon:.9f},{lat:.9f},2026-07-14T18:10:40Z,512.5\n"        # 40 s off: paired
        f"a,{lon:.9f},{lat:.9f},2026-07-14T18:12:00Z,515.0\n")       # 2 min off: listed
    scn.write_config(validation={"path": "towers.csv"})
    events = _Warnings()
    run_config(load_config(scn.config), events=events)
    pairs = _csv(tmp_path / "out" / "validation" / "pairs.csv")
    assert len(pairs) == 1 and pairs[0]["time"] == "2026-07-14T18:10:40Z" and pairs[0]["kind"] == "scenes"
    with rasterio.open(tmp_path / "out" / "scenes" / "net_radiation_20260714T1810.tif") as ds:
        assert float(pairs[0]["modelled"]) == pytest.approx(float(ds.read(1)[40, 20]), rel=1e-6)
    assert any("no scene within 1 minute" in w and "18:12" in w for w in events.lines), events.lines
    assert (tmp_path / "out" / "validation" / "scatter_scenes.png").exists()
    summary = _csv(tmp_path / "out" / "validation" / "summary.csv")
    one = next(s for s in summary if s["station"] == "a")
    assert int(one["n"]) == 1 and one["slope"] == "" and math.isclose(
        float(one["bias"]), float(pairs[0]["modelled"]) - 512.5, rel_tol=1e-9)
