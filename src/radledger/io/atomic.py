"""Writing a small file so that it appears whole or not at all."""

from __future__ import annotations

import os
import tempfile
from contextlib import contextmanager
from pathlib import Path
from typing import Iterator

from ..errors import OutputError

__all__ = ["atomic_output"]


@contextmanager
def atomic_output(path: str | os.PathLike) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success it replaces ``path`` atomically.

    On any error the temporary file is removed and ``path`` is left as it was.
    Raises :class:`OutputError` when the folder cannot be written.
    """
    target = Path(path)
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=target.parent)
    except OSError as exc:
        raise OutputError(f"{target}: cannot write there ({exc.strerror}); "
                          f"check that the output directory exists and is writable") from None
    os.close(fd)
    tmp = Path(tmp)
    try:
        yield tmp
        os.replace(tmp, target)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
