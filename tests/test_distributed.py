"""Runs on a real dask.distributed cluster equal local threaded runs, bit for bit.

A module-scoped fixture starts a ``dask scheduler`` and two single-threaded
``dask worker`` processes on 127.0.0.1 (the venv's own Python, so radledger is
importable there) and stops them at the end.  Worker tasks reopen the tiled
intermediates ``r+`` under a ``distributed.Lock``, so this checks that path
end to end: the products must equal those of a local run of the same inputs.
"""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import rasterio

from radledger.config import load_config
from radledger.runner import run_config

from scenario import make_scenario

distributed = pytest.importorskip("distributed")

STAMP = "20260714T1810"
PRODUCTS = ("net_radiation", "net_shortwave", "net_longwave", "quality")
BIN = Path(sys.executable).parent
RADLEDGER = [str(BIN / "radledger")] if (BIN / "radledger").exists() else \
    [sys.executable, "-m", "radledger.cli"]


def _free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _dask_cli(sub: str) -> list[str]:
    exe = BIN / "dask"
    if exe.exists():
        return [str(exe), sub]
    mod = {"scheduler": "distributed.cli.dask_scheduler", "worker": "distributed.cli.dask_worker"}[sub]
    return [sys.executable, "-m", mod]


def _stop(procs: list[subprocess.Popen]) -> None:
    """SIGTERM the workers and wait for them, then the scheduler; kill what does not exit in time."""
    def stop(group):
        for p in group:
            if p.poll() is None:
                p.send_signal(signal.SIGTERM)
        for p in group:
            try:
                p.wait(timeout=20)
            except subprocess.TimeoutExpired:
                p.kill()
                p.wait(timeout=10)
    stop(procs[1:])      # workers (with the scheduler still up, they close cleanly)
    stop(procs[:1])      # the scheduler


def _env() -> dict[str, str]:
    env = dict(os.environ)
    env.pop("DASK_SCHEDULER_ADDRESS", None)
    env["PYTHONUNBUFFERED"] = "1"
    return env


class _Background:
    """A CLI run started early; ``result()`` waits for it (bounded)."""

    def __init__(self, args, timeout: float):
        env = _env()
        self.proc = subprocess.Popen(RADLEDGER + list(args), env=env, stdout=subprocess.PIPE,
                                     stderr=subprocess.PIPE, stdin=subprocess.DEVNULL, text=True)
        self.timeout = timeout
        self._out = None

    def result(self) -> subprocess.CompletedProcess:
        if self._out is None:
            try:
                out, err = self.proc.communicate(timeout=self.timeout)
            except subprocess.TimeoutExpired:
                self.stop()
                raise
            self._out = subprocess.CompletedProcess(self.proc.args, self.proc.returncode, out, err)
        return self._out

    def stop(self) -> None:
        if self.proc.poll() is None:
            self.proc.kill()
        if self._out is None:
            self.proc.communicate(timeout=10)


@pytest.fixture(scope="module")
def unreachable_run(tmp_path_factory):
    """``radledger run --scheduler tcp://127.0.0.1:<closed port>``, started in the background.

    radledger waits its whole connect timeout (20 s) for a refused address; the
    ``cluster`` fixture requests this one so that wait overlaps the cluster start-up.
    """
    folder = tmp_path_factory.mktemp("unreachable")
    scn = make_scenario(folder, shape=(64, 64), chunk=64)
    # a port bound but never listened on: connections are refused, and nothing else
    # (e.g. the test cluster) can take the port while the run tries it
    closed = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
    closed.bind(("127.0.0.1", 0))
    address = f"tcp://127.0.0.1:{closed.getsockname()[1]}"
    run = _Background(["run", "--scheduler", address, "--quiet", str(scn.config)], timeout=180)
    run.address, run.folder = address, folder
    try:
        yield run
    finally:
        run.stop()
        closed.close()


