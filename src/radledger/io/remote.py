"""Fingerprints of inputs that are not plain local files: what changes when their content changes.

* ``http(s)://``: the ``ETag``, else the ``Last-Modified``, of a ``HEAD``
  request (a one-byte ranged ``GET`` when the server refuses ``HEAD``, as
  pre-signed URLs do), with the ``Content-Length``.
* Object stores (``s3://``, ``gs://``, ``az://`` and their ``/vsi`` forms,
  ``/vsicurl/``): the same headers, as GDAL receives them with the user's GDAL
  settings (endpoint, credentials).
* GDAL virtual paths onto a local file (``/vsizip/``, ``/vsigzip/``,
  ``/vsitar/``, ``/vsisubfile/``): the local file's size, times and inode.

A server that sends none of these headers cannot tell radledger its file
changed: such inputs are fingerprinted by their address alone (``no
validator``), and a changed file there needs ``--overwrite``.  Within a
:func:`fingerprint_session` (one run's planning) each address is asked once;
``fresh`` always asks again.  Whenever the headers are fetched, GDAL's cache of
the file in this process is dropped too, so a changed file is also read anew.
"""

from __future__ import annotations

import contextlib
import os
import re
import threading
import urllib.error
import urllib.request

from .gdalapi import forget_remote, remote_headers
from .gdalenv import gdal_env
from .paths import gdal_path, is_url

__all__ = ["remote_fingerprint", "fingerprint_session", "NETWORK_PREFIXES"]

NETWORK_PREFIXES = ("/vsicurl/", "/vsicurl_streaming/", "/vsis3/", "/vsigs/", "/vsiaz/", "/vsiadls/",
                    "/vsioss/", "/vsiswift/", "/vsiwebhdfs/", "/vsihdfs/")
TIMEOUT = 10.0          # seconds for one HEAD request
_sessions: list[dict[str, list]] = []
_lock = threading.Lock()
_VSI = re.compile(r"^/vsi[a-z0-9_]+/")


@contextlib.contextmanager
def fingerprint_session():
    """Within the block, each remote address is asked once (unless ``fresh``)."""
    session: dict[str, list] = {}
    with _lock:
        _sessions.append(session)
    try:
        yield session
    finally:
        with _lock:
            _sessions.remove(session)


def remote_fingerprint(path: str, *, fresh: bool = False) -> list:
    """``[what, value, ...]`` identifying the current content of remote or virtual ``path``."""
    with _lock:
        session = _sessions[-1] if _sessions else None
        hit = session.get(path) if session is not None else None
    if hit is not None and not fresh:
        return hit
    if is_url(path):
        found = _validator(_http_headers(path))
        forget_remote(gdal_path(path))     # GDAL must not serve this file's old blocks from its cache
    else:
        gp = gdal_path(path)
        if gp.startswith(NETWORK_PREFIXES):
            with gdal_env():
                found = _validator(remote_headers(gp))
        else:
            found = _local_part(gp)
    if session is not None:
        with _lock:
            session[path] = found
    return found


def _validator(headers: dict[str, str]) -> list:
    size = headers.get("content-length") or headers.get("content-range", "").rpartition("/")[2] or None
    for key in ("etag", "last-modified"):
        if headers.get(key):
            return [key, headers[key], size]
    return ["no validator", size]


def _http_headers(url: str) -> dict[str, str]:
    """Response headers (lower-case names) of HEAD, else of a one-byte GET; {} when unreachable."""
    for method, extra in (("HEAD", {}), ("GET", {"Range": "bytes=0-0"})):
        req = urllib.request.Request(url, method=method, headers=extra)
        try:
            with urllib.request.urlopen(req, timeout=TIMEOUT) as r:
                return {k.lower(): v for k, v in r.headers.items()}
        except urllib.error.HTTPError as exc:
            if exc.code in (404, 410):
                return {}
            continue
        except (urllib.error.URLError, OSError, ValueError):
            return {}
    return {}


def _local_part(gp: str) -> list:
    """Size, times and inode of the local file under a GDAL virtual path (``/vsizip//data/a.zip/x.tif``)."""
    inner = gp
    while _VSI.match(inner):
        inner = _VSI.sub("", inner, count=1)
        if inner.startswith("{"):                       # /vsizip/{/path/a.zip}/x.tif
            inner = inner[1:].replace("}", "", 1)
        m = re.match(r"^[0-9]+_[0-9]*,", inner)          # /vsisubfile/OFFSET_SIZE,/path
        if m:
            inner = inner[m.end():]
    p = inner if inner.startswith("/") else "/" + inner
    while p and p != "/":
        try:
            st = os.stat(p)
            return ["file", p, st.st_size, st.st_mtime_ns, st.st_ctime_ns, st.st_ino, st.st_dev]
        except (OSError, ValueError):
            p = os.path.dirname(p)
    return ["no validator", None]
