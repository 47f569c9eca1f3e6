"""Hostile or broken input fails fast with one line and exit 2, never as "a bug"; signals stay prompt.

* YAML: a "billion laughs" alias bomb (the classic nine levels of nine
  aliases, 9^9 values from a few hundred bytes; as a method name, whose
  message once spelled the value out) under a 1.5 GB address-space limit;
  nesting a hundred thousand levels deep.
* Numbers no grid can use: NaN, infinities, values that overflow a float,
  a resolution of 1e-300, a season year of 100000.
* Paths that are not UTF-8 text (POSIX file names are bytes).
* A reader that goes away (``radledger info FILE | head -1``).
* Zone polygons that cross themselves thousands of times, and a repair that is
  interrupted by SIGTERM.
"""

from __future__ import annotations

import os
import resource
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import shapely
import yaml

import radledger.io.vectors as vectors
from radledger.cli import main
from radledger.config import load_config
from radledger.errors import ConfigError, InputError, Problems

from helpers_rasters import utm_grid
from scenario import make_scenario, write_tif

SRC = Path(__file__).resolve().parents[1] / "src"
GRID = {"crs": "EPSG:32611", "resolution": 30, "bounds": [300000, 4200000, 330000, 4230000]}
BASE = {
    "static": {"land_cover": "lc.tif", "elevation": "dem.tif"},
    "emissivity": {"table": "emissivity.csv"},
    "scenes": [{"time": "2026-07-14T18:10:00Z", "albedo": "albedo.tif", "surface_temperature": "lst.tif",
                "air_temperature": "ta.tif", "vapour_pressure": "ea.tif", "shortwave_down": "rs.tif"}],
}
BOMB = "".join(f"{a}: &{a} [{', '.join([f'*{p}'] * 9) if p else ', '.join(['lol'] * 9)}]\n"
               for p, a in zip(["", *"abcdefgh"], "abcdefghi")) + "methods: {clouds: *i}\n"


def _env():
    return dict(os.environ, PYTHONPATH=str(SRC))


def _messages(path) -> list[str]:
    with pytest.raises((ConfigError, Problems)) as info:
        load_config(path)
    exc = info.value
    return [str(p) for p in exc.problems] if isinstance(exc, Problems) else [str(exc)]


def _write(tmp_path, text: str, name="run.yaml") -> Path:
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


# --- YAML ------------------------------------------------------------------------------------------------
def test_an_alias_bomb_exits_2_under_a_memory_cap(tmp_path):
    path = _write(tmp_path, BOMB)
    assert len(BOMB) < 500              # a few hundred bytes for 387 million values

    def cap():   # 1.5 GB of address space for the whole process
        resource.setrlimit(resource.RLIMIT_AS, (1_500_000_000, 1_500_000_000))
    p = subprocess.run([sys.executable, "-m", "radledger.cli", "check", str(path)], capture_output=True, text=True,
                       env=_env(), preexec_fn=cap, timeout=300)
    assert p.returncode == 2, p.stderr
    assert "aliases" in p.stderr and "Traceback" not in p.stderr
    assert len(p.stderr.strip().splitlines()) == 1


def test_ordinary_anchors_and_merge_keys_still_work(tmp_path):
    text = yaml.safe_dump({k: v for k, v in BASE.items() if k != "scenes"} | {"grid": GRID}, sort_keys=False)
    text += ("scenes:\n- &first {time: 2026-07-14T18:10:00Z, albedo: albedo.tif, surface_temperature: lst.tif,\n"
             "          air_temperature: ta.tif, vapour_pressure: ea.tif, shortwave_down: rs.tif}\n"
             "- {<<: *first, time: 2026-07-15T18:10:00Z}\n")
    cfg = load_config(_write(tmp_path, text))
    assert [s.layers["albedo"].path for s in cfg.scenes] == [str(tmp_path.resolve() / "albedo.tif")] * 2


def test_nesting_too_deep_is_a_config_error(tmp_path):
    (msg,) = _messages(_write(tmp_path, "title: " + "[" * 100_000 + "]" * 100_000 + "\n"))
    assert "nested more than" in msg


