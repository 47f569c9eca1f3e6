"""Inputs given as http:// URLs, served from 127.0.0.1 by tests/httpserver.py.

GDAL reads them through ``/vsicurl/`` with byte-range requests; the products
must equal those of the same config with local paths, only the parts of a big
tiled input that the grid needs may be fetched, and a missing URL is a user
error (exit 2) naming the URL.  Each test serves its own folder on its own
port, so GDAL's per-URL caches never carry over between tests.
"""

from __future__ import annotations

import urllib.error
import urllib.request

import numpy as np
import pytest
import rasterio

import radledger.cli
from radledger.config import load_config
from radledger.runner import run_config

from httpserver import FileServer
from scenario import RES, X0, Y0, make_scenario, read

STAMP = "20260714T1810"
INPUTS = {"scenes.0.albedo": "albedo.tif", "scenes.0.surface_temperature": "lst.tif",
          "scenes.0.air_temperature": "ta.tif", "scenes.0.vapour_pressure": "ea.tif",
          "scenes.0.shortwave_down": "rs.tif", "static.land_cover": "lc.tif", "static.elevation": "dem.tif"}


@pytest.fixture
def serve():
    """``serve(folder)`` -> a started :class:`FileServer`; every server is stopped after the test."""
    servers = []

    def start(folder):
        s = FileServer(folder).start()
        servers.append(s)
        return s
    yield start
    for s in servers:
        s.stop()


@pytest.fixture(autouse=True)
def _loopback_only(monkeypatch):
    # a proxy from the environment must not see (or break) requests to the test server
    for k in ("http_proxy", "HTTP_PROXY", "https_proxy", "HTTPS_PROXY", "all_proxy", "ALL_PROXY"):
        monkeypatch.delenv(k, raising=False)
    monkeypatch.setenv("NO_PROXY", "127.0.0.1,localhost")
    monkeypatch.setenv("no_proxy", "127.0.0.1,localhost")


def _remote(scn, server, out: str, **extra):
    changes = {k: server.url(name) for k, name in INPUTS.items()}
    changes["output.directory"] = out
    changes.update(extra)
    return scn.write_config(**changes)


def _nr(folder, out):
    return read(folder / out / "scenes" / f"net_radiation_{STAMP}.tif")


def test_remote_inputs_equal_local_inputs(tmp_path, serve):
    scn = make_scenario(tmp_path)
    scn.write_config(**{"output.directory": "out_local"})
    run_config(load_config(scn.config))
    local = _nr(tmp_path, "out_local")

    server = serve(tmp_path)
    cfg = load_config(_remote(scn, server, "out_remote"))
    assert cfg.static["land_cover"].path.startswith("http://127.0.0.1:")
    assert not cfg.emissivity.table.startswith("http")          # the CSV table stays local
    report = run_config(cfg)
    assert len(report.written) == 4
    remote = _nr(tmp_path, "out_remote")

    assert remote.shape == local.shape and remote.dtype == local.dtype
    np.testing.assert_array_equal(np.isnan(remote), np.isnan(local))
    ok = ~np.isnan(local)
    assert ok.mean() > 0.5
    assert np.max(np.abs(remote[ok] - local[ok])) <= 1e-6
    # every input the scene needs was fetched over HTTP; the DEM is not needed (shortwave given, no
    # cloud correction) and is not read at all
    for name in INPUTS.values():
        assert bool(server.for_file(name)) == (name != "dem.tif"), f"{name}: {server.for_file(name)}"
    # and the products record the URLs as their inputs
    with rasterio.open(tmp_path / "out_remote" / "scenes" / f"net_radiation_{STAMP}.tif") as ds:
        assert server.url("albedo.tif") in ds.tags()["inputs"]


