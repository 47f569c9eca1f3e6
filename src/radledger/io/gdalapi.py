"""The few GDAL C functions rasterio does not expose, called in the GDAL library rasterio loaded.

* GDAL's error state.  A block GDAL cannot write when it flushes its block
  cache (on close, or when the cache makes room) is not an error return: it is
  only recorded as the calling thread's last error (``CPLGetLastErrorType``).
  :func:`gdal_failures` reads that state around a write, so a full disk is
  never mistaken for success.
* The HTTP headers of a remote file (``VSIGetFileMetadata(path, "HEADERS")``):
  the ETag or Last-Modified of an object on S3 or another store, fetched with
  the same credentials and endpoint settings GDAL reads it with.

When the library cannot be located (an unusual build), the functions do
nothing and return nothing; radledger's other checks still apply.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import glob
import os
import threading
from contextlib import contextmanager
from typing import Iterator

import rasterio

__all__ = ["gdal_failures", "GdalFailure", "remote_headers", "forget_remote"]

CE_FAILURE = 3
_lock = threading.Lock()
_lib: list = []   # [] not looked up yet; [None] not found; [CDLL] found


class GdalFailure(OSError):
    """GDAL recorded a failure (its message) during a call that returned normally."""


def _find_library() -> str | None:
    """The GDAL library rasterio uses (other packages, pyogrio say, may load their own copy)."""
    here = os.path.dirname(os.path.dirname(os.path.abspath(rasterio.__file__)))
    bundled = [os.path.join(here, "rasterio.libs"), os.path.join(here, "rasterio", ".dylibs")]
    loaded = []
    try:   # Linux: the libraries this process has loaded
        with open("/proc/self/maps", encoding="utf-8", errors="replace") as maps:
            for line in maps:
                if "libgdal" in line and "/" in line:
                    path = line[line.index("/"):].strip()
                    if path not in loaded:
                        loaded.append(path)
    except OSError:
        pass
    for path in loaded:                    # rasterio's own copy (wheels)
        if any(path.startswith(b + os.sep) for b in bundled):
            return path
    for b in bundled:
        found = sorted(glob.glob(os.path.join(b, "libgdal*")))
        if found:
            return found[0]
    if len(loaded) == 1:                   # a GDAL shared by every package (system or conda builds)
        return loaded[0]
    return ctypes.util.find_library("gdal") if not loaded else None


def _gdal():
    with _lock:
        if not _lib:
            lib = None
            path = _find_library()
            try:
                lib = ctypes.CDLL(path) if path else None
                if lib is not None:
                    lib.CPLGetLastErrorMsg.restype = ctypes.c_char_p
                    lib.CPLGetLastErrorType.restype = ctypes.c_int
                    lib.VSIGetFileMetadata.restype = ctypes.POINTER(ctypes.c_char_p)
                    lib.VSIGetFileMetadata.argtypes = [ctypes.c_char_p, ctypes.c_char_p, ctypes.c_void_p]
                    lib.VSICurlPartialClearCache.argtypes = [ctypes.c_char_p]
                    lib.CSLDestroy.argtypes = [ctypes.c_void_p]
            except (OSError, AttributeError):
                lib = None
            _lib.append(lib)
        return _lib[0]


@contextmanager
def gdal_failures(what: str) -> Iterator[None]:
    """Raise :class:`GdalFailure` if GDAL records a failure in this thread during the block.

    ``what`` names the file for the message.
    """
    lib = _gdal()
    if lib is not None:
        lib.CPLErrorReset()
    yield
    if lib is not None and lib.CPLGetLastErrorType() >= CE_FAILURE:
        msg = (lib.CPLGetLastErrorMsg() or b"").decode("utf-8", "replace")
        lib.CPLErrorReset()
        raise GdalFailure(f"{what}: {msg}")


def forget_remote(gdal_path: str) -> None:
    """Drop what this process's GDAL cached of a remote file (its size, its blocks)."""
    lib = _gdal()
    if lib is not None:
        lib.VSICurlPartialClearCache(gdal_path.encode("utf-8"))


def remote_headers(gdal_path: str) -> dict[str, str]:
    """The HTTP headers GDAL gets for ``gdal_path`` (a /vsis3/, /vsicurl/, ... path); {} if none.

    GDAL's cached answer for the path is dropped first, so a changed object is
    seen as changed.  Call inside :func:`radledger.io.gdalenv.gdal_env` so the
    user's GDAL settings (endpoint, credentials) apply.
    """
    lib = _gdal()
    if lib is None:
        return {}
    key = gdal_path.encode("utf-8")
    forget_remote(gdal_path)
    found = lib.VSIGetFileMetadata(key, b"HEADERS", None)
    out: dict[str, str] = {}
    if not found:
        return out
    try:
        i = 0
        while found[i]:
            k, _, v = found[i].decode("utf-8", "replace").partition("=")
            out[k.strip().lower()] = v.strip()
            i += 1
    finally:
        lib.CSLDestroy(ctypes.cast(found, ctypes.c_void_p))
    return out
