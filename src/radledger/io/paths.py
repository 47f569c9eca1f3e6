"""Where a path points (local, URL, GDAL virtual file system) and fetching small remote texts."""

from __future__ import annotations

import os
import urllib.error
import urllib.request

from ..errors import InputError

__all__ = ["is_remote", "is_url", "gdal_path", "fetch_text", "printable", "MAX_TEXT_BYTES"]

MAX_TEXT_BYTES = 16 * 1024 * 1024     # a config or table larger than this is refused

_URL_SCHEMES = ("http://", "https://")
_REMOTE_PREFIXES = _URL_SCHEMES + ("s3://", "gs://", "/vsi", "az://")


def is_url(path: str) -> bool:
    """An ``http(s)://`` address."""
    return str(path).startswith(_URL_SCHEMES)


def is_remote(path: str) -> bool:
    """A location GDAL reads through a virtual file system (URL, object store, /vsi...)."""
    return str(path).startswith(_REMOTE_PREFIXES)


def gdal_path(path: str) -> str:
    """A path GDAL opens: URLs become /vsicurl/, s3:// /vsis3/, gs:// /vsigs/, az:// /vsiaz/."""
    if path.startswith(_URL_SCHEMES):
        return "/vsicurl/" + path
    for scheme, vsi in (("s3://", "/vsis3/"), ("gs://", "/vsigs/"), ("az://", "/vsiaz/")):
        if path.startswith(scheme):
            return vsi + path[len(scheme):]
    return path


def printable(path) -> str:
    """``path`` as text that can always be printed: bytes that are not UTF-8 shown as ``\\xNN``."""
    try:
        raw = os.fsencode(path)
    except (TypeError, ValueError):
        return repr(path)
    return raw.decode("utf-8", "backslashreplace")


def fetch_text(url: str, *, what: str, error=InputError, timeout: float = 30.0) -> str:
    """The UTF-8 text at ``url`` (at most 16 MB); ``error`` (an exception class) names ``what`` failed and why."""
    try:
        with urllib.request.urlopen(url, timeout=timeout) as r:
            data = r.read(MAX_TEXT_BYTES + 1)
    except urllib.error.HTTPError as exc:
        raise error(f"{url}: cannot fetch the {what} (HTTP {exc.code}); check the URL") from None
    except (urllib.error.URLError, OSError, ValueError) as exc:
        raise error(f"{url}: cannot fetch the {what} ({exc}); check the URL and the network") from None
    if len(data) > MAX_TEXT_BYTES:
        raise error(f"{url}: cannot fetch the {what}: it is larger than {MAX_TEXT_BYTES // 2**20} MB; "
                    f"check the URL")
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise error(f"{url}: cannot fetch the {what} as text: it is not UTF-8 (byte 0x{data[exc.start]:02x} "
                    f"at offset {exc.start}); save it as UTF-8") from None
