"""A disk that fills up, a write GDAL gets wrong, a failed run in a folder the user already had.

Whatever fails, no unreadable file is left at a product's final path, no
temporary is left behind, folders the user had survive, and a rerun (without
``--force``) finishes with products equal to an undisturbed run.

Full disks are real, not mocked: a small tmpfs mounted in a private mount
namespace (``unshare -rm``; skipped where the system forbids user namespaces),
and the operating system's file size limit (``RLIMIT_FSIZE``, ``ulimit -f``),
which stops a write exactly as a full disk does (EFBIG instead of ENOSPC) and
works for any user, so at least one disk-full run happens everywhere.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import rasterio
import yaml

import radledger.io.cog as cog
import radledger.io.cogcheck as cogcheck
from radledger.cli import main
from radledger.config import load_config
from radledger.runner import run_config

from scenario import make_scenario, read

HERE = Path(__file__).resolve().parent
SRC = HERE.parent / "src"
TIMES = ("2026-07-10T18:10:00Z", "2026-07-11T18:10:00Z")


@pytest.fixture(scope="module", params=[256, 512], ids=["gdal-cog-pass", "tiles-in-tasks"])
def two_scenes(tmp_path_factory, request):
    """Two 600 x 600 scenes, four products each; ``ref/``: an undisturbed run.  Chunks of 256 go through
    the uncompressed intermediates and GDAL's COG driver, chunks of 512 compress their tiles in the tasks."""
    folder = tmp_path_factory.mktemp("diskfull")
    scn = make_scenario(folder, shape=(600, 600), chunk=request.param)
    # tmpfs sizes that fill during the first scene (two) and during the second: the uncompressed
    # intermediates need more room than the spooled tiles (the products take ~7 MB either way)
    scn.disk_sizes = ("7000k", "9000k", "11000k") if request.param == 256 else ("5000k", "6000k", "8500k")
    cfg = yaml.safe_load(scn.config.read_text())
    cfg["scenes"] = [dict(cfg["scenes"][0], time=t) for t in TIMES]
    cfg["output"]["directory"] = "ref"
    scn.config.write_text(yaml.safe_dump(cfg, sort_keys=False))
    run_config(load_config(scn.config))
    cfg["output"]["directory"] = str(folder / "disk")
    scn.config.write_text(yaml.safe_dump(cfg, sort_keys=False))
    return scn


def _driver(prefix: list[str], mode: str, scn, *sizes: str) -> list[dict]:
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(SRC), str(HERE)]))
    p = subprocess.run(prefix + [sys.executable, str(HERE / "diskfull_driver.py"), mode, str(scn.config),
                                 str(scn.folder / "disk"), str(scn.folder / "ref"), *sizes],
                       capture_output=True, text=True, env=env, timeout=600)
    lines = [ln for ln in p.stdout.splitlines() if ln.startswith("RESULT ")]
    assert p.returncode == 0 and lines, p.stdout + p.stderr
    return json.loads(lines[-1][len("RESULT "):])


def _assert_failed_cleanly(case: dict, scn, *needles: str) -> None:
    first, after = case["first"], case["after_first"]
    err = first["stderr"]
    assert first["code"] == 3, err                       # not 1 ("a bug"), not 0
    assert "Traceback" not in err and "a bug" not in err
    assert len(err.strip().splitlines()) == 1, err      # one line (GDAL's own C-level lines go elsewhere)
    for n in needles:
        assert n in err, (n, err)
    assert after["bad"] == []                            # nothing unreadable at a final path
    assert not [f for f in after["files"] if Path(f).name.startswith(".")], after   # no temporaries, no lock
    assert "keep-me/empty" in after["dirs"]             # the user's empty folders survive


def _assert_resumed(case: dict, scn) -> None:
    second, after = case["second"], case["after_second"]
    assert second["code"] == 0, second["stderr"]         # no --force needed once there is room
    expected = sorted(f"scenes/{p.name}" for p in (scn.folder / "ref" / "scenes").glob("*.tif"))
    assert after["files"] == expected
    assert case["differ"] == []                          # equal to the undisturbed run, bit for bit


def _namespaces() -> bool:
    if sys.platform != "linux" or shutil.which("unshare") is None or shutil.which("mount") is None:
        return False
    probe = subprocess.run(["unshare", "-rm", "sh", "-c", "mount -t tmpfs -o size=1m tmpfs /mnt || "
                            "mount -t tmpfs -o size=1m tmpfs /tmp"], capture_output=True)
    return probe.returncode == 0


def test_a_small_disk_filling_up_mid_run(two_scenes):
    if not _namespaces():
        pytest.skip("this system does not allow a private mount namespace (unshare -rm) to mount a small tmpfs; "
                    "test_a_file_size_limit_stops_writes runs the same checks under ulimit -f")
    # three disk sizes (tmpfs): full during the first scene's intermediates (two sizes) and during the
    # second scene; each is then grown to 64 MB and the run repeated
    cases = _driver(["unshare", "-rm"], "tmpfs", two_scenes, *two_scenes.disk_sizes)
    folder = str(two_scenes.folder / "disk")
    for case in cases:
        _assert_failed_cleanly(case, two_scenes, folder, "disk is full", "more is needed", "is free")
        _assert_resumed(case, two_scenes)
    # the finished products of a failed run are kept (README: exit 3 keeps them)
    assert any(case["after_first"]["files"] for case in cases)


