"""One run at a time per output folder; temporaries of a live run are never swept.

The lock is an operating-system file lock (flock) on ``DIR/.radledger.lock``;
the kernel drops it when its holder exits in any way, which is what makes a
lock left by a killed run stale (POSIX/BSD ``flock(2)`` semantics).
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np
import pytest
import yaml

from radledger.config import load_config
from radledger.errors import OutputError
from radledger.io.lock import LOCK_NAME, PARTIAL_MARK, RunLock, owner_gone, partial_token, sweep_partials
from radledger.runner import run_config

from scenario import make_scenario, read

SRC = Path(__file__).resolve().parents[1] / "src"
HOLD = """
import sys
from radledger.io.lock import RunLock
lock = RunLock(sys.argv[1]).acquire(wait=False)
print("locked", flush=True)
sys.stdin.read()            # hold until the test closes our stdin (or kills us)
lock.release()
"""


def _holder(folder: Path) -> subprocess.Popen:
    proc = subprocess.Popen([sys.executable, "-c", HOLD, str(folder)], stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                            text=True, env=dict(os.environ, PYTHONPATH=str(SRC)))
    assert proc.stdout.readline().strip() == "locked"
    return proc


def _dead_pid() -> int:
    p = subprocess.Popen([sys.executable, "-c", "pass"])
    p.wait()
    return p.pid


def test_a_second_run_is_told_who_holds_the_folder_and_waits(tmp_path):
    proc = _holder(tmp_path)
    try:
        with pytest.raises(OutputError) as info:
            RunLock(tmp_path).acquire(wait=False)
        msg = str(info.value)
        assert f"pid {proc.pid}" in msg and str(tmp_path) in msg and "output.directory" in msg
        heard, got = [], threading.Event()
        waiter = threading.Thread(target=lambda: (RunLock(tmp_path).acquire(on_wait=heard.append, poll=0.05),
                                                  got.set()), daemon=True)
        waiter.start()
        while not heard:                     # it waits, and says for whom, once
            time.sleep(0.02)
        assert not got.is_set()
        assert f"pid {proc.pid}" in heard[0] and "waiting" in heard[0]
        proc.stdin.close()                   # the holder finishes
        waiter.join(60)
        assert got.is_set() and len(heard) == 1
    finally:
        proc.kill()
        proc.wait()


def test_a_lock_left_by_a_killed_run_is_taken_over(tmp_path):
    proc = _holder(tmp_path)
    proc.send_signal(signal.SIGKILL)          # no chance to clean up: the lock file stays
    proc.wait()
    assert (tmp_path / LOCK_NAME).exists()
    lock = RunLock(tmp_path).acquire(wait=False)
    assert json.loads((tmp_path / LOCK_NAME).read_text())["pid"] == os.getpid()
    lock.release()
    assert not (tmp_path / LOCK_NAME).exists()


def test_a_stale_lock_file_naming_a_dead_pid_is_taken_over(tmp_path):
    (tmp_path / LOCK_NAME).write_text(json.dumps({"pid": _dead_pid(), "host": "here"}))
    with RunLock(tmp_path):
        assert json.loads((tmp_path / LOCK_NAME).read_text())["pid"] == os.getpid()


def test_only_temporaries_whose_owner_is_gone_are_swept(tmp_path):
    live = subprocess.Popen([sys.executable, "-c", "import sys; sys.stdin.read()"], stdin=subprocess.PIPE)
    try:
        mine = tmp_path / f".a{PARTIAL_MARK}-{partial_token()}.raw.tif"
        token = partial_token()
        others = tmp_path / "scenes" / f".b{PARTIAL_MARK}-{live.pid}{token[token.index('@'):]}.cog.tif"
        dead = tmp_path / "scenes" / f".c{PARTIAL_MARK}-{_dead_pid()}{token[token.index('@'):]}.raw.tif"
        old_style = tmp_path / f".d{PARTIAL_MARK}-{_dead_pid()}-0123abcd.vrt"       # before hosts were named
        far = tmp_path / f".e{PARTIAL_MARK}-{_dead_pid()}@ffffff-0123abcd.raw.tif"   # another host, recent
        for p in (mine, others, dead, old_style, far):
            p.parent.mkdir(exist_ok=True)
            p.write_text("x")
        removed = sweep_partials(tmp_path)
        assert sorted(Path(p).name for p in removed) == sorted([dead.name, old_style.name])
        assert mine.exists() and others.exists() and far.exists()
        assert not owner_gone(mine) and not owner_gone(others)
    finally:
        live.kill()
        live.wait()


def test_two_runs_started_together_both_succeed_with_a_solo_runs_products(tmp_path):
    scn = make_scenario(tmp_path, shape=(160, 200), chunk=64)
    first = yaml.safe_load(scn.config.read_text())["scenes"][0]
    scn.write_config(scenes=[first, dict(first, time="2026-07-15T18:10:00Z")])
    solo = run_config(load_config(scn.config, output_override=tmp_path / "solo"))
    env = dict(os.environ, PYTHONPATH=str(SRC))
    procs = [subprocess.Popen([sys.executable, "-m", "radledger.cli", "run", "--quiet", str(scn.config)],
                              stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
             for _ in range(2)]
    results = [p.communicate(timeout=600) for p in procs]
    for p, (_, err) in zip(procs, results):
        assert p.returncode == 0, err
        assert "Traceback" not in err
    out = tmp_path / "out"
    left = sorted(str(p.relative_to(out)) for p in out.rglob("*") if p.is_file())
    assert left == sorted(f"scenes/{p.name}" for p in solo.written)      # no temporaries, no lock
    for p in solo.written:
        assert np.array_equal(read(p), read(out / "scenes" / p.name), equal_nan=True)
