"""Runs radledger on a disk that fills up, in its own process; prints what it finds as JSON.

Used by tests/test_faults.py.  Two ways to run out of space:

* ``tmpfs SIZE...``: (run inside ``unshare -rm``, a private mount namespace,
  so nothing leaks to the host) for each SIZE a fresh tmpfs of that size is
  mounted as the output disk; a run with ``--force`` fills it, then the tmpfs
  is grown (``remount``) and a plain rerun (no ``--force``) must finish.
* ``rlimit BYTES``: the operating system's file size limit (``ulimit -f``,
  ``RLIMIT_FSIZE``; SIGXFSZ ignored so writes fail with EFBIG) stops every file
  at BYTES, as a full disk stops a write; then the limit is lifted and the run
  repeated.

The runs call ``radledger.cli.main`` in this process (one import for all).
For each case it reports the exit statuses, stderr, which files were left in
the output folder and whether each GeoTIFF there reads whole, and whether the
finished products equal the reference run's.
"""

from __future__ import annotations

import contextlib
import io
import json
import os
import resource
import signal
import subprocess
import sys
from pathlib import Path

import numpy as np
import rasterio

from radledger.cli import main


def _run(args: list[str]) -> dict:
    err = io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
        code = main(args)
    return {"code": code, "stderr": err.getvalue()}


def _inspect(out: Path) -> dict:
    files, bad, dirs = [], [], []
    for root, ds, fs in os.walk(out):
        dirs += [str(Path(root, d).relative_to(out)) for d in ds]
        for f in fs:
            p = Path(root, f)
            files.append(str(p.relative_to(out)))
            if p.suffix == ".tif":
                try:
                    with rasterio.open(p) as src:
                        src.read(1)
                except Exception as exc:   # reported to the test, which fails on it
                    bad.append(f"{p.relative_to(out)}: {exc}")
    return {"files": sorted(files), "bad": bad, "dirs": sorted(dirs)}


def _same_as_reference(out: Path, reference: Path) -> list[str]:
    differ = []
    for p in sorted((reference / "scenes").glob("*.tif")):
        mine = out / "scenes" / p.name
        with rasterio.open(p) as a, rasterio.open(mine) as b:
            if not np.array_equal(a.read(1), b.read(1), equal_nan=True):
                differ.append(p.name)
    return differ


def _case(config: str, out: Path, reference: Path, fill, grow) -> dict:
    (out / "keep-me" / "empty").mkdir(parents=True)      # the user's own empty folders
    fill()
    first = _run(["run", "--quiet", "--force", config])
    after_first = _inspect(out)
    grow()
    second = _run(["run", "--quiet", config])
    return {"first": first, "after_first": after_first, "second": second, "after_second": _inspect(out),
            "differ": _same_as_reference(out, reference) if second["code"] == 0 else None}


def main_driver(argv: list[str]) -> None:
    mode, config, out, reference, *sizes = argv
    out, reference = Path(out), Path(reference)
    results = []
    if mode == "tmpfs":
        for size in sizes:
            out.mkdir(parents=True, exist_ok=True)
            subprocess.run(["mount", "-t", "tmpfs", "-o", f"size={size}", "tmpfs", str(out)], check=True)
            try:
                results.append(_case(config, out, reference, lambda: None,
                                     lambda: subprocess.run(["mount", "-o", "remount,size=64m", str(out)],
                                                            check=True)))
            finally:
                subprocess.run(["umount", str(out)], check=True)
    else:
        limit = int(sizes[0])
        _, hard = resource.getrlimit(resource.RLIMIT_FSIZE)
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)   # a write past the limit fails with EFBIG instead

        def fill():
            resource.setrlimit(resource.RLIMIT_FSIZE, (limit, hard))

        def grow():
            resource.setrlimit(resource.RLIMIT_FSIZE, (hard, hard))
        out.mkdir(parents=True, exist_ok=True)
        results.append(_case(config, out, reference, fill, grow))
    print("RESULT " + json.dumps(results))


if __name__ == "__main__":
    main_driver(sys.argv[1:])
