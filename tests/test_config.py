"""Every user-facing message of the run-config loader, black-box through ``load_config``.

Each case writes a small YAML config into ``tmp_path``, loads it, and checks
that a :class:`ConfigError` (one problem) or :class:`Problems` (several) comes
back whose message names the config file, the key path (``scenes[0].time``,
``grid.chunk``, ...) and the gist of the advice.  Only stable fragments are
asserted, not whole sentences.  Valid values and defaults are the ones the
README's run-config table documents; raster paths need not exist, because
loading a config opens no raster.  URL configs are served from 127.0.0.1.
"""

from __future__ import annotations

import copy
import datetime as dt
import re
import socket
from pathlib import Path

import pytest
import yaml

from radledger.config import load_config
from radledger.errors import ConfigError, Problems

from httpserver import FileServer

DROP = object()   # marks a key to delete in edit()

# the smallest valid configs (invented file names; the files need not exist)
SCENE = {
    "static": {"land_cover": "lc.tif"},
    "emissivity": {"table": "emissivity.csv"},
    "scenes": [{"time": "2026-07-14T18:10:00Z", "albedo": "albedo.tif", "surface_temperature": "lst.tif",
                "air_temperature": "ta.tif", "vapour_pressure": "ea.tif", "shortwave_down": "rs.tif"}],
}
DAY = {
    "static": {"land_cover": "lc.tif", "elevation": "dem.tif"},
    "days": [{"date": "2026-07-14", "shortwave_down": "rsd.tif", "air_temperature_max": "tmax.tif",
              "air_temperature_min": "tmin.tif", "vapour_pressure": "ead.tif"}],
}
COMP = {"name": "summer", "start": "2026-06-01", "end": "2026-08-31"}
GRID = {"crs": "EPSG:32611", "resolution": 30, "bounds": [300000, 4200000, 330000, 4230000]}


def edit(base: dict, changes: dict) -> dict:
    """A deep copy of ``base`` with dotted-path ``changes`` (``"scenes.0.time"``); DROP deletes."""
    cfg = copy.deepcopy(base)
    for dotted, value in changes.items():
        *parents, last = dotted.split(".")
        node = cfg
        for p in parents:
            node = node[int(p)] if isinstance(node, list) else node.setdefault(p, {})
        if isinstance(node, list):
            i = int(last)
            if value is DROP:
                del node[i]
            elif i == len(node):
                node.append(copy.deepcopy(value))
            else:
                node[i] = copy.deepcopy(value)
        elif value is DROP:
            del node[last]
        else:
            node[last] = copy.deepcopy(value)
    return cfg


def write(tmp_path: Path, cfg: dict | str, name: str = "run.yaml") -> Path:
    path = tmp_path / name
    text = cfg if isinstance(cfg, str) else yaml.safe_dump(cfg, sort_keys=False)
    path.write_text(text, encoding="utf-8")
    return path


def messages(path) -> list[str]:
    """The problem messages load_config raises for ``path`` (it must raise)."""
    with pytest.raises((ConfigError, Problems)) as info:
        load_config(path)
    found = info.value.problems if isinstance(info.value, Problems) else [info.value]
    assert found and all(isinstance(p, ConfigError) for p in found)
    return [str(p) for p in found]


def assert_reported(msgs: list[str], where: str, key: str, *fragments: str) -> None:
    """One message names the file ``where``, the key path ``key`` as a whole token, and every fragment."""
    token = re.compile(r"(?<![\w.\[\]])" + re.escape(key) + r"(?![\w.\[])")
    hits = [m for m in msgs if where in m and token.search(m.replace(where, ""))
            and all(f.lower() in m.lower() for f in fragments)]
    assert hits, f"no message names {key!r} with {fragments}; got:\n" + "\n".join(msgs)


def check(tmp_path, base, changes, key, fragments):
    path = write(tmp_path, edit(base, changes))
    msgs = messages(path)
    assert all(str(path) in m for m in msgs), msgs        # every message names the config file
    assert_reported(msgs, str(path), key, *fragments)