def test_remote_reads_use_ranges_and_fetch_only_what_the_grid_needs(tmp_path, serve):
    n = 1024
    scn = make_scenario(tmp_path, shape=(n, n), chunk=256, holes=False)
    half = n // 2 * RES
    grid = {"crs": "EPSG:32611", "resolution": RES, "bounds": [X0, Y0 - half, X0 + half, Y0],
            "resampling": "bilinear", "chunk": 256}
    scn.write_config(**{"grid": grid, "output.directory": "out_local"})
    run_config(load_config(scn.config))
    local = _nr(tmp_path, "out_local")
    assert local.shape == (n // 2, n // 2)

    server = serve(tmp_path)
    run_config(load_config(_remote(scn, server, "out_remote")))
    remote = _nr(tmp_path, "out_remote")
    np.testing.assert_array_equal(np.isnan(remote), np.isnan(local))
    ok = ~np.isnan(local)
    assert np.max(np.abs(remote[ok] - local[ok])) <= 1e-6

    reqs = server.requests
    gets = [r for r in reqs if r.method == "GET"]
    assert gets and all(r.status in (200, 206) for r in gets), [(r.path, r.status) for r in reqs]
    assert any(r.range for r in gets), "GDAL never sent a Range request"
    # no tif was downloaded whole with a plain GET
    assert not [r.path for r in gets if r.range is None and r.path.endswith(".tif")]
    # the grid covers a quarter of each input: far from all of a big tiled input is fetched
    assert server.bytes_sent("dem.tif") == 0          # not needed by this scene: never read
    for name in ("albedo.tif", "lst.tif", "ta.tif"):
        size = (tmp_path / name).stat().st_size
        sent = server.bytes_sent(name)
        assert 0 < sent < 0.75 * size, f"{name}: {sent} of {size} bytes fetched for a quarter of it"


def test_missing_url_exits_2_naming_it(tmp_path, serve, capsys):
    scn = make_scenario(tmp_path, shape=(64, 64), chunk=64)
    server = serve(tmp_path)
    url = server.url("no-such-albedo.tif")
    config = _remote(scn, server, "out", **{"scenes.0.albedo": url})
    rc = radledger.cli.main(["run", str(config)])
    err = capsys.readouterr().err
    assert rc == 2, err
    assert url in err
    assert "Traceback" not in err
    assert any(r.path == "/no-such-albedo.tif" and r.status == 404 for r in server.requests)
    assert not list((tmp_path / "out").rglob("*.tif")) if (tmp_path / "out").exists() else True


def test_file_server_answers_ranges_like_a_static_http_server(tmp_path, serve):
    """The helper itself: whole files, single, suffix and multiple ranges, 404 and 416."""
    data = bytes(range(256)) * 40
    (tmp_path / "blob.tif").write_bytes(data)
    server = serve(tmp_path)

    def get(name, rng=None, method="GET"):
        req = urllib.request.Request(server.url(name), method=method, headers={"Range": rng} if rng else {})
        try:
            with urllib.request.urlopen(req, timeout=10) as r:
                return r.status, dict(r.headers), r.read()
        except urllib.error.HTTPError as exc:
            return exc.code, dict(exc.headers), exc.read()

    st, h, body = get("blob.tif")
    assert st == 200 and body == data and h["Accept-Ranges"] == "bytes"
    st, h, body = get("blob.tif", method="HEAD")
    assert st == 200 and body == b"" and int(h["Content-Length"]) == len(data)
    st, h, body = get("blob.tif", "bytes=100-199")
    assert st == 206 and body == data[100:200] and h["Content-Range"] == f"bytes 100-199/{len(data)}"
    st, h, body = get("blob.tif", "bytes=-16")
    assert st == 206 and body == data[-16:]
    st, h, body = get("blob.tif", "bytes=10-19,1000-1009")
    assert st == 206 and h["Content-Type"].startswith("multipart/byteranges; boundary=")
    boundary = h["Content-Type"].split("boundary=")[1].encode()
    parts = [p for p in body.split(b"--" + boundary) if p.strip(b"-\r\n")]
    assert [p.split(b"\r\n\r\n", 1)[1][:-2] for p in parts] == [data[10:20], data[1000:1010]]
    assert get("blob.tif", f"bytes={len(data)}-")[0] == 416
    assert get("missing.tif")[0] == 404
    # (each request is recorded after its answer is sent, by its own server thread: the order of two
    # quick requests may swap, so look them up rather than at their positions)
    seen = [(r.method, r.range, r.status) for r in server.requests]
    assert {("GET", None, 200), ("HEAD", None, 200), ("GET", "bytes=100-199", 206)} <= set(seen)
    assert server.bytes_sent("blob.tif") == len(data) + 100 + 16 + 20


def test_config_given_as_a_url_resolves_inputs_beside_it(tmp_path):
    """A config fetched over HTTP: relative input paths and the table resolve against its URL."""
    from radledger.config import load_config
    from radledger.runner import run_config
    from scenario import make_scenario, read

    scn = make_scenario(tmp_path / "served", shape=(64, 80), chunk=64, holes=False)
    local = run_config(load_config(scn.config))
    expected = read(local.written[0])
    with FileServer(scn.folder) as server:
        cfg = load_config(server.url("config.yaml"), output_override=tmp_path / "from_url")
        assert cfg.scenes[0].layers["albedo"].path == server.url("albedo.tif")
        report = run_config(cfg)
    got = read(report.written[0])
    np.testing.assert_array_equal(got, expected)


def test_config_url_that_404s_is_a_config_error(tmp_path, capsys):
    from radledger.cli import main
    with FileServer(tmp_path) as server:
        url = server.url("nowhere.yaml")
        assert main(["check", url]) == 2
    err = capsys.readouterr().err
    assert url in err and "HTTP 404" in err
