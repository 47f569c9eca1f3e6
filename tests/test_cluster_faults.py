"""A Dask cluster that loses a worker, then its scheduler, in the middle of a run.

A real loopback cluster (a ``dask scheduler`` and two one-thread ``dask
worker`` processes).  A worker killed with SIGKILL mid-run costs only its tasks,
which the scheduler runs again elsewhere: the products equal a local run's
bit for bit.  A scheduler killed mid-run ends the run with exit 4 and one line
naming the address; the products finished before it are whole, no temporary
is left, and nothing else is reported as a bug.
"""

from __future__ import annotations

import signal
import subprocess
import time
from pathlib import Path

import numpy as np
import pytest
import rasterio
import yaml

from radledger.config import load_config
from radledger.runner import run_config

from scenario import make_scenario, read
from test_distributed import RADLEDGER, _dask_cli, _env, _free_port, _stop

distributed = pytest.importorskip("distributed")
TIMES = [f"2026-07-{d:02d}T18:10:00Z" for d in (10, 11, 12)]


@pytest.fixture(scope="module")
def cluster(tmp_path_factory):
    """(address, scheduler process, worker processes); everything stopped afterwards."""
    from distributed import Client
    work = tmp_path_factory.mktemp("faulty-cluster")
    port = _free_port()
    address = f"tcp://127.0.0.1:{port}"
    procs, logs = [], []

    def start(args, name):
        log = open(work / f"{name}.log", "wb")
        logs.append(log)
        procs.append(subprocess.Popen(args, cwd=work, env=_env(), stdout=log, stderr=subprocess.STDOUT,
                                      stdin=subprocess.DEVNULL))
    try:
        start(_dask_cli("scheduler") + ["--host", "127.0.0.1", "--port", str(port), "--no-dashboard"], "scheduler")
        for i in range(2):
            start(_dask_cli("worker") + [address, "--nworkers", "1", "--nthreads", "1", "--no-dashboard",
                                         "--memory-limit", "2GB", "--local-directory", str(work / f"w{i}")],
                  f"worker{i}")
        with Client(address, timeout="60s", set_as_default=False) as client:
            client.wait_for_workers(2, timeout=60)
            client.run(exec, "import radledger.execution.graph")
        yield address, procs[0], procs[1:]
    finally:
        _stop(procs)
        for log in logs:
            log.close()


@pytest.fixture(scope="module")
def scenes(tmp_path_factory):
    """Three 512 x 512 scenes in 128-pixel chunks, and a local run of them as the reference."""
    folder = tmp_path_factory.mktemp("cluster-scenes")
    scn = make_scenario(folder, shape=(512, 512), chunk=128)
    cfg = yaml.safe_load(scn.config.read_text())
    cfg["scenes"] = [dict(cfg["scenes"][0], time=t) for t in TIMES]
    scn.config.write_text(yaml.safe_dump(cfg, sort_keys=False))
    run_config(load_config(scn.config, output_override=folder / "local"))
    return scn


def _products(out: Path) -> list[Path]:
    d = out / "scenes"
    return sorted(p for p in d.glob("*.tif") if not p.name.startswith(".")) if d.exists() else []


def _start_run(scn, address, out: Path, **env) -> subprocess.Popen:
    return subprocess.Popen(RADLEDGER + ["run", "--quiet", "--scheduler", address, "--out", str(out),
                                         str(scn.config)], env={**_env(), **env}, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)


def _when_first_product(proc, out: Path) -> None:
    deadline = time.monotonic() + 300        # a guard against a hung run, not a timing check
    while not _products(out) and proc.poll() is None and time.monotonic() < deadline:
        time.sleep(0.05)
    assert proc.poll() is None, "the run finished before the fault could happen; enlarge the scenes"


def test_a_killed_worker_still_gives_identical_products(cluster, scenes, tmp_path):
    address, _, workers = cluster
    out = tmp_path / "out"
    proc = _start_run(scenes, address, out)
    _when_first_product(proc, out)
    workers[1].send_signal(signal.SIGKILL)
    _, err = proc.communicate(timeout=600)
    assert proc.returncode == 0, err
    done = _products(out)
    assert len(done) == 4 * len(TIMES)
    assert [p for p in out.rglob("*") if p.is_file()] and not [p for p in out.rglob(".*") if p.is_file()]
    for p in done:
        ref = read(scenes.folder / "local" / "scenes" / p.name)
        assert np.array_equal(read(p), ref, equal_nan=True), p.name


def test_a_lost_scheduler_exits_4_keeping_finished_products(cluster, scenes, tmp_path):
    address, scheduler, _ = cluster
    out = tmp_path / "out"
    # the client tries to reconnect for as long as its connect timeout before it gives up
    proc = _start_run(scenes, address, out, RADLEDGER_SCHEDULER_TIMEOUT="2s")
    _when_first_product(proc, out)
    scheduler.send_signal(signal.SIGKILL)
    _, err = proc.communicate(timeout=600)
    assert proc.returncode == 4, err
    assert "Traceback" not in err and "a bug" not in err
    lines = [ln for ln in err.splitlines() if ln.startswith("error:")]
    assert len(lines) == 1 and address in lines[0] and "scheduler" in lines[0] and "rerun" in lines[0]
    assert not [p for p in out.rglob(".*") if p.is_file()]          # no temporaries, no lock
    for p in _products(out):                                        # what is there is whole
        with rasterio.open(p) as ds:
            ds.read(1)