P = pytest.param

# --- structure of the file: unknown keys, wrong types -------------------------------------------------
STRUCTURE = [
    P(SCENE, {"scene": []}, "scene", ("unknown key", "did you mean 'scenes'"), id="top-key-typo"),
    P(SCENE, {"zzz": 1}, "zzz", ("unknown key", "valid keys", "title", "composites", "output"), id="top-key-unlike"),
    P(SCENE, {"grid.resolutoin": 30}, "grid.resolutoin", ("unknown key", "did you mean 'resolution'"),
      id="grid-key-typo"),
    P(SCENE, {"scenes.0.albdo": "a.tif"}, "scenes[0].albdo", ("unknown key", "did you mean 'albedo'"),
      id="scene-key-typo"),
    P(SCENE, {"grid": 5}, "grid", ("must be a mapping", "int"), id="grid-not-mapping"),
    P(SCENE, {"scenes.0": "albedo.tif"}, "scenes[0]", ("must be a mapping", "str"), id="scene-not-mapping"),
    P(SCENE, {"title": ["a", "b"]}, "title", ("must be text",), id="title-not-text"),
    P(SCENE, {"scenes": "albedo.tif"}, "scenes", ("must be a list of entries", "- "), id="scenes-not-list"),
    P(DAY, {"days": {"date": "2026-07-14"}}, "days", ("must be a list of entries",), id="days-not-list"),
    P(DAY, {"composites": "summer"}, "composites", ("must be a list of entries",), id="composites-not-list"),
    P(SCENE, {"scenes": DROP}, "scenes", ("no scenes and no days", "add at least one"), id="no-scenes-no-days"),
    P(SCENE, {"static.land_cover": 5}, "static.land_cover", ("must be a file path or url", "5"),
      id="path-not-text"),
    P(SCENE, {"scenes.0.albedo": "  "}, "scenes[0].albedo", ("must be a file path or url",), id="path-blank"),
]

# --- layers: decoding ---------------------------------------------------------------------------------
# valid units per layer: README run-config table (temperatures K/degC; vapour pressure kPa/hPa/Pa)
LAYERS = [
    P(SCENE, {"layers.air_temperature.units": "F"}, "layers.air_temperature.units",
      ("unknown units", "'F'", "K", "degC"), id="units-temperature"),
    P(SCENE, {"layers.vapour_pressure.units": "psi"}, "layers.vapour_pressure.units",
      ("unknown units", "kPa", "hPa", "Pa"), id="units-vapour"),
    P(SCENE, {"layers.albedo.scale": 0}, "layers.albedo.scale", ("must not be 0",), id="scale-zero"),
    P(SCENE, {"layers.albedo.scale": "x1000"}, "layers.albedo.scale", ("must be a number", "x1000"),
      id="scale-not-number"),
]

