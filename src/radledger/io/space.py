"""Why a write failed: the disk is full (or a quota or file size limit was hit), or something else.

GDAL and the writers it drives often lose the operating system's reason
(``ENOSPC``) on the way up, so a failure is also judged by what is left on
the disk right after it, before the partial files are removed.
"""

from __future__ import annotations

import errno
import os
import resource
import shutil
from pathlib import Path

from ..errors import DiskFullError, WriteError

__all__ = ["free_bytes", "write_failure", "human_bytes", "SPACE_ERRNOS"]

SPACE_ERRNOS = (errno.ENOSPC, errno.EDQUOT, errno.EFBIG)
_SPACE_WORDS = ("no space left", "disk quota", "file too large", "not enough space")
#: a failed write with less than this free beside it is taken as a full disk (a few tiles' worth)
SLACK = 16 * 1024 * 1024


def human_bytes(n: float) -> str:
    for unit in ("B", "KB", "MB", "GB", "TB"):
        if n < 1024 or unit == "TB":
            return f"{n:.1f} {unit}"
        n /= 1024
    return f"{n:.1f} TB"


def free_bytes(folder: str | os.PathLike) -> int | None:
    """Bytes free for this user in ``folder`` (or its nearest existing parent); None if unknown."""
    p = Path(folder)
    while not p.exists() and p.parent != p:
        p = p.parent
    try:
        return shutil.disk_usage(p).free
    except OSError:
        return None


def _size_limit() -> int | None:
    soft, _ = resource.getrlimit(resource.RLIMIT_FSIZE)
    return None if soft == resource.RLIM_INFINITY else soft


def write_failure(target: str | os.PathLike, exc: BaseException, *, need: int = 0) -> WriteError:
    """The error to raise after writing ``target`` failed with ``exc`` (call before cleaning up).

    ``need``: about how many bytes the largest file being written needed.  A
    full disk, quota or file size limit gives :class:`DiskFullError`; anything
    else :class:`WriteError`.
    """
    target = Path(target)
    folder = target.parent
    text = str(exc).lower()
    code = getattr(exc, "errno", None)
    free = free_bytes(folder)
    limit = _size_limit()
    if code == errno.EFBIG or "file too large" in text or (limit is not None and need > limit):
        shown = f" of {human_bytes(limit)}" if limit is not None else ""
        return DiskFullError(f"{folder}: cannot write {target.name}: it reached the file size limit{shown} "
                             f"(ulimit -f); raise the limit or make the products smaller, then rerun")
    if code in SPACE_ERRNOS or any(w in text for w in _SPACE_WORDS) or \
            (free is not None and free < max(need, SLACK)):
        have = f", {human_bytes(free)} free" if free is not None else ""
        return DiskFullError(f"{folder}: the disk is full: writing {target.name} needs about "
                             f"{human_bytes(max(need, 1))}{have}; free some space (or choose another "
                             f"output.directory) and rerun: finished products are kept")
    detail = str(exc).strip().splitlines()[0] if str(exc).strip() else exc.__class__.__name__
    return WriteError(f"{target}: writing failed ({detail}); nothing was left at that path; check the "
                      f"disk and the output folder, then rerun")
