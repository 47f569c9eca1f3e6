"""Where a path points (local, URL, GDAL virtual file system) and fetching small remote texts."""

from __future__ import annotations

import urllib.error
import urllib.request

from ..errors import InputError

__all__ = ["is_remote", "is_url", "gdal_path", "fetch_text"]

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


def fetch_text(url: str, *, what: str, error=InputError, timeout: float = 30.0) -> str:
    """The UTF-8 text at ``url``; ``error`` (an exception class) names ``what`` failed and why."""
    try:
        with urllib.request.urlopen(url, timeout=timeout) as r:
            return r.read().decode("utf-8")
    except urllib.error.HTTPError as exc:
        raise error(f"{url}: cannot fetch the {what} (HTTP {exc.code}); check the URL") from None
    except (urllib.error.URLError, OSError, UnicodeDecodeError) as exc:
        raise error(f"{url}: cannot fetch the {what} ({exc}); check the URL and the network") from None
