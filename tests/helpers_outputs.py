"""Test helper: a small run with two scenes and two days (fixture data from tests/scenario.py)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import yaml

from scenario import make_scenario, write_tif

SCENE_TIMES = ("2026-07-14T18:10:00Z", "2026-07-30T17:55:00Z")
DAY_DATES = ("2026-07-14", "2026-07-15")


def two_by_two(folder: Path, *, shape=(96, 112), chunk=32, **output):
    """A scenario config with two scenes, two days and ``output`` keys; returns the Scenario."""
    sc = make_scenario(folder, shape=shape, chunk=chunk)
    t = sc.transform
    write_tif(sc.folder / "rsd.tif", np.full(shape, 24.0, np.float32), transform=t)      # MJ m-2 day-1
    write_tif(sc.folder / "tmax.tif", np.full(shape, 29.0, np.float32), transform=t)     # degC
    write_tif(sc.folder / "tmin.tif", np.full(shape, 13.0, np.float32), transform=t)     # degC
    cfg = yaml.safe_load(sc.config.read_text())
    first = cfg["scenes"][0]
    cfg["scenes"] = [{**first, "time": SCENE_TIMES[0]}, {**first, "time": SCENE_TIMES[1]}]
    cfg["days"] = [{"date": d, "shortwave_down": "rsd.tif", "air_temperature_max": "tmax.tif",
                    "air_temperature_min": "tmin.tif", "vapour_pressure": "ea.tif"} for d in DAY_DATES]
    cfg["output"].update(output)
    sc.config.write_text(yaml.safe_dump(cfg, sort_keys=False))
    return sc
