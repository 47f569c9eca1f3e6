"""A config fetched from a URL (served from 127.0.0.1) may read only URLs and write only below the current folder.

README, "Configs from a URL": relative paths resolve against the config's URL;
local paths, ``~``, other stores and GDAL virtual paths are refused; an
``output.directory`` that is absolute, starts with ``~`` or climbs with ``..``
is refused unless the user gives ``--out DIR``.  No message ever shows the
content of a local file.
"""

from __future__ import annotations

import copy
import os

import numpy as np
import pytest
import yaml

from radledger.cli import main
from radledger.config import load_config
from radledger.errors import ConfigError, Problems

from httpserver import FileServer
from scenario import make_scenario, read

SECRET = "s3cr3t-contents-of-a-local-file"


@pytest.fixture(autouse=True)
def _loopback_only(monkeypatch):
    for k in ("http_proxy", "HTTP_PROXY", "https_proxy", "HTTPS_PROXY", "all_proxy", "ALL_PROXY"):
        monkeypatch.delenv(k, raising=False)
    monkeypatch.setenv("NO_PROXY", "127.0.0.1,localhost")
    monkeypatch.setenv("no_proxy", "127.0.0.1,localhost")


@pytest.fixture
def site(tmp_path, monkeypatch):
    """A served scenario, a working folder (the current folder), a home and a local secret file."""
    served = tmp_path / "www"
    scn = make_scenario(served, shape=(64, 80), chunk=64, holes=False)
    work, home = tmp_path / "work", tmp_path / "home"
    work.mkdir()
    (home / "empty-folder").mkdir(parents=True)
    monkeypatch.chdir(work)
    monkeypatch.setenv("HOME", str(home))
    secret = tmp_path / "secret.csv"
    secret.write_text(f"class,emissivity\n{SECRET}\n")
    with FileServer(served) as server:
        yield scn, server, work, home, secret


def _serve(scn, changes: dict, name: str = "remote.yaml") -> str:
    cfg = yaml.safe_load(scn.config.read_text())
    for dotted, value in changes.items():
        *parents, last = dotted.split(".")
        node = cfg
        for p in parents:
            node = node[int(p)] if isinstance(node, list) else node.setdefault(p, {})
        node[last] = value
    (scn.folder / name).write_text(yaml.safe_dump(cfg, sort_keys=False))
    return name


def _messages(url, **kw) -> list[str]:
    with pytest.raises((ConfigError, Problems)) as info:
        load_config(url, **kw)
    exc = info.value
    return [str(p) for p in exc.problems] if isinstance(exc, Problems) else [str(exc)]


def _files_under(folder):
    return sorted(p for p in folder.rglob("*") if p.is_file())


@pytest.mark.parametrize("directory", ["ABS", "../escape", "~/radledger-out", "~", "out/../../x", "s3://b/out"])
def test_output_directory_must_stay_below_the_current_folder(site, directory, capsys):
    scn, server, work, home, _ = site
    target = str(work.parent / "elsewhere") if directory == "ABS" else directory
    url = server.url(_serve(scn, {"output.directory": target}))
    code = main(["run", "--quiet", url])
    err = capsys.readouterr().err
    assert code == 2, err
    assert "output.directory" in err and "--out" in err and "Traceback" not in err
    tmp = work.parent
    assert _files_under(tmp / "work") == [] and not (tmp / "elsewhere").exists() and not (tmp / "x").exists()
    assert (home / "empty-folder").is_dir() and not (home / "radledger-out").exists()   # home untouched


def test_out_given_by_the_user_may_be_anywhere(site, capsys):
    scn, server, work, _, _ = site
    url = server.url(_serve(scn, {"output.directory": "/somewhere/absolute"}))
    chosen = work.parent / "chosen"
    assert main(["run", "--quiet", "--out", str(chosen), url]) == 0, capsys.readouterr().err
    got = read(chosen / "scenes" / "net_radiation_20260714T1810.tif")
    assert np.isfinite(got).any()


def test_a_relative_output_directory_is_made_in_the_current_folder(site, capsys):
    scn, server, work, _, _ = site
    url = server.url(_serve(scn, {"output.directory": "results/run1"}))
    assert main(["run", "--quiet", url]) == 0, capsys.readouterr().err
    assert (work / "results" / "run1" / "scenes" / "net_radiation_20260714T1810.tif").exists()


@pytest.mark.parametrize("key", ["scenes.0.albedo", "static.land_cover", "emissivity.table"])
@pytest.mark.parametrize("kind", ["absolute", "home", "vsisubfile", "vsicurl-file", "file-url", "s3"])
def test_a_url_config_cannot_read_local_files(site, key, kind, capsys):
    scn, server, work, _, secret = site
    local = str(scn.folder / "lst.tif") if key != "emissivity.table" else str(secret)
    value = {"absolute": local, "home": "~/secret.csv", "vsisubfile": f"/vsisubfile/0_100000,{local}",
             "vsicurl-file": f"/vsicurl/file://{local}", "file-url": f"file://{local}",
             "s3": "s3://bucket/key.tif"}[kind]
    url = server.url(_serve(scn, {key: value}))
    msgs = _messages(url)
    dotted = key.replace(".0.", "[0].")
    assert any(dotted in m and "only read http(s) URLs" in m for m in msgs), msgs
    code = main(["run", "--quiet", url])
    err = capsys.readouterr().err
    assert code == 2 and SECRET not in err and "Traceback" not in err
    assert _files_under(work) == []


def test_relative_paths_may_not_resolve_to_another_scheme(site):
    scn, server, _, _, _ = site
    # urljoin keeps an absolute reference with its own scheme; it must still be refused
    msgs = _messages(server.url(_serve(scn, {"scenes.0.albedo": "ftp://example.invalid/a.tif"})))
    assert any("scenes[0].albedo" in m for m in msgs)


def test_a_url_config_that_is_not_utf8_says_so(site):
    scn, server, _, _, _ = site
    (scn.folder / "latin1.yaml").write_bytes("title: caf\u00e9\n".encode("latin-1"))
    (msg,) = _messages(server.url("latin1.yaml"))
    assert "not UTF-8" in msg and "0xe9" in msg and "network" not in msg


def test_a_local_config_may_still_read_local_files(site):
    scn, _, _, _, _ = site
    cfg = load_config(scn.config)      # the same rules do not apply to the user's own file
    assert cfg.static["land_cover"].path == str(scn.folder.resolve() / "lc.tif")