def test_an_alias_that_contains_itself_is_a_config_error(tmp_path):
    msgs = _messages(_write(tmp_path, "a: &a\n  b: *a\n"))
    assert msgs and all("Traceback" not in m for m in msgs)


# --- numbers ------------------------------------------------------------------------------------------------
@pytest.mark.parametrize("key,value,needle", [
    ("grid.resolution", ".nan", "finite"),
    ("grid.resolution", ".inf", "finite"),
    ("grid.resolution", "1.0e+400", "finite"),        # a YAML float that overflows to inf
    ("grid.resolution", "1.0e-300", "below"),
    ("grid.resolution", "1" + "0" * 400, "too large"),  # an integer beyond any float
    ("grid.bounds", "[300000, 4200000, .inf, 4230000]", "finite"),
    ("grid.bounds", "[-1.0e+300, -1.0e+300, 1.0e+300, 1.0e+300]", "pixels"),
    ("layers.albedo.scale", ".nan", "finite"),
    ("layers.albedo.offset", "-.inf", "finite"),
    ("composites.0.year", "100000", "year"),
    ("composites.0.year", "0", "year"),
])
def test_numbers_no_grid_can_use_are_config_errors(tmp_path, key, value, needle):
    cfg = {**BASE, "grid": GRID, "days": [], "composites": [{"name": "s", "from": "scenes", "season": "JJA",
                                                              "year": 2026}]}
    text = yaml.safe_dump(cfg, sort_keys=False)
    marker = "__VALUE__"
    node = yaml.safe_load(text)
    parts = key.split(".")
    target = node
    for p in parts[:-1]:
        target = target[int(p)] if isinstance(target, list) else target.setdefault(p, {})
    target[parts[-1]] = marker
    text = yaml.safe_dump(node, sort_keys=False).replace(marker, value)
    msgs = _messages(_write(tmp_path, text))
    shown = key.replace(".0.", "[0].").replace("composites.0", "composites[0]")
    assert any(needle in m and shown.split(".")[0] in m for m in msgs), msgs


def test_a_nan_nodata_is_allowed(tmp_path):
    cfg = {**BASE, "grid": GRID, "layers": {"air_temperature": {"nodata": float("nan")}}}
    c = load_config(_write(tmp_path, yaml.safe_dump(cfg, sort_keys=False)))
    assert np.isnan(c.layers["air_temperature"].nodata)


def test_a_nan_resolution_exits_2_on_the_command_line(tmp_path, capsys):
    scn = make_scenario(tmp_path, shape=(32, 32), chunk=32)
    scn.write_config(grid={"crs": "EPSG:32611", "resolution": float("nan"), "bounds": [0, 0, 1, 1]})
    assert main(["run", str(scn.config)]) == 2
    err = capsys.readouterr().err
    assert "grid.resolution" in err and "Traceback" not in err


# --- paths that are not UTF-8 -------------------------------------------------------------------------------
def test_a_config_path_that_is_not_utf8(tmp_path, capsys):
    raw = os.path.join(os.fsencode(tmp_path), b"caf\xe9.yaml")
    with open(raw, "w", encoding="utf-8") as fh:
        fh.write(yaml.safe_dump({**BASE, "grid": GRID}))
    code = main(["check", os.fsdecode(raw)])
    err = capsys.readouterr().err
    assert code == 2 and "UTF-8" in err and "caf\\xe9.yaml" in err
    assert len(err.strip().splitlines()) == 1


def test_inputs_in_a_folder_that_is_not_utf8(tmp_path, capsys, monkeypatch):
    folder = os.path.join(os.fsencode(tmp_path), b"d\xfcr")
    os.mkdir(folder)
    with open(os.path.join(folder, b"run.yaml"), "w", encoding="utf-8") as fh:
        fh.write(yaml.safe_dump({**BASE, "grid": GRID}))
    monkeypatch.chdir(folder)          # the config's own name is plain text; the folder around it is not
    code = main(["check", "run.yaml"])
    err = capsys.readouterr().err
    assert code == 2 and "Traceback" not in err
    assert "UTF-8" in err and "static.land_cover" in err


