"""Reruns recompute exactly when an input's content changed, and a change during a run fails cleanly.

The fingerprints (README, "Reruns and fingerprints"): a local file by size,
modification and change times, inode and device; an http(s) input by its
ETag (RFC 9110 section 8.8.3: a validator that changes with the content); an
object-store input by the same header, as GDAL receives it.  Remote inputs are
served from 127.0.0.1 with an ETag computed from the bytes.
"""

from __future__ import annotations

import hashlib
import os
import threading
import urllib.parse
from http.server import ThreadingHTTPServer
from pathlib import Path

import numpy as np
import pytest
import rasterio
from rasterio.windows import Window

import httpserver
import radledger.execution.engine as engine_module
from radledger.cli import main
from radledger.config import load_config
from radledger.planning.provenance import file_fingerprint
from radledger.runner import run_config

from scenario import make_scenario, read, write_tif

NR = "scenes/net_radiation_20260714T1810.tif"


class _ETagHandler(httpserver._Handler):
    """The test file server, plus an ETag: a hash of the file's bytes."""

    def end_headers(self):
        rel = urllib.parse.unquote(urllib.parse.urlsplit(self.path).path).lstrip("/")
        target = self.server.root / rel
        if target.is_file():
            self.send_header("ETag", '"' + hashlib.sha1(target.read_bytes()).hexdigest() + '"')
        super().end_headers()


class _ETagServer(httpserver._Server):
    def __init__(self, root):
        ThreadingHTTPServer.__init__(self, ("127.0.0.1", 0), _ETagHandler)
        self.root = Path(root).resolve()
        self.requests = []
        self.lock = threading.Lock()


class ETagFileServer(httpserver.FileServer):
    def start(self):
        self._server = _ETagServer(self.root)
        self._thread = threading.Thread(target=self._server.serve_forever, kwargs={"poll_interval": 0.1},
                                        daemon=True)
        self._thread.start()
        return self


@pytest.fixture(autouse=True)
def _loopback_only(monkeypatch):
    for k in ("http_proxy", "HTTP_PROXY", "https_proxy", "HTTPS_PROXY", "all_proxy", "ALL_PROXY"):
        monkeypatch.delenv(k, raising=False)
    monkeypatch.setenv("NO_PROXY", "127.0.0.1,localhost")
    monkeypatch.setenv("no_proxy", "127.0.0.1,localhost")


def _rewrite_keeping_size_and_mtime(path: Path) -> None:
    """Change pixels of an uncompressed GeoTIFF in place; restore its times (as touch -r / cp -p do)."""
    st = path.stat()
    with rasterio.open(path, "r+") as ds:
        block = ds.read(1, window=Window(0, 40, 50, 30))
        ds.write((block + 50).astype(block.dtype), 1, window=Window(0, 40, 50, 30))
    os.utime(path, ns=(st.st_atime_ns, st.st_mtime_ns))
    assert (path.stat().st_size, path.stat().st_mtime_ns) == (st.st_size, st.st_mtime_ns)


def test_a_rewrite_keeping_size_and_mtime_is_recomputed(tmp_path):
    scn = make_scenario(tmp_path, shape=(96, 112), chunk=64, holes=False)
    albedo = tmp_path / "albedo.tif"
    write_tif(albedo, read(albedo), transform=scn.transform, nodata=-9999, compress=None)
    run_config(load_config(scn.config))
    before = read(tmp_path / "out" / NR)
    _rewrite_keeping_size_and_mtime(albedo)
    again = run_config(load_config(scn.config))
    assert tmp_path / "out" / NR in again.written           # not "up to date"
    after = read(tmp_path / "out" / NR)
    assert not np.array_equal(before[40:70, :50], after[40:70, :50])
    np.testing.assert_array_equal(before[80:, 60:], after[80:, 60:])
    # and a rerun with nothing changed skips everything
    assert run_config(load_config(scn.config)).written == []


def test_a_changed_remote_input_is_recomputed(tmp_path):
    served = tmp_path / "www"
    scn = make_scenario(served, shape=(64, 80), chunk=64, holes=False)
    with ETagFileServer(served) as server:
        scn.write_config(**{"scenes.0.albedo": server.url("albedo.tif"), "output.directory": str(tmp_path / "o")})
        run_config(load_config(scn.config))
        assert run_config(load_config(scn.config)).written == []          # same ETag: up to date
        alb = read(served / "albedo.tif")
        write_tif(served / "albedo.tif", (alb + 40).astype(alb.dtype), transform=scn.transform, nodata=-9999)
        again = run_config(load_config(scn.config))
        assert tmp_path / "o" / NR in again.written
        remote = read(tmp_path / "o" / NR)
    # equal to a run on the new file read locally (so no stale block of the old file was used)
    scn.write_config(**{"scenes.0.albedo": "albedo.tif", "output.directory": str(tmp_path / "local")})
    run_config(load_config(scn.config))
    np.testing.assert_allclose(remote, read(tmp_path / "local" / NR), rtol=0, atol=1e-6)


def test_object_store_inputs_are_fingerprinted_by_their_etag(tmp_path, monkeypatch):
    bucket = tmp_path / "bucket"
    bucket.mkdir()
    (bucket / "a.tif").write_bytes(b"first version")
    with ETagFileServer(tmp_path) as server:
        # GDAL's S3 client, pointed at the loopback server (GDAL configuration options for /vsis3/)
        monkeypatch.setenv("AWS_S3_ENDPOINT", f"127.0.0.1:{server.port}")
        monkeypatch.setenv("AWS_NO_SIGN_REQUEST", "YES")
        monkeypatch.setenv("AWS_HTTPS", "NO")
        monkeypatch.setenv("AWS_VIRTUAL_HOSTING", "FALSE")
        one = file_fingerprint("s3://bucket/a.tif", fresh=True)
        assert file_fingerprint("s3://bucket/a.tif", fresh=True) == one
        (bucket / "a.tif").write_bytes(b"other version")          # same size
        two = file_fingerprint("s3://bucket/a.tif", fresh=True)
    assert one[1] == "etag" and two[1] == "etag" and one != two


def test_an_input_replaced_during_its_job_fails_that_job_naming_the_file(tmp_path, monkeypatch, capsys):
    scn = make_scenario(tmp_path, shape=(96, 112), chunk=64)
    real_get = engine_module.Engine.get

    def get_then_rewrite(self, dsk, keys, **kw):
        parts = real_get(self, dsk, keys, **kw)       # the chunks were read and computed ...
        alb = read(tmp_path / "albedo.tif")           # ... and then another program rewrites an input
        write_tif(tmp_path / "albedo.tif", (alb + 1).astype(alb.dtype), transform=scn.transform, nodata=-9999)
        return parts
    monkeypatch.setattr(engine_module.Engine, "get", get_then_rewrite)
    code = main(["run", "--quiet", str(scn.config)])
    err = capsys.readouterr().err
    assert code == 2, err
    assert str(tmp_path / "albedo.tif") in err and "changed while" in err and "Traceback" not in err
    out = tmp_path / "out"
    assert not out.exists() or not [p for p in out.rglob("*") if p.is_file()]   # nothing of it renamed
    monkeypatch.undo()
    assert main(["run", "--quiet", str(scn.config)]) == 0                        # a rerun uses the new file
