"""Where the graph runs: local threads, or an existing ``dask.distributed`` cluster.

The engine also owns the two things that depend on that choice: the lock that
serialises writes to one file (a ``threading.Lock`` locally, a
``distributed.Lock`` on a cluster) and the progress display.
"""

from __future__ import annotations

import os
import sys
import threading
import time

import dask
from dask.callbacks import Callback

from .errors import ConfigError
from .gdalenv import gdal_options

__all__ = ["Engine", "apply_gdal_process_settings"]

CONNECT_TIMEOUT = os.environ.get("RADLEDGER_SCHEDULER_TIMEOUT", "10s")   # time to reach --scheduler


def apply_gdal_process_settings() -> None:
    """Process-wide GDAL settings read once at GDAL start (the block cache size)."""
    for k, v in gdal_options().items():
        os.environ.setdefault(k, v)


class _GdalSettingsPlugin:
    """Applied in every worker so tasks there use the same GDAL settings."""

    def __init__(self, options: dict[str, str]):
        self.options = options

    def setup(self, worker=None):
        os.environ.update(self.options)


class Engine:
    """Runs graphs; ``address`` picks an existing distributed scheduler."""

    def __init__(self, address: str | None = None, *, progress: bool = False, stream=None):
        self.address = address or os.environ.get("DASK_SCHEDULER_ADDRESS") or None
        self.progress = progress
        self.stream = stream or sys.stderr
        self.client = None
        self._locks: dict[str, threading.Lock] = {}
        apply_gdal_process_settings()
        if self.address:
            try:
                from distributed import Client
                self.client = Client(self.address, timeout=CONNECT_TIMEOUT, set_as_default=False)
            except (OSError, TimeoutError) as exc:
                raise ConfigError(f"--scheduler {self.address}: cannot reach a Dask scheduler there "
                                  f"({exc.__class__.__name__}); start one with `dask scheduler` or drop "
                                  f"--scheduler to run locally") from None
            opts = gdal_options()
            self.client.run(lambda: os.environ.update(opts))
            try:
                from distributed.diagnostics.plugin import WorkerPlugin

                class Plugin(_GdalSettingsPlugin, WorkerPlugin):
                    pass
                self.client.register_plugin(Plugin(opts), name="radledger-gdal")
            except Exception:  # older distributed: client.run above already applied them
                pass

    @property
    def distributed(self) -> bool:
        return self.client is not None

    @property
    def kind(self) -> str:
        return f"distributed ({self.address})" if self.client else f"local threads ({os.cpu_count()})"

    def lock(self, name: str):
        if self.client is not None:
            from distributed import Lock
            try:  # distributed < 2024 took the client; newer ones find it when unpickled on a worker
                return Lock(name, client=self.client)
            except TypeError:
                return Lock(name)
        return self._locks.setdefault(name, threading.Lock())

    def compute(self, *things, label: str = ""):
        if self.client is not None:
            futures = self.client.compute(list(things), optimize_graph=True)
            if self.progress:
                print(f"  {label}: running on {self.address}", file=self.stream)
            return tuple(self.client.gather(futures))
        if self.progress:
            with _Progress(label, self.stream):
                return dask.compute(*things, scheduler="threads")
        return dask.compute(*things, scheduler="threads")

    def get(self, dsk: dict, keys: list, *, label: str = "") -> list:
        """Compute the raw task graph ``dsk`` for ``keys`` (one task per chunk)."""
        if self.client is not None:
            if self.progress:
                print(f"  {label}: running on {self.address}", file=self.stream)
            return list(self.client.get(dsk, keys))
        from dask.threaded import get
        if self.progress:
            with _Progress(label, self.stream):
                return list(get(dsk, keys))
        return list(get(dsk, keys))

    def close(self) -> None:
        if self.client is not None:
            self.client.close()
            self.client = None


class _Progress(Callback):
    """A one-line progress bar on stderr (only used on a terminal)."""

    def __init__(self, label: str, stream):
        super().__init__()
        self.label, self.stream = label, stream
        self.total = self.done = 0
        self.t0 = time.monotonic()
        self._last = 0.0

    def _start_state(self, dsk, state):
        self.total = len(state["ready"]) + len(state["waiting"]) + len(state["running"]) + \
            len(state.get("finished", ()))

    def _posttask(self, key, result, dsk, state, worker_id):
        self.done += 1
        now = time.monotonic()
        if now - self._last > 0.2:
            self._last = now
            self._draw()

    def _finish(self, dsk, state, errored):
        self.done = self.total
        self._draw(end="\n")

    def _draw(self, end=""):
        frac = self.done / self.total if self.total else 1.0
        bar = "#" * int(frac * 30)
        print(f"\r  {self.label:24s} [{bar:30s}] {frac * 100:5.1f}%  {time.monotonic() - self.t0:6.1f} s",
              end=end, file=self.stream, flush=True)