@pytest.fixture(scope="module")
def cluster(tmp_path_factory, unreachable_run):
    """``tcp://127.0.0.1:PORT`` of a scheduler with two 1-thread workers; all stopped afterwards."""
    from distributed import Client

    work = tmp_path_factory.mktemp("cluster")
    port = _free_port()
    address = f"tcp://127.0.0.1:{port}"
    procs: list[subprocess.Popen] = []
    logs = []

    def start(args, name):
        log = open(work / f"{name}.log", "wb")
        logs.append(log)
        procs.append(subprocess.Popen(args, cwd=work, env=_env(), stdout=log, stderr=subprocess.STDOUT,
                                      stdin=subprocess.DEVNULL))

    try:
        start(_dask_cli("scheduler") + ["--host", "127.0.0.1", "--port", str(port), "--no-dashboard"],
              "scheduler")
        for i in range(2):
            start(_dask_cli("worker") + [address, "--nworkers", "1", "--nthreads", "1", "--no-dashboard",
                                         "--memory-limit", "2GB", "--local-directory", str(work / f"w{i}"),
                                         "--name", f"w{i}"], f"worker{i}")
        with Client(address, timeout="60s", set_as_default=False) as client:
            client.wait_for_workers(2, timeout=60)
            assert len(client.scheduler_info()["workers"]) == 2
            # radledger must be importable on the workers (and importing it once here keeps
            # that cost out of the first test)
            # (a builtin, so nothing from this test module has to be importable there)
            assert len(client.run(exec, "import radledger.execution.graph")) == 2
    except BaseException:
        _stop(procs)
        for log in logs:
            log.close()
        text = "\n".join(f"--- {p.name}\n{p.read_text(errors='replace')[-3000:]}" for p in work.glob("*.log"))
        pytest.fail(f"could not start the test cluster at {address}:\n{text}")
    try:
        yield address
    finally:
        _stop(procs)
        for log in logs:
            log.close()


def _transitions(address: str) -> int:
    """How many task transitions the scheduler has made (grows when a run used the cluster)."""
    from distributed import Client
    with Client(address, timeout="30s", set_as_default=False) as c:
        return c.run_on_scheduler(lambda dask_scheduler: dask_scheduler.transition_counter)


def _product(folder: Path, name: str) -> Path:
    return folder / "out" / "scenes" / f"{name}_{STAMP}.tif"


def _assert_identical(a: Path, b: Path) -> None:
    with rasterio.open(a) as da_, rasterio.open(b) as db:
        assert da_.dtypes == db.dtypes
        assert da_.shape == db.shape
        assert da_.transform == db.transform
        assert da_.crs == db.crs
        assert (da_.nodata == db.nodata) or (np.isnan(da_.nodata) and np.isnan(db.nodata))
        ta, tb = da_.tags(), db.tags()
        for k in ("quantity", "units", "method", "time", "software"):
            assert ta.get(k) == tb.get(k), f"{a.name}: tag {k} differs"
        assert da_.descriptions == db.descriptions
        x, y = da_.read(1), db.read(1)
    assert x.dtype == y.dtype
    if np.issubdtype(x.dtype, np.floating):
        assert np.isfinite(x).any(), f"{a} is all NaN"
        assert np.array_equal(x, y, equal_nan=True), f"{a.name}: distributed and local runs differ"
    else:
        assert np.array_equal(x, y), f"{a.name}: distributed and local runs differ"


def _local_reference(folder: Path, **kw) -> Path:
    scn = make_scenario(folder, **kw)
    run_config(load_config(scn.config))
    return folder


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    """Local threaded runs (one per weather layout), computed once for the module."""
    cache: dict[bool, Path] = {}

    def get(coarse: bool) -> Path:
        if coarse not in cache:
            cache[coarse] = _local_reference(tmp_path_factory.mktemp(f"local-coarse{int(coarse)}"),
                                             coarse_weather=coarse)
        return cache[coarse]
    return get