# --- grid -------------------------------------------------------------------------------------------
GRIDS = [
    P(SCENE, {"grid.like": 5}, "grid.like", ("must be a layer name",), id="like-not-text"),
    P(SCENE, {"grid.like": "landcover"}, "grid.like", ("'landcover' is not a layer name", "static", "land_cover"),
      id="like-unknown-layer"),
    P(SCENE, {"grid.like": "elevation"}, "grid.like", ("'elevation'", "under static"), id="like-not-static"),
    P(SCENE, {"grid": {"like": "land_cover", "crs": "EPSG:32611"}}, "grid",
      ("either like", "crs/resolution/bounds", "not both"), id="like-and-crs"),
    P(SCENE, {"static": {"albedo": "albedo.tif"}, "emissivity": {"constant": 0.98}}, "grid",
      ("like:", "crs, resolution and bounds"), id="no-grid-no-land-cover"),
    P(SCENE, {"grid": GRID, "grid.crs": DROP}, "grid.crs", ("missing", "go together"), id="crs-missing"),
    P(SCENE, {"grid": GRID, "grid.resolution": DROP}, "grid.resolution", ("missing", "go together"),
      id="resolution-missing"),
    P(SCENE, {"grid": GRID, "grid.bounds": DROP}, "grid.bounds", ("missing", "go together"), id="bounds-missing"),
    P(SCENE, {"grid": {**GRID, "crs": "EPSG:999999"}}, "grid.crs", ("'EPSG:999999'", "not a crs", "EPSG:32611"),
      id="crs-unknown"),
    P(SCENE, {"grid": {**GRID, "resolution": -30}}, "grid.resolution", ("must be positive", "-30"),
      id="resolution-negative"),
    P(SCENE, {"grid": {**GRID, "resolution": [30, 0]}}, "grid.resolution[1]", ("must be positive",),
      id="resolution-pair-zero"),
    P(SCENE, {"grid": {**GRID, "resolution": "thirty"}}, "grid.resolution", ("must be a number", "thirty"),
      id="resolution-text"),
    P(SCENE, {"grid": {**GRID, "bounds": [0, 0, 1]}}, "grid.bounds", ("[xmin, ymin, xmax, ymax]",),
      id="bounds-three"),
    P(SCENE, {"grid": {**GRID, "bounds": [10, 0, 0, 10]}}, "grid.bounds", ("xmin < xmax", "ymin < ymax"),
      id="bounds-reversed"),
    P(SCENE, {"grid": {**GRID, "bounds": [0, "south", 1, 1]}}, "grid.bounds[1]", ("must be a number", "south"),
      id="bounds-text"),
    P(SCENE, {"grid.chunk": 1000}, "grid.chunk", ("1000", "multiple of 16"), id="chunk-not-16"),
    P(SCENE, {"grid.chunk": 0}, "grid.chunk", ("must be positive",), id="chunk-zero"),
    P(SCENE, {"grid.chunk": 512.5}, "grid.chunk", ("must be a whole number", "512.5"), id="chunk-fraction"),
    P(SCENE, {"grid.chunk": True}, "grid.chunk", ("must be a number", "True"), id="chunk-boolean"),
    P(SCENE, {"grid.resampling": "bilinar"}, "grid.resampling",
      ("unknown value 'bilinar'", "did you mean 'bilinear'", "nearest", "lanczos"), id="resampling"),
]

# --- emissivity and the static layers the physics needs ---------------------------------------------
EMISSIVITY = [
    P(SCENE, {"emissivity": {"constant": 1.5}}, "emissivity.constant", ("1.5", "(0, 1]"), id="constant-high"),
    P(SCENE, {"emissivity": {"constant": 0}}, "emissivity.constant", ("(0, 1]",), id="constant-zero"),
    P(SCENE, {"emissivity.constant": 0.97}, "emissivity", ("table or constant", "not both"), id="table-and-constant"),
    P(SCENE, {"emissivity.unknown": 2}, "emissivity.unknown", ("'error'", "(0, 1]"), id="unknown-out-of-range"),
    P(SCENE, {"emissivity.unknown": "skip"}, "emissivity.unknown", ("must be a number", "skip"), id="unknown-text"),
    P(SCENE, {"emissivity": DROP}, "emissivity.table", ("csv table", "emissivity.constant"), id="no-table"),
    P(SCENE, {"static": {}, "grid": GRID}, "static.land_cover", ("emissivity lookup", "land-cover raster",
                                                                 "emissivity.constant"), id="no-land-cover"),
    P(DAY, {"static.elevation": DROP}, "static.elevation", ("FAO-56", "DEM"), id="days-need-dem"),
    P(SCENE, {"scenes.0.shortwave_down": DROP}, "static.elevation", ("without shortwave_down", "DEM"),
      id="modelled-shortwave-needs-dem"),
    P(SCENE, {"methods.clouds": "crawford-duchon"}, "static.elevation",
      ("methods.clouds: crawford-duchon", "clear-sky shortwave", "DEM"), id="clouds-need-dem"),
]

