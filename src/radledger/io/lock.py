"""One run at a time per output folder, and temporaries that name their owner.

* :class:`RunLock`: ``DIR/.radledger.lock`` holds the owner's pid, host and
  start time, and the owner holds an operating-system lock on it (``flock``;
  NFS shares it between hosts).  The kernel drops that lock when the owner
  exits in any way, even ``kill -9``, so a lock left by a crashed run is stale
  by construction and the next run takes it over.  A second run on the same
  folder waits (its caller is told once who it waits for) or, with
  ``wait=False``, raises :class:`OutputError`.  Where the file system offers no
  locks at all, a lock whose pid is alive on this host is honoured, others are
  taken over.
* Temporaries are named ``.NAME.radledger-partial-PID@HOST-XXXXXXXX...``;
  :func:`sweep_partials` removes only those whose owner is gone (a pid no longer
  alive on this host; on another host: older than a day).
"""

from __future__ import annotations

import datetime as dt
import errno
import fcntl
import glob
import hashlib
import json
import os
import re
import socket
import time
import uuid
from pathlib import Path
from typing import Callable

from ..errors import OutputError

__all__ = ["RunLock", "PARTIAL_MARK", "LOCK_NAME", "partial_token", "sweep_partials", "owner_gone",
           "pid_alive"]

PARTIAL_MARK = ".radledger-partial"
LOCK_NAME = ".radledger.lock"
OTHER_HOST_AGE = 24 * 3600     # seconds after which another host's temporaries count as abandoned
_TOKEN = re.compile(re.escape(PARTIAL_MARK) + r"-(\d+)(?:@([0-9a-f]+))?-[0-9a-f]{8}")


def _host_tag() -> str:
    return hashlib.sha1(socket.gethostname().encode("utf-8", "replace")).hexdigest()[:6]


def partial_token() -> str:
    """``PID@HOST-XXXXXXXX``: this process, this host, and a random part."""
    return f"{os.getpid()}@{_host_tag()}-{uuid.uuid4().hex[:8]}"


def pid_alive(pid: int) -> bool:
    """A process with this id exists on this host."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:     # exists, owned by someone else
        return True
    except OSError:
        return False
    return True


def owner_gone(path: str | os.PathLike) -> bool:
    """The run that made temporary ``path`` has ended (never true for this process's own files)."""
    m = _TOKEN.search(os.path.basename(path))
    if m is None:
        return False
    pid, host = int(m.group(1)), m.group(2)
    if host is not None and host != _host_tag():
        try:
            return time.time() - os.stat(path).st_mtime > OTHER_HOST_AGE
        except OSError:
            return False
    return pid != os.getpid() and not pid_alive(pid)


def sweep_partials(directory: str | os.PathLike) -> list[str]:
    """Remove the temporaries under ``directory`` whose owner is gone; return their paths."""
    found = glob.glob(str(Path(directory) / "**" / f".*{PARTIAL_MARK}-*"), recursive=True)
    removed = []
    for f in found:
        if owner_gone(f):
            try:
                os.remove(f)
                removed.append(f)
            except OSError:      # gone already, or not ours to remove
                pass
    return removed


def _describe(owner: dict) -> str:
    pid, host = owner.get("pid", "?"), owner.get("host", "?")
    when = owner.get("started")
    return f"pid {pid} on {host}" + (f", started {when}" if when else "")


class RunLock:
    """The lock of one output folder (a context manager; :meth:`acquire` / :meth:`release`)."""

    def __init__(self, folder: str | os.PathLike):
        self.folder = Path(folder)
        self.path = self.folder / LOCK_NAME
        self._fd: int | None = None

    @property
    def held(self) -> bool:
        return self._fd is not None

    def owner(self) -> dict:
        """What the lock file says about its holder ({} if unreadable)."""
        try:
            return json.loads(self.path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return {}

    def busy_message(self, owner: dict | None = None) -> str:
        owner = self.owner() if owner is None else owner
        return f"another radledger run ({_describe(owner)}) is writing into {self.folder}"

    def acquire(self, *, wait: bool = True, on_wait: Callable[[str], None] | None = None,
                poll: float = 0.2) -> "RunLock":
        """Take the lock; while another live run holds it, wait (``on_wait`` hears it once) or raise."""
        told = False
        while True:
            self.folder.mkdir(parents=True, exist_ok=True)
            fd = os.open(self.path, os.O_RDWR | os.O_CREAT, 0o666)
            try:
                got = self._try_lock(fd)
                if got and self._is_current(fd):
                    self._write_owner(fd)
                    self._fd = fd
                    return self
            except BaseException:
                os.close(fd)
                raise
            os.close(fd)
            if got:          # the file we locked was removed by its previous holder: lock the new one
                continue
            owner = self.owner()
            if not wait:
                raise OutputError(f"{self.busy_message(owner)}; wait for it to finish or choose another "
                                  f"output.directory")
            if not told and on_wait is not None:
                on_wait(f"{self.busy_message(owner)}; waiting for it to finish (Ctrl-C to stop)")
                told = True
            time.sleep(poll)

    def _try_lock(self, fd: int) -> bool:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            return True
        except BlockingIOError:
            return False
        except OSError as exc:
            if exc.errno not in (errno.ENOLCK, errno.EOPNOTSUPP, errno.ENOSYS, errno.EINVAL):
                raise
        # no locks on this file system: honour a live holder on this host
        owner = self.owner()
        pid, host = owner.get("pid"), owner.get("host")
        return not (isinstance(pid, int) and host == socket.gethostname() and pid != os.getpid()
                    and pid_alive(pid))

    def _is_current(self, fd: int) -> bool:
        try:
            a, b = os.fstat(fd), os.stat(self.path)
        except FileNotFoundError:
            return False
        return (a.st_ino, a.st_dev) == (b.st_ino, b.st_dev)

    def _write_owner(self, fd: int) -> None:
        text = json.dumps({"pid": os.getpid(), "host": socket.gethostname(),
                           "started": dt.datetime.now().astimezone().isoformat(timespec="seconds")})
        os.ftruncate(fd, 0)
        os.pwrite(fd, text.encode("utf-8") + b"\n", 0)

    def release(self) -> None:
        """Remove the lock file and drop the lock (idempotent)."""
        fd, self._fd = self._fd, None
        if fd is None:
            return
        try:
            if self._is_current(fd):
                os.unlink(self.path)
        except OSError:
            pass
        finally:
            os.close(fd)

    def __enter__(self) -> "RunLock":
        return self.acquire()

    def __exit__(self, *exc) -> None:
        self.release()