def test_a_file_size_limit_stops_writes(two_scenes):
    (case,) = _driver([], "rlimit", two_scenes, str(1_000_000))    # a 600 x 600 float32 layer is 1.44 MB
    _assert_failed_cleanly(case, two_scenes, "file size limit", "ulimit -f")
    _assert_resumed(case, two_scenes)


def test_a_cog_cut_short_without_an_error_is_never_renamed(tmp_path, monkeypatch, capsys):
    """GDAL's COG copy can finish a truncated file without raising; the check before the rename catches it."""
    scn = make_scenario(tmp_path, shape=(96, 112), chunk=64)
    real_copy = cog.rasterio.shutil.copy

    def cut_short(src, dst, **kw):
        real_copy(src, dst, **kw)
        size = os.path.getsize(dst)
        with open(dst, "r+b") as fh:
            fh.truncate(size - 200)
    monkeypatch.setattr(cog.rasterio.shutil, "copy", cut_short)
    code = main(["run", "--quiet", str(scn.config)])
    err = capsys.readouterr().err
    assert code == 3, err
    assert "writing failed" in err and "Traceback" not in err
    out = tmp_path / "out"
    assert not out.exists() or not [p for p in out.rglob("*") if p.is_file()]


def test_a_failed_run_removes_only_the_folders_it_created(tmp_path, capsys):
    """An output folder that is a git checkout: its empty folders are not the run's to remove."""
    scn = make_scenario(tmp_path, shape=(96, 112), chunk=64)
    (scn.folder / "emis.csv").write_text("class,emissivity\n10,0.98\n30,0.97\n")   # classes 60, 80 missing
    out = tmp_path / "out"
    mine = [out / ".git" / "refs" / "tags", out / ".git" / "objects" / "info", out / "notes", out / "scenes-old"]
    for d in mine:
        d.mkdir(parents=True)
    code = main(["run", "--quiet", str(scn.config)])
    err = capsys.readouterr().err
    assert code == 2 and "emissivity table" in err, err     # met during the run, after folders were made
    for d in mine:
        assert d.is_dir(), d
    assert not (out / "scenes").exists()                    # made by this run, empty: removed
    assert sorted(p.name for p in out.iterdir()) == [".git", "notes", "scenes-old"]


def test_a_failed_run_removes_the_output_folder_it_created(tmp_path, capsys):
    scn = make_scenario(tmp_path, shape=(96, 112), chunk=64)
    (scn.folder / "emis.csv").write_text("class,emissivity\n10,0.98\n30,0.97\n")
    scn.write_config(**{"output.directory": "new/deeper/out"})
    assert main(["run", "--quiet", str(scn.config)]) == 2
    assert not (tmp_path / "new").exists()


def test_products_and_tables_follow_the_umask(tmp_path):
    """Every output is created like any file the user makes: mode 0666 less the umask (POSIX open(2))."""
    from radledger.io.atomic import atomic_output

    scn = make_scenario(tmp_path, shape=(96, 112), chunk=64)
    scn.write_config(**{"output.quicklooks": True, "output.netcdf": True})
    old = os.umask(0o027)
    try:
        run_config(load_config(scn.config))
        with atomic_output(tmp_path / "table.csv") as tmp:
            tmp.write_text("a,b\n")
    finally:
        os.umask(old)
    files = [p for p in (tmp_path / "out").rglob("*") if p.is_file()] + [tmp_path / "table.csv"]
    assert {p.suffix for p in files} >= {".tif", ".png", ".nc", ".csv"}
    for p in files:
        assert p.stat().st_mode & 0o777 == 0o640, (p, oct(p.stat().st_mode))


def test_finished_products_are_read_whole_after_a_run(tmp_path):
    """The checks before each rename accept every product of a normal run (and change none)."""
    scn = make_scenario(tmp_path, shape=(96, 112), chunk=64)
    report = run_config(load_config(scn.config))
    for p in report.written:
        with rasterio.open(p) as ds:
            cogcheck.verify_cog(str(p), width=ds.width, height=ds.height, dtype=ds.dtypes[0])
        assert np.isfinite(read(p)).any() or "quality" in p.name


def test_gdal_state_is_read_from_the_gdal_that_rasterio_uses():
    """Other packages (pyogrio) may load their own GDAL; the write checks must ask rasterio's."""
    import pyogrio  # noqa: F401  (loads its GDAL first, if it has its own)
    from radledger.io.gdalapi import _find_library

    bundled = Path(rasterio.__file__).resolve().parents[1] / "rasterio.libs"
    if not bundled.is_dir():
        pytest.skip("rasterio here uses a GDAL shared with other packages")
    assert Path(_find_library()).parent == bundled