# --- methods: valid values from the README's method table ---------------------------------------------
METHODS = [
    P(SCENE, {"methods.sky_emissivity": "brutsart"}, "methods.sky_emissivity",
      ("unknown value 'brutsart'", "did you mean 'brutsaert'", "swinbank", "idso-jackson", "satterlund", "prata"),
      id="sky-emissivity"),
    P(SCENE, {"methods.clouds": "sometimes"}, "methods.clouds", ("'sometimes'", "none", "crawford-duchon"),
      id="clouds"),
    P(SCENE, {"methods.clear_sky_shortwave": "beam"}, "methods.clear_sky_shortwave",
      ("'beam'", "fao56", "beam-diffuse"), id="clear-sky"),
    P(SCENE, {"methods.scene_to_day": "linear"}, "methods.scene_to_day",
      ("'linear'", "none", "sinusoidal", "shortwave-ratio"), id="scene-to-day"),
]

# --- scenes and days ----------------------------------------------------------------------------------
_S0 = SCENE["scenes"][0]
_D0 = DAY["days"][0]
DATES = [
    P(SCENE, {"scenes.0.time": DROP}, "scenes[0].time", ("missing", "UTC", "2026-07-14T18:10:00Z"),
      id="time-missing"),
    P(SCENE, {"scenes.0.time": "14/07/2026 18:10"}, "scenes[0].time",
      ("'14/07/2026 18:10'", "not a valid utc time", "YYYY-MM-DDTHH:MM:SSZ"), id="time-invalid"),
    P(SCENE, {"scenes.0.time": dt.date(2026, 7, 14)}, "scenes[0].time", ("not a valid utc time",),
      id="time-without-clock"),
    P(SCENE, {"scenes.1": {**_S0, "time": "2026-07-14T18:10:30Z"}}, "scenes[1].time",
      ("repeats an earlier scene time",), id="time-repeated-to-the-minute"),
    P(DAY, {"days.0.date": DROP}, "days[0].date", ("missing", "2026-07-14"), id="date-missing"),
    P(DAY, {"days.0.date": "14/07/2026"}, "days[0].date", ("'14/07/2026'", "not a valid date", "YYYY-MM-DD"),
      id="date-invalid"),
    P(DAY, {"days.1": _D0}, "days[1].date", ("2026-07-14", "repeats an earlier day"), id="date-repeated"),
]

INPUTS = [
    *(P(SCENE, {f"scenes.0.{layer}": DROP}, f"scenes[0].{layer}", ("missing", "raster", "static"),
        id=f"scene-{layer}-missing") for layer in ("albedo", "surface_temperature", "air_temperature")),
    P(SCENE, {"scenes.0.vapour_pressure": DROP}, "scenes[0]",
      ("needs vapour_pressure", "dewpoint_temperature", "relative_humidity"), id="scene-humidity-missing"),
    P(SCENE, {"scenes.0.vapour_pressure": DROP, "scenes.0.air_temperature": DROP,
              "scenes.0.relative_humidity": "rh.tif"}, "scenes[0]",
      ("relative_humidity needs air_temperature",), id="scene-rh-without-temperature"),
    *(P(DAY, {f"days.0.{layer}": DROP}, f"days[0].{layer}", ("missing", "raster", "static"),
        id=f"day-{layer}-missing") for layer in ("shortwave_down", "air_temperature_max", "air_temperature_min")),
    P(DAY, {"days.0.vapour_pressure": DROP}, "days[0]", ("needs vapour_pressure", "relative_humidity"),
      id="day-humidity-missing"),
    P(DAY, {"days.0.vapour_pressure": DROP, "days.0.air_temperature_max": DROP,
            "days.0.relative_humidity": "rh.tif"}, "days[0]",
      ("relative_humidity needs air_temperature_max",), id="day-rh-without-tmax"),
]