@pytest.mark.parametrize("coarse", [False, True], ids=["same-grid", "coarse-weather"])
def test_distributed_run_equals_local_run(cluster, reference, tmp_path, coarse):
    local = reference(coarse)
    scn = make_scenario(tmp_path, coarse_weather=coarse)
    before = _transitions(cluster)
    report = run_config(load_config(scn.config), scheduler=cluster)
    assert _transitions(cluster) > before, "the run did not use the cluster"
    assert {p.name for p in report.written} == {f"{n}_{STAMP}.tif" for n in PRODUCTS}
    for name in ("net_radiation", "quality", "net_shortwave", "net_longwave"):
        _assert_identical(_product(tmp_path, name), _product(local, name))
    # no temporaries left beside the products
    assert not [p for p in (tmp_path / "out").rglob("*") if "radledger-partial" in p.name]


def _cli(args, *, env_extra=None, timeout=300):
    env = _env()
    env.update(env_extra or {})
    return subprocess.run(RADLEDGER + list(args), env=env, capture_output=True, text=True, timeout=timeout,
                          stdin=subprocess.DEVNULL)


@pytest.mark.parametrize("how", ["option", "environment"])
def test_cli_run_on_cluster(cluster, reference, tmp_path, how):
    local = reference(False)
    scn = make_scenario(tmp_path)
    before = _transitions(cluster)
    if how == "option":
        r = _cli(["run", "--scheduler", cluster, "--quiet", str(scn.config)])
    else:
        r = _cli(["run", "--quiet", str(scn.config)], env_extra={"DASK_SCHEDULER_ADDRESS": cluster})
    assert r.returncode == 0, r.stderr
    assert _transitions(cluster) > before, "the CLI run did not use the cluster"
    for name in ("net_radiation", "quality"):
        _assert_identical(_product(tmp_path, name), _product(local, name))


def test_distributed_products_are_cogs(cluster, tmp_path):
    scn = make_scenario(tmp_path, shape=(700, 600), chunk=256)
    run_config(load_config(scn.config), scheduler=cluster)
    for name in PRODUCTS:
        with rasterio.open(_product(tmp_path, name)) as ds:
            assert ds.tags(ns="IMAGE_STRUCTURE").get("LAYOUT") == "COG", name
            assert ds.profile["tiled"] and ds.block_shapes[0] == (512, 512), name
            assert ds.overviews(1), f"{name}: no internal overviews"
            assert ds.dtypes[0] == ("uint8" if name == "quality" else "float32")


def test_unreachable_scheduler_exits_2_naming_the_address(unreachable_run):
    r = unreachable_run.result()
    assert r.returncode == 2, (r.returncode, r.stderr)
    lines = [ln for ln in r.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1, r.stderr
    assert unreachable_run.address in lines[0]
    assert "Traceback" not in r.stderr
    assert not list(unreachable_run.folder.rglob("*_20260714T1810.tif"))


def test_distributed_tiles_compressed_in_tasks_equal_a_local_gdal_pass(cluster, tmp_path):
    # chunks of 512: the workers compress the tiles and spool them beside the products, the client lays
    # the COGs out; chunks of 256 (locally): uncompressed intermediates and GDAL's COG driver
    tiled = make_scenario(tmp_path / "tiled", shape=(1100, 600), chunk=512)
    run_config(load_config(tiled.config), scheduler=cluster)
    ref = make_scenario(tmp_path / "ref", shape=(1100, 600), chunk=256)
    run_config(load_config(ref.config))
    for name in PRODUCTS:
        _assert_identical(_product(tmp_path / "tiled", name), _product(tmp_path / "ref", name))
        with rasterio.open(_product(tmp_path / "tiled", name)) as ds:
            assert ds.tags(ns="IMAGE_STRUCTURE").get("LAYOUT") == "COG", name
    assert not [p for p in (tmp_path / "tiled" / "out").rglob("*") if "radledger-partial" in p.name]
