"""Where the graph runs: local threads, or an existing ``dask.distributed`` cluster.

The engine also owns the two things that depend on that choice: the lock that
serialises writes to one file (a ``threading.Lock`` locally, a
``distributed.Lock`` on a cluster) and where progress is reported (its events).
"""

from __future__ import annotations

import contextlib
import os
import threading

import dask

from ..errors import ConfigError
from ..io.gdalenv import gdal_options
from .events import RunEvents

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

    def __init__(self, address: str | None = None, *, events: RunEvents | None = None):
        self.address = address or os.environ.get("DASK_SCHEDULER_ADDRESS") or None
        self.events = events or RunEvents()
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

    def _shown(self, label: str):
        return self.events.progress(label) or contextlib.nullcontext()

    def compute(self, *things, label: str = ""):
        """Compute Dask collections here (threads) or on the cluster; a tuple of results."""
        if self.client is not None:
            futures = self.client.compute(list(things), optimize_graph=True)
            self.events.remote(label, self.address)
            return tuple(self.client.gather(futures))
        with self._shown(label):
            return dask.compute(*things, scheduler="threads")

    def get(self, dsk: dict, keys: list, *, label: str = "") -> list:
        """Compute the raw task graph ``dsk`` for ``keys`` (one task per chunk)."""
        if self.client is not None:
            self.events.remote(label, self.address)
            return list(self.client.get(dsk, keys))
        from dask.threaded import get
        with self._shown(label):
            return list(get(dsk, keys))

    def close(self) -> None:
        if self.client is not None:
            self.client.close()
            self.client = None