# --- composites (statistics valid per README: mean median min max sum std count total) ----------------
_DAYC = edit(DAY, {"composites": [COMP]})
COMPOSITES = [
    P(_DAYC, {"composites.0.name": "my summer"}, "composites[0].name",
      ("'my summer'", "file name", "no spaces or /"), id="name-space"),
    P(_DAYC, {"composites.0.name": "a/b"}, "composites[0].name", ("file name",), id="name-slash"),
    P(_DAYC, {"composites.0.name": DROP}, "composites[0].name", ("None", "file name"), id="name-missing"),
    P(_DAYC, {"composites.1": COMP}, "composites[1].name", ("'summer'", "used twice"), id="name-twice"),
    P(_DAYC, {"composites.0": {"name": "s", "season": "summer", "year": 2026}}, "composites[0].season",
      ("'summer'", "DJF", "MAM", "JJA", "SON"), id="season-unknown"),
    P(_DAYC, {"composites.0": {"name": "s", "season": "JJA"}}, "composites[0].year",
      ("missing", "season needs the year", "DJF"), id="season-without-year"),
    P(_DAYC, {"composites.0": {"name": "s", "season": "JJA", "year": 2026.5}}, "composites[0].year",
      ("must be a whole number",), id="year-fraction"),
    P(_DAYC, {"composites.0": {**COMP, "season": "JJA", "year": 2026}}, "composites[0]",
      ("season/year or start/end", "not both"), id="season-and-start"),
    P(_DAYC, {"composites.0.start": DROP}, "composites[0].start", ("missing", "start and end", "season and year"),
      id="start-missing"),
    P(_DAYC, {"composites.0.end": DROP}, "composites[0].end", ("missing", "start and end"), id="end-missing"),
    P(_DAYC, {"composites.0.start": "2026-06-31"}, "composites[0].start", ("not a valid date", "YYYY-MM-DD"),
      id="start-invalid"),
    P(_DAYC, {"composites.0.end": "2026-05-31"}, "composites[0].end", ("2026-05-31", "before start", "2026-06-01"),
      id="end-before-start"),
    P(_DAYC, {"composites.0.statistics": []}, "composites[0].statistics",
      ("must be a list of", "mean", "median", "std", "total"), id="statistics-empty"),
    P(_DAYC, {"composites.0.statistics": {"mean": 1}}, "composites[0].statistics", ("must be a list of",),
      id="statistics-mapping"),
    P(_DAYC, {"composites.0.statistics": ["mean", "avg"]}, "composites[0].statistics",
      ("unknown value 'avg'", "median", "count"), id="statistics-unknown"),
    P(edit(SCENE, {"composites": [{**COMP, "from": "scenes", "statistics": ["mean", "total"]}]}),
      {}, "composites[0].statistics", ("total", "from days only"), id="total-from-scenes"),
    P(_DAYC, {"composites.0.min_count": -1}, "composites[0].min_count", ("0 or more",), id="min-count-negative"),
    P(_DAYC, {"composites.0.from": "hours"}, "composites[0].from", ("'hours'", "days", "scenes"),
      id="from-unknown"),
    P(edit(SCENE, {"composites": [COMP]}), {}, "composites[0].from", ("from days", "no days"),
      id="from-days-without-days"),
    P(edit(_DAYC, {"composites.0.from": "scenes"}), {}, "composites[0].from", ("from scenes", "no scenes"),
      id="from-scenes-without-scenes"),
]

# --- zones and output (products and codecs valid per README) ------------------------------------------
OUTPUTS = [
    P(SCENE, {"zones": {"id": "basin"}}, "zones.path", ("missing", "GeoJSON or GeoPackage"), id="zones-path"),
    P(SCENE, {"zones": {"path": "zones.geojson"}}, "zones.id", ("missing", "attribute"), id="zones-id"),
    P(SCENE, {"output.directory": ""}, "output.directory", ("folder path",), id="directory-blank"),
    P(SCENE, {"output.directory": 5}, "output.directory", ("folder path",), id="directory-number"),
    P(SCENE, {"output.products": []}, "output.products",
      ("must be a list of", "net_radiation", "quality", "longwave_down", "clear_sky_shortwave"), id="products-empty"),
    P(SCENE, {"output.products": ["net_radation"]}, "output.products",
      ("unknown value 'net_radation'", "did you mean 'net_radiation'", "sky_emissivity"), id="products-typo"),
    P(SCENE, {"output.compression": "gzip"}, "output.compression", ("'gzip'", "zstd", "deflate", "lzw"),
      id="compression"),
    P(SCENE, {"output.netcdf": "maybe"}, "output.netcdf", ("'maybe' not in output.products", "net_radiation"),
      id="netcdf"),
    P(SCENE, {"output.netcdf": 3}, "output.netcdf", ("true, false or a list of products",), id="netcdf-number"),
    P(SCENE, {"output.quicklooks": 1}, "output.quicklooks", ("true or false",), id="quicklooks"),
]


