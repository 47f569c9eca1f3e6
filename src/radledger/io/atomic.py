"""Writing a small file so that it appears whole or not at all."""

from __future__ import annotations

import json
import os
from contextlib import contextmanager
from pathlib import Path
from typing import Iterator

from ..errors import DiskFullError, OutputError
from .lock import PARTIAL_MARK, partial_token
from .space import write_failure

__all__ = ["atomic_output", "fsync_file", "read_record", "write_record"]


def fsync_file(path: str | os.PathLike) -> None:
    """Push ``path``'s data to the disk, so a late write error (network disks) is raised here."""
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


@contextmanager
def atomic_output(path: str | os.PathLike) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success it replaces ``path`` atomically.

    The temporary is created with mode 0666 less the user's umask (as any file
    the user creates), named after its owner so another run's start-up sweep
    leaves it alone while this process lives, and synced to the disk before the
    rename.  On any error it is removed and ``path`` is left as it was.  Raises
    :class:`OutputError` when the folder cannot be written and
    :class:`DiskFullError` when the disk fills up.
    """
    target = Path(path)
    tmp = target.parent / f".{target.name}{PARTIAL_MARK}-{partial_token()}{target.suffix}"
    try:
        os.close(os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666))
    except OSError as exc:
        failure = write_failure(target, exc)
        if isinstance(failure, DiskFullError):
            raise failure from None
        raise OutputError(f"{target}: cannot write there ({exc.strerror}); "
                          f"check that the output directory exists and is writable") from None
    try:
        yield tmp
        fsync_file(tmp)
        os.replace(tmp, target)
    except OSError as exc:
        failure = write_failure(target, exc, need=_size(tmp))
        tmp.unlink(missing_ok=True)
        if isinstance(failure, DiskFullError):
            raise failure from None
        raise
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise


def _size(path: Path) -> int:
    try:
        return path.stat().st_size
    except OSError:
        return 0


def read_record(path: str | os.PathLike) -> dict:
    """A small JSON object kept beside outputs (what they were made from); {} if missing or unreadable."""
    try:
        record = json.loads(Path(path).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    return record if isinstance(record, dict) else {}


def write_record(path: str | os.PathLike, record: dict) -> None:
    """Write ``record`` as JSON, whole or not at all."""
    with atomic_output(path) as tmp:
        Path(tmp).write_text(json.dumps(record, indent=1, sort_keys=True), encoding="utf-8")