# --- a reader that goes away -------------------------------------------------------------------------------
def test_info_into_a_closed_pipe_exits_quietly(tmp_path):
    tif = write_tif(tmp_path / "x.tif", np.zeros((8, 8), np.float32), transform=utm_grid(8, 8).transform)
    r, w = os.pipe()
    os.close(r)                                     # the reader has gone before anything is written
    p = subprocess.run([sys.executable, "-m", "radledger.cli", "info", str(tif)], stdout=w, stderr=subprocess.PIPE,
                       text=True, env=_env(), timeout=300)
    os.close(w)
    assert p.returncode == 141, p.stderr            # as a command stopped by SIGPIPE (128 + 13)
    assert p.stderr == ""


# --- zone geometry -------------------------------------------------------------------------------------------
def _zone_file(tmp_path, ring) -> Path:
    import json
    feature = {"type": "Feature", "properties": {"id": "Z"},
               "geometry": {"type": "Polygon", "coordinates": [[list(map(float, xy)) for xy in ring]]}}
    path = tmp_path / "z.geojson"
    path.write_text(json.dumps({"type": "FeatureCollection", "features": [feature],
                                "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32611"}}}))
    return path


def test_a_polygon_crossing_itself_thousands_of_times_is_refused(tmp_path):
    grid = utm_grid(40, 30)
    x0, y0, x1, y1 = grid.bounds
    rng = np.random.default_rng(0)
    ring = np.column_stack([rng.uniform(x0, x1, 10_000), rng.uniform(y0, y1, 10_000)])
    ring = np.vstack([ring, ring[:1]])
    assert not shapely.Polygon(ring).is_valid
    with pytest.raises(InputError, match=r"zone 'Z' has an invalid polygon whose edges cross each other more than"):
        vectors.read_zones(_zone_file(tmp_path, ring), "id", grid)


def test_too_many_vertices_are_refused(tmp_path, monkeypatch):
    grid = utm_grid(40, 30)
    x0, y0, x1, y1 = grid.bounds
    t = np.linspace(0, 2 * np.pi, 200)
    ring = np.column_stack([(x0 + x1) / 2 + 300 * np.cos(t), (y0 + y1) / 2 + 300 * np.sin(t)])
    monkeypatch.setattr(vectors, "MAX_VERTICES", 150)
    with pytest.raises(InputError, match=r"200 vertices, more than 150; simplify"):
        vectors.read_zones(_zone_file(tmp_path, ring), "id", grid)


def test_self_crossings_are_counted():
    # closed-form: a bow tie crosses once; a pentagram (star polygon {5/2}) five times; a square never
    assert vectors.self_crossings(shapely.Polygon([(0, 0), (2, 2), (2, 0), (0, 2)])) == 1
    a = np.deg2rad(90 + 144 * np.arange(5))
    assert vectors.self_crossings(shapely.Polygon(np.column_stack([np.cos(a), np.sin(a)]))) == 5
    assert vectors.self_crossings(shapely.box(0, 0, 1, 1)) == 0


STOPPABLE = """
import signal, sys, threading
import numpy as np, shapely
from radledger.io.vectors import interruptible
done = threading.Event()
def on_term(signum, frame):
    print(f"stopped; repair finished: {done.is_set()}", flush=True)
    sys.exit(128 + signum)
signal.signal(signal.SIGTERM, on_term)
poly = shapely.Polygon(np.random.default_rng(0).random((300, 2)))   # a repair of many seconds
def repair():
    print("repairing", flush=True)
    shapely.make_valid(poly)
    done.set()
interruptible(repair)
print("finished", flush=True)
"""


def test_sigterm_stops_a_long_geometry_repair_at_once():
    p = subprocess.Popen([sys.executable, "-c", STOPPABLE], stdout=subprocess.PIPE, text=True, env=_env())
    assert p.stdout.readline().strip() == "repairing"
    p.terminate()
    out, _ = p.communicate(timeout=120)
    assert p.returncode == 143
    assert "repair finished: False" in out and "finished\n" not in out.replace("repair finished", "")