@pytest.mark.parametrize("base, changes, key, fragments",
                         STRUCTURE + LAYERS + GRIDS + EMISSIVITY + METHODS + DATES + INPUTS + COMPOSITES + OUTPUTS)
def test_message_names_key_and_advice(tmp_path, base, changes, key, fragments):
    check(tmp_path, base, changes, key, fragments)


# --- reading the file itself ------------------------------------------------------------------------
@pytest.mark.parametrize("text, line, fragments", [
    P("title: ok\ngrid:\n  chunk: 512\n bad: indent\n", 4, (), id="indentation"),
    P("title: ok\nscenes: [\n", 3, (), id="unclosed-list"),
    P("title: !!python/object/apply:os.system ['echo hacked']\n", 1, ("no tags",), id="python-tag"),
])
def test_yaml_syntax_error_names_line(tmp_path, text, line, fragments):
    path = write(tmp_path, text)
    (msg,) = messages(path)
    # the line is counted by hand in `text` (1-based, as editors show it)
    assert str(path) in msg and f"line {line}," in msg
    for f in ("YAML syntax error", "fix the YAML") + fragments:
        assert f in msg


@pytest.mark.parametrize("text", ["- scenes\n- days\n", "just some words\n"], ids=["list", "scalar"])
def test_top_level_must_be_mapping(tmp_path, text):
    path = write(tmp_path, text)
    (msg,) = messages(path)
    assert str(path) in msg and "must be a YAML mapping" in msg


def test_config_file_not_found(tmp_path):
    path = tmp_path / "nowhere.yaml"
    (msg,) = messages(path)
    assert str(path) in msg and "not found" in msg and "check the path" in msg


@pytest.mark.parametrize("kind", ["latin-1", "directory"])
def test_unreadable_config_file(tmp_path, kind):
    path = tmp_path / "run.yaml"
    if kind == "directory":
        path.mkdir()
    else:
        path.write_bytes("title: caf\u00e9\n".encode("latin-1"))   # 0xE9 alone is not UTF-8
    (msg,) = messages(path)
    assert str(path) in msg and "cannot read the config" in msg and "UTF-8" in msg


def test_impossible_calendar_date_is_a_config_error(tmp_path):
    text = yaml.safe_dump(DAY, sort_keys=False).replace("'2026-07-14'", "2026-02-30")
    assert_reported(messages(write(tmp_path, text)), "", "days[0].date", "not a valid date")


# --- configs given as URLs (loopback only) -----------------------------------------------------------
@pytest.fixture
def served(tmp_path):
    root = tmp_path / "www"
    root.mkdir()
    with FileServer(root) as server:
        yield root, server


def test_url_config_http_404(served):
    _, server = served
    url = server.url("missing.yaml")
    (msg,) = messages(url)
    assert url in msg and "HTTP 404" in msg and "check the URL" in msg


def test_url_config_not_utf8(served):
    root, server = served
    (root / "run.yaml").write_bytes("title: caf\u00e9\n".encode("latin-1"))
    (msg,) = messages(server.url("run.yaml"))
    assert server.url("run.yaml") in msg and "cannot fetch the config" in msg


def test_url_config_connection_refused():
    with socket.socket() as s:          # a loopback port nobody listens on once closed
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    url = f"http://127.0.0.1:{port}/run.yaml"
    (msg,) = messages(url)
    assert url in msg and "cannot fetch the config" in msg and "network" in msg


