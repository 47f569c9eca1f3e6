"""Friendly errors: each bad input exits 2 with one line naming the culprit, no traceback, no output files."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import rasterio
import yaml
import pytest

from radledger.cli import main

from scenario import make_scenario, write_tif


def _run_cli(capsys, *args):
    code = main(list(args))
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def _assert_clean_failure(scn, code, err, *needles):
    assert code == 2, err
    assert "Traceback" not in err
    for n in needles:
        assert n in err, (n, err)
    out = scn.folder / "out"
    assert not out.exists() or not [p for p in out.rglob("*") if p.is_file()]


@pytest.fixture
def scn(tmp_path):
    return make_scenario(tmp_path, shape=(96, 112), chunk=64)


def test_missing_input(scn, capsys):
    scn.write_config(**{"scenes.0.albedo": "nowhere.tif"})
    code, _, err = _run_cli(capsys, "run", str(scn.config))
    _assert_clean_failure(scn, code, err, "nowhere.tif", "not found")


def test_input_without_crs(scn, capsys):
    write_tif(scn.folder / "nocrs.tif", np.full(scn.shape, 20, np.float32), crs=None, transform=scn.transform)
    scn.write_config(**{"scenes.0.air_temperature": "nocrs.tif"})
    code, _, err = _run_cli(capsys, "run", str(scn.config))
    _assert_clean_failure(scn, code, err, "nocrs.tif", "no CRS")


def test_input_not_overlapping_grid(scn, capsys):
    from affine import Affine
    far = Affine(30, 0, 900000, 0, -30, 1000000)
    write_tif(scn.folder / "far.tif", np.full(scn.shape, 20, np.float32), transform=far)
    scn.write_config(**{"scenes.0.air_temperature": "far.tif"})
    code, _, err = _run_cli(capsys, "run", str(scn.config))
    _assert_clean_failure(scn, code, err, "far.tif", "does not overlap")


def test_land_cover_class_missing_from_table(scn, capsys):
    (scn.folder / "emis.csv").write_text("class,emissivity\n10,0.98\n30,0.97\n")
    code, _, err = _run_cli(capsys, "run", str(scn.config))
    _assert_clean_failure(scn, code, err, "60", "80", "emissivity table")


def test_unknown_class_default_is_used_and_flagged(scn, capsys):
    (scn.folder / "emis.csv").write_text("class,emissivity\n10,0.98\n30,0.97\n")
    scn.write_config(**{"emissivity.unknown": 0.95})
    code, _, err = _run_cli(capsys, "run", "--quiet", str(scn.config))
    assert code == 0, err


@pytest.mark.parametrize("layer,units,needle", [
    ("air_temperature", "K", "degC"),            # degC values declared K
    ("surface_temperature", "degC", "K"),        # K values declared degC (after scale: ~300 degC -> 573 K)
])
def test_temperature_units_swapped(scn, capsys, layer, units, needle):
    scn.write_config(**{f"layers.{layer}.units": units})
    code, _, err = _run_cli(capsys, "run", str(scn.config))
    _assert_clean_failure(scn, code, err, layer, needle)


def test_albedo_outside_unit_interval(scn, capsys):
    scn.write_config(**{"layers.albedo": {"nodata": -9999}})   # scale forgotten
    code, _, err = _run_cli(capsys, "run", str(scn.config))
    _assert_clean_failure(scn, code, err, "albedo", "0..1")


def test_negative_shortwave(scn, capsys):
    write_tif(scn.folder / "rs_neg.tif", np.full(scn.shape, -50, np.float32), transform=scn.transform)
    scn.write_config(**{"scenes.0.shortwave_down": "rs_neg.tif"})
    code, _, err = _run_cli(capsys, "run", str(scn.config))
    _assert_clean_failure(scn, code, err, "rs_neg.tif", "negative")


def test_vapour_pressure_in_pa_declared_kpa(scn, capsys):
    write_tif(scn.folder / "ea_pa.tif", np.full(scn.shape, 1200, np.float32), transform=scn.transform)
    scn.write_config(**{"scenes.0.vapour_pressure": "ea_pa.tif", "layers.vapour_pressure.units": "kPa"})
    code, _, err = _run_cli(capsys, "run", str(scn.config))
    _assert_clean_failure(scn, code, err, "ea_pa.tif", "Pa")


def test_truncated_raster(scn, capsys):
    path = scn.folder / "lst.tif"
    data = path.read_bytes()
    path.write_bytes(data[: len(data) // 2])
    code, _, err = _run_cli(capsys, "run", str(scn.config))
    _assert_clean_failure(scn, code, err, "lst.tif")


def test_yaml_syntax_error_names_line(scn, capsys):
    scn.config.write_text("title: x\ngrid:\n  like: land_cover\n   chunk: [1, 2\n")
    code, _, err = _run_cli(capsys, "run", str(scn.config))
    _assert_clean_failure(scn, code, err, "YAML", "line 4")


def test_yaml_object_tags_are_refused(scn, capsys):
    scn.config.write_text("title: !!python/object/apply:os.system ['echo hacked']\n")
    code, out, err = _run_cli(capsys, "run", str(scn.config))
    _assert_clean_failure(scn, code, err, "YAML")
    assert "hacked" not in out


def test_misspelt_key_names_its_path(scn, capsys):
    scn.write_config(**{"grid.resolutoin": 30})
    code, _, err = _run_cli(capsys, "run", str(scn.config))
    _assert_clean_failure(scn, code, err, "grid.resolutoin", "unknown key")


def test_unknown_method_lists_valid_ones(scn, capsys):
    scn.write_config(**{"methods.sky_emissivity": "brutsart"})
    code, _, err = _run_cli(capsys, "run", str(scn.config))
    _assert_clean_failure(scn, code, err, "methods.sky_emissivity", "brutsaert", "swinbank", "prata")


@pytest.mark.parametrize("value", ["2026-02-30T10:00:00Z", "2026-07-14T25:61:00Z"])
def test_impossible_time(scn, capsys, value):
    scn.write_config(**{"scenes.0.time": value})
    code, _, err = _run_cli(capsys, "run", str(scn.config))
    _assert_clean_failure(scn, code, err, "scenes[0].time", value)


def test_output_folder_not_writable(scn, capsys):
    (scn.folder / "blocker").write_text("a file where a folder should be")
    scn.write_config(**{"output.directory": "blocker/out"})
    code, _, err = _run_cli(capsys, "run", str(scn.config))
    assert code == 2 and "output folder is not writable" in err and "Traceback" not in err


def test_grid_too_large_for_the_disk(scn, capsys):
    # 1e11 pixels: 400 GB per float32 product, more than any test machine's disk
    scn.write_config(**{"grid": {"crs": "EPSG:32611", "resolution": 0.1,
                                 "bounds": [300000, 4270000, 400000, 4280000], "chunk": 1024}})
    code, _, err = _run_cli(capsys, "run", str(scn.config))
    assert code == 2 and "--force" in err and "needs about" in err
    assert "Traceback" not in err


def test_check_reports_every_problem_at_once(scn, capsys):
    scn.write_config(**{"scenes.0.albedo": "nowhere.tif", "methods.clouds": "sometimes",
                        "output.compresion": "zstd"})
    code, _, err = _run_cli(capsys, "check", str(scn.config))
    assert code == 2
    for needle in ("methods.clouds", "output.compresion"):
        assert needle in err


def test_check_good_config_prints_plan_and_computes_nothing(scn, capsys):
    code, out, err = _run_cli(capsys, "check", str(scn.config))
    assert code == 0, err
    assert "scenes[0]: 1 times 2026-07-14T18:10Z" in out and "nothing computed" in out
    assert not (scn.folder / "out").exists()


def test_info_of_a_product(scn, capsys):
    assert main(["run", "--quiet", str(scn.config)]) == 0
    capsys.readouterr()
    code, out, _ = _run_cli(capsys, "info", str(scn.folder / "out" / "scenes" / "net_radiation_20260714T1810.tif"))
    assert code == 0
    for needle in ("net_radiation", "W m-2", "brutsaert", "2026-07-14T18:10:00Z", "EPSG:32611", "COG"):
        assert needle in out


def test_missing_config_file(tmp_path, capsys):
    code, _, err = _run_cli(capsys, "run", str(tmp_path / "none.yaml"))
    assert code == 2 and "none.yaml" in err and "not found" in err


def test_exit_2_from_a_real_process(scn):
    scn.write_config(**{"scenes.0.albedo": "nowhere.tif"})
    p = subprocess.run([sys.executable, "-m", "radledger.cli", "run", str(scn.config)], capture_output=True,
                       text=True, timeout=120)
    assert p.returncode == 2
    assert "nowhere.tif" in p.stderr and "Traceback" not in p.stderr
    assert len(p.stderr.strip().splitlines()) == 1


def test_read_only_output_folder_is_refused_even_for_root(scn, capsys):
    ro = scn.folder / "readonly"
    ro.mkdir()
    ro.chmod(0o555)
    try:
        scn.write_config(**{"output.directory": "readonly/out"})
        code, _, err = _run_cli(capsys, "run", str(scn.config))
        assert code == 2 and "not writable" in err and "readonly" in err and "Traceback" not in err
        assert list(ro.iterdir()) == []
    finally:
        ro.chmod(0o755)


@pytest.mark.parametrize("directory", ["gs://bucket/run", "https://example.org/out", "/vsigs/bucket/run"])
def test_output_directory_on_another_store_is_refused(scn, capsys, directory):
    scn.write_config(**{"output.directory": directory})
    code, _, err = _run_cli(capsys, "run", str(scn.config))
    assert code == 2 and "output.directory" in err and "not a local folder or an s3:// prefix" in err
    assert not (scn.folder / "gs:").exists() and not (Path.cwd() / "gs:").exists()


def _one_day(scn, shortwave_file):
    cfg = yaml.safe_load(scn.config.read_text())
    cfg["days"] = [{"date": "2026-07-14", "shortwave_down": shortwave_file, "air_temperature_max": "ta.tif",
                    "air_temperature_min": "ta.tif", "vapour_pressure": "ea.tif"}]
    cfg["scenes"] = []
    scn.config.write_text(yaml.safe_dump(cfg))


def test_daily_shortwave_in_w_m2_declared_mj_names_both_right_conversions(scn, capsys):
    write_tif(scn.folder / "rs_w.tif", np.full(scn.shape, 420, np.float32), transform=scn.transform)
    _one_day(scn, "rs_w.tif")
    code, _, err = _run_cli(capsys, "run", str(scn.config))
    _assert_clean_failure(scn, code, err, "rs_w.tif", "W m-2 daylight", "24-hour mean")
    assert "0.0864" not in err          # a bare scale would be wrong for daylight means


def test_a_run_losing_many_pixels_to_range_checks_says_so(scn, capsys):
    with rasterio.open(scn.folder / "lst.tif", "r+") as ds:        # a block of 500 K surface temperature
        a = ds.read(1)
        a[40:140, 40:140] = int(500 / 0.02) if 500 / 0.02 < 65535 else 65000
        ds.write(a, 1)
    code, out, err = _run_cli(capsys, "run", "--quiet", str(scn.config))
    assert code == 0
    assert "warning:" in err and "outside its physical range" in err and "%" in err
