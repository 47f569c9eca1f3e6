"""Station and net-radiometer tables: each mistake is one line on stderr, exit 2, nothing written.

The tables are the invented fixture of tests/station_fixture.py with one row spoiled.
"""

from __future__ import annotations

import pytest
import yaml

from radledger.cli import main
from radledger.config import load_config
from radledger.errors import ConfigError, Problems

from station_fixture import DATES, make_station_scenario


@pytest.fixture
def scn(tmp_path):
    return make_station_scenario(tmp_path, n_stations=8, chunk=64)


def _run(capsys, scn):
    code = main(["run", str(scn.config)])
    err = capsys.readouterr().err
    return code, err


def _assert_one_line_exit_2(scn, code, err, *needles):
    assert code == 2, err
    lines = [line for line in err.splitlines() if line.strip()]
    assert len(lines) == 1 and lines[0].startswith("error: "), err
    assert "Traceback" not in err
    for n in needles:
        assert n in err, (n, err)
    out = scn.folder / "out"
    assert not out.exists() or not [p for p in out.rglob("*") if p.is_file()]


def _spoil(scn, line_number: int, column: int, value: str, table="stations.csv") -> None:
    path = scn.folder / table
    lines = path.read_text().splitlines()
    parts = lines[line_number - 1].split(",")
    parts[column] = value
    lines[line_number - 1] = ",".join(parts)
    path.write_text("\n".join(lines) + "\n")


def test_unknown_column_names_the_header_row(scn, capsys):
    cfg = yaml.safe_load(scn.config.read_text())
    cfg["stations"]["columns"]["air_temperature_max"] = "tmax"
    scn.config.write_text(yaml.safe_dump(cfg))
    code, err = _run(capsys, scn)
    _assert_one_line_exit_2(scn, code, err, "stations.csv: line 1:", "unknown column 'tmax'", "tmax_c")


def test_unparseable_date_names_the_row(scn, capsys):
    _spoil(scn, 6, 4, "2026-07-32")
    code, err = _run(capsys, scn)
    _assert_one_line_exit_2(scn, code, err, "stations.csv: line 6:", "'2026-07-32'", "YYYY-MM-DD")


def test_station_outside_the_grid_crs_bounds_names_the_row(scn, capsys):
    lon = scn.folder.joinpath("stations.csv").read_text().splitlines()[3].split(",")[1]
    _spoil(scn, 4, 1, lon.lstrip("-"))          # a lost minus sign: 120 E instead of 120 W
    code, err = _run(capsys, scn)
    _assert_one_line_exit_2(scn, code, err, "stations.csv: line 4:", "outside the bounds of the grid's CRS",
                            "EPSG:32611")


def test_duplicate_station_and_date_names_both_rows(scn, capsys):
    path = scn.folder / "stations.csv"
    lines = path.read_text().splitlines()
    path.write_text("\n".join(lines + [lines[2]]) + "\n")     # line 3 again at the end
    code, err = _run(capsys, scn)
    _assert_one_line_exit_2(scn, code, err, f"line {len(lines) + 1}:", "repeats line 3", DATES[0])


def test_unparseable_number_names_the_row_and_column(scn, capsys):
    _spoil(scn, 5, 5, "warm")
    code, err = _run(capsys, scn)
    _assert_one_line_exit_2(scn, code, err, "stations.csv: line 5:", "tmax_c 'warm'", "not a number")


def test_too_few_stations_on_a_date_names_the_date_and_the_variable(scn, capsys):
    path = scn.folder / "stations.csv"
    lines = path.read_text().splitlines()
    kept = 0
    for i, line in enumerate(lines[1:], start=1):
        parts = line.split(",")
        if parts[4] == DATES[1]:
            kept += 1
            if kept > 2:          # 2 stations keep a Tmax; the spline needs 3
                parts[5] = ""
            lines[i] = ",".join(parts)
    path.write_text("\n".join(lines) + "\n")
    code, err = _run(capsys, scn)
    _assert_one_line_exit_2(scn, code, err, f"{DATES[1]} air_temperature_max", "only 2 station(s)",
                            "spline needs at least 3")


def test_missing_station_table(scn, capsys):
    (scn.folder / "stations.csv").unlink()
    code, err = _run(capsys, scn)
    _assert_one_line_exit_2(scn, code, err, "stations.csv", "file not found")


def test_bad_net_radiometer_table_stops_the_run_before_anything_is_written(tmp_path, capsys):
    scn = make_station_scenario(tmp_path, n_stations=8, towers=[["t1", "-120.1", "38.8", "14-07-2026", "12"]])
    code, err = _run(capsys, scn)
    _assert_one_line_exit_2(scn, code, err, "towers.csv: line 2:", "'14-07-2026'")


# --- the config keys (black-box through load_config) -------------------------------------------------

def _config(scn, **changes):
    cfg = yaml.safe_load(scn.config.read_text())
    for key, value in changes.items():
        node = cfg
        *parents, last = key.split(".")
        for p in parents:
            node = node[int(p)] if isinstance(node, list) else node[p]
        if value is None:
            node.pop(last)
        else:
            node[last] = value
    scn.config.write_text(yaml.safe_dump(cfg))
    return scn.config


def _messages(path):
    with pytest.raises((ConfigError, Problems)) as info:
        load_config(path)
    return str(info.value)


def test_stations_input_without_a_stations_section(scn):
    text = _messages(_config(scn, stations=None))
    assert "days[0].air_temperature_max" in text and "stations: section" in text


def test_stations_input_without_a_column_for_its_layer(scn):
    cfg = yaml.safe_load(scn.config.read_text())
    del cfg["stations"]["columns"]["vapour_pressure"]
    scn.config.write_text(yaml.safe_dump(cfg))
    text = _messages(scn.config)
    assert "stations.columns" in text and "vapour_pressure" in text


def test_unknown_gridding_method_lists_the_valid_ones(scn):
    text = _messages(_config(scn, **{"stations.method": "krigging"}))
    assert "stations.method" in text and "kriging" in text and "spline" in text and "idw" in text


def test_stations_need_a_dem(scn):
    cfg = yaml.safe_load(scn.config.read_text())
    cfg["grid"] = {"crs": "EPSG:32611", "resolution": 100, "bounds": [400000, 4288000, 412000, 4300000]}
    del cfg["static"]
    scn.config.write_text(yaml.safe_dump(cfg))
    text = _messages(scn.config)
    assert "static.elevation" in text and "grid station values" in text


def test_stations_are_not_a_static_input_nor_for_satellite_layers(scn):
    text = _messages(_config(scn, **{"static.albedo": "stations"}))
    assert "static.albedo" in text and "not static" in text
    cfg = yaml.safe_load(scn.config.read_text())
    del cfg["static"]["albedo"]
    cfg["days"][0]["albedo"] = "stations"
    scn.config.write_text(yaml.safe_dump(cfg))
    text = _messages(scn.config)
    assert "days[0].albedo" in text and "cannot be gridded from stations" in text


def test_station_values_in_other_units_than_declared(scn, capsys):
    _config(scn, **{"layers.air_temperature.units": "K"})     # the table holds degC
    code, err = _run(capsys, scn)
    assert code == 2 and "Traceback" not in err
    for column in ("tmax_c", "tmin_c"):      # one line per column, then the count
        assert f"stations.csv: column {column}" in err and "look like degC" in err, err
    assert "layers.air_temperature.units: degC" in err and "2 problem(s); nothing was written" in err
    assert not (scn.folder / "out").exists() or not [p for p in (scn.folder / "out").rglob("*") if p.is_file()]
