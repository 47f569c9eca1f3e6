"""Where the graph runs: local threads, or an existing ``dask.distributed`` cluster.

The engine also owns the two things that depend on that choice: the lock that
serialises writes to one file (a ``threading.Lock`` locally, a
``distributed.Lock`` on a cluster) and where progress is reported (its events).

Locally, each engine (one run) has its own pool of threads: the per-thread
handles of the inputs (io/rasters.py) then live for one run only, so a rerun in
the same process (a notebook) never reads an input through a handle opened
before the input was rewritten.

Losing the cluster mid-run (the scheduler stops or becomes unreachable, or
workers keep dying) raises :class:`~radledger.errors.ClusterError` with one
line naming the address; a rerun resumes from the products already written.
A worker that dies once is not an error: the scheduler reruns its tasks.
"""

from __future__ import annotations

import contextlib
import os
import threading
from concurrent.futures import CancelledError, ThreadPoolExecutor

import dask

from ..errors import ClusterError, ConfigError
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
        self._pool: ThreadPoolExecutor | None = None
        self._cluster_lost = False
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
            with self._cluster_guard(label):
                futures = self.client.compute(list(things), optimize_graph=True)
                self.events.remote(label, self.address)
                return tuple(self.client.gather(futures))
        with self._shown(label):
            return dask.compute(*things, scheduler="threads", pool=self._threads())

    def get(self, dsk: dict, keys: list, *, label: str = "") -> list:
        """Compute the raw task graph ``dsk`` for ``keys`` (one task per chunk)."""
        if self.client is not None:
            with self._cluster_guard(label):
                self.events.remote(label, self.address)
                return list(self.client.get(dsk, keys))
        from dask.threaded import get
        with self._shown(label):
            return list(get(dsk, keys, pool=self._threads()))

    def _threads(self) -> ThreadPoolExecutor:
        if self._pool is None:
            self._pool = ThreadPoolExecutor(os.cpu_count() or 1, thread_name_prefix="radledger")
        return self._pool

    @contextlib.contextmanager
    def _cluster_guard(self, label: str):
        """Turn a lost scheduler (or workers that keep dying) into :class:`ClusterError`."""
        try:
            yield
        except Exception as exc:
            what = self._lost(exc)
            if what is None:
                raise
            self._cluster_lost = True
            raise ClusterError(f"--scheduler {self.address}: {what} during {label or 'the run'}; products "
                               f"finished so far are kept - restart the cluster (or drop --scheduler) and "
                               f"rerun to finish") from None

    def _lost(self, exc: Exception) -> str | None:
        """What went wrong with the cluster, or None when ``exc`` is the task's own error."""
        name = type(exc).__name__
        if name == "KilledWorker":
            return "workers kept dying (out of memory?)"
        if isinstance(exc, CancelledError) or name == "CommClosedError":
            return "the connection to the Dask scheduler was lost"
        status = str(getattr(self.client, "status", "running"))
        if isinstance(exc, (OSError, TimeoutError)) and status != "running":
            return f"the Dask scheduler stopped answering ({name})"
        return None

    def close(self) -> None:
        if self._pool is not None:
            pool, self._pool = self._pool, None
            pool.shutdown(wait=False, cancel_futures=True)
        if self.client is not None:
            client, self.client = self.client, None
            with contextlib.suppress(Exception):
                client.close(timeout=1 if self._cluster_lost else 10)