def test_url_config_resolves_relative_paths_against_url(served):
    # README: "relative paths then resolve against that URL"
    root, server = served
    write(root, SCENE)
    cfg = load_config(server.url("run.yaml"))
    assert cfg.scenes[0].layers["albedo"].path == server.url("albedo.tif")
    assert cfg.static["land_cover"].path == server.url("lc.tif")


# --- what a valid config gives ------------------------------------------------------------------------
def test_several_problems_are_reported_together(tmp_path):
    path = write(tmp_path, edit(SCENE, {"grid.chunk": 1000, "methods.clouds": "sometimes",
                                        "scenes.0.albedo": DROP}))
    with pytest.raises(Problems) as info:
        load_config(path)
    text = str(info.value)
    for key in ("grid.chunk", "methods.clouds", "scenes[0].albedo"):
        assert key in text
    assert len(info.value.problems) == 3


def test_minimal_config_loads_with_documented_defaults(tmp_path):
    cfg = edit(SCENE, {"scenes.1": {**_S0, "time": "2026-07-15T20:30:00"},          # no zone: UTC
                       "scenes.2": {**_S0, "time": "2026-07-16T20:10:00+02:00"}})   # = 18:10 UTC
    c = load_config(write(tmp_path, cfg))
    utc = dt.timezone.utc
    assert [s.time for s in c.scenes] == [dt.datetime(2026, 7, 14, 18, 10, tzinfo=utc),
                                          dt.datetime(2026, 7, 15, 20, 30, tzinfo=utc),
                                          dt.datetime(2026, 7, 16, 18, 10, tzinfo=utc)]
    # defaults as the README's run-config table documents them
    assert c.title == ""
    assert c.grid.like == "land_cover" and c.grid.crs is None
    assert c.grid.resampling == "bilinear" and c.grid.chunk == 1024
    assert c.emissivity.unknown == "error" and c.emissivity.constant is None
    # beam-diffuse: the App. D clear sky is the scene default (eq. 37 assumes a mean daily sun angle)
    assert (c.methods.sky_emissivity, c.methods.clouds, c.methods.clear_sky_shortwave,
            c.methods.scene_to_day) == ("brutsaert", "none", "beam-diffuse", "none")
    assert c.output.directory == tmp_path.resolve() / "out"
    assert c.output.products == ("net_radiation", "net_shortwave", "net_longwave", "quality")
    assert c.output.compression == "zstd"
    assert c.output.netcdf == () and c.output.quicklooks is False
    assert c.zones is None and c.days == () and c.composites == ()
    # README: paths are relative to the config file; static layers serve every date
    assert c.scenes[0].layers["albedo"].path == str(tmp_path.resolve() / "albedo.tif")
    assert c.scenes[0].layers["land_cover"].path == str(tmp_path.resolve() / "lc.tif")


def test_composite_defaults_and_season_windows(tmp_path):
    cfg = edit(DAY, {"composites": [COMP, {"name": "jja", "season": "JJA", "year": 2026},
                                    {"name": "djf", "season": "DJF", "year": 2026}]})
    c = load_config(write(tmp_path, cfg))
    summer, jja, djf = c.composites
    # README: composites come from days, give [mean, count], need 1 valid date; windows are inclusive
    assert (summer.source, summer.statistics, summer.min_count) == ("days", ("mean", "count"), 1)
    assert (summer.start, summer.end) == (dt.date(2026, 6, 1), dt.date(2026, 8, 31))
    # meteorological seasons (common practice): JJA = Jun-Aug; DJF of Y = Dec Y-1 .. Feb Y (2026: 28 days)
    assert (jja.start, jja.end) == (dt.date(2026, 6, 1), dt.date(2026, 8, 31))
    assert (djf.start, djf.end) == (dt.date(2025, 12, 1), dt.date(2026, 2, 28))
    assert c.days[0].date == dt.date(2026, 7, 14)
