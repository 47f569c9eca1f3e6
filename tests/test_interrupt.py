"""A run killed part-way leaves only whole products; a rerun finishes the rest identically."""

from __future__ import annotations

import signal
import subprocess
import sys
import time

import numpy as np
import pytest
import rasterio
import yaml

from scenario import make_scenario, read

TIMES = [f"2026-07-{d:02d}T18:10:00Z" for d in (10, 11, 12, 13, 14, 15)]


def _six_scenes(folder, chunk=256):
    scn = make_scenario(folder, shape=(900, 900), chunk=chunk, holes=True)
    cfg = yaml.safe_load(scn.config.read_text())
    base = cfg["scenes"][0]
    cfg["scenes"] = [dict(base, time=t) for t in TIMES]
    scn.config.write_text(yaml.safe_dump(cfg, sort_keys=False))
    return scn


def _products(out):
    scenes = out / "scenes"
    return sorted(p for p in scenes.glob("*.tif") if not p.name.startswith(".")) if scenes.exists() else []


def _all_files(out):
    return sorted(p for p in out.rglob("*") if p.is_file()) if out.exists() else []


def _assert_whole_cogs(paths):
    for p in paths:
        with rasterio.open(p) as ds:
            assert ds.tags(ns="IMAGE_STRUCTURE").get("LAYOUT") == "COG", p
            ds.read(1)     # every block decodes


@pytest.fixture(scope="module")
def clean_run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("clean")
    scn = _six_scenes(folder)
    subprocess.run([sys.executable, "-m", "radledger.cli", "run", "--quiet", str(scn.config)], check=True,
                   timeout=600)
    return folder / "out"


# chunks of 256 go through uncompressed intermediates and GDAL's COG pass; chunks of 512 compress their
# tiles in the tasks and spool them (the products are the same either way)
@pytest.mark.parametrize("signum,chunk", [(signal.SIGTERM, 256), (signal.SIGINT, 512)])
def test_killed_run_keeps_whole_products_and_rerun_completes(tmp_path, clean_run, signum, chunk):
    scn = _six_scenes(tmp_path, chunk)
    out = tmp_path / "out"
    proc = subprocess.Popen([sys.executable, "-m", "radledger.cli", "run", "--quiet", str(scn.config)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 300
    while len(_products(out)) < 4 and proc.poll() is None and time.monotonic() < deadline:
        time.sleep(0.05)
    assert proc.poll() is None, "the run finished before it could be interrupted; enlarge the scene"
    proc.send_signal(signum)
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 128 + signum or (signum == signal.SIGINT and proc.returncode == 130), err
    assert "Traceback" not in err
    finished = _products(out)
    assert 0 < len(finished) < 24
    assert _all_files(out) == finished                 # no temporaries left behind
    _assert_whole_cogs(finished)
    before = {p: p.stat().st_mtime_ns for p in finished}

    rerun = subprocess.run([sys.executable, "-m", "radledger.cli", "run", "--quiet", str(scn.config)],
                           capture_output=True, text=True, timeout=600)
    assert rerun.returncode == 0, rerun.stderr
    assert {p: p.stat().st_mtime_ns for p in finished} == before    # finished products untouched
    done = _products(out)
    assert len(done) == 24 and _all_files(out) == done
    for p in done:
        ref = clean_run / "scenes" / p.name
        np.testing.assert_array_equal(read(p), read(ref))
