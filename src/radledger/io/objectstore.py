"""Outputs on an S3-compatible object store, through GDAL's ``/vsis3/`` file system.

A run whose ``output.directory`` is ``s3://bucket/prefix`` writes into a local staging folder
exactly as into a local output folder (the same single-compression COG path, verified, renamed
into place, under the run lock), then copies each new or changed file to the store.  GDAL's
``VSICopyFile`` uploads it in one PUT (multipart for large files); S3 makes an object visible only
when its upload is complete, so a reader never sees part of a product.

GDAL rather than an S3 client library: radledger reads its inputs through GDAL already, so the
store is reached with the same settings the user gives for inputs (``AWS_S3_ENDPOINT``,
credentials, ``AWS_HTTPS``, ``AWS_VIRTUAL_HOSTING``, profiles) and no second client to configure.

Before the run, each object the staging folder lacks (another machine's run, a staging folder
removed since) is copied down, so a rerun keeps every product whose ``settings_hash`` tag is
current and computes only the rest, as for a local folder.  ``.radledger-store.json`` in the staging
folder records each file as last copied (size, modification time, ETag): only files changed since
are uploaded.
"""

from __future__ import annotations

import ctypes
from dataclasses import dataclass
from pathlib import Path

from ..errors import OutputError
from .atomic import atomic_output, read_record, write_record
from .gdalapi import _gdal, remote_headers
from .paths import gdal_path

__all__ = ["store_root", "is_store_url", "StoreMirror", "RECORD", "default_staging", "list_objects"]

RECORD = ".radledger-store.json"
_SKIP_NAMES = (".radledger.lock", RECORD)
_ANY_SIZE = ctypes.c_uint64(0xFFFFFFFFFFFFFFFF)   # VSICopyFile: size unknown, ask the source


def is_store_url(text: str) -> bool:
    return text.startswith(("s3://", "/vsis3/"))


def store_root(url: str) -> str:
    """``s3://bucket/prefix`` (or ``/vsis3/bucket/prefix``) as GDAL's ``/vsis3/bucket/prefix``."""
    return gdal_path(url).rstrip("/")


def _lib():
    lib = _gdal()
    if lib is None:
        raise OutputError("an s3:// output.directory needs GDAL's library, which radledger could not locate "
                          "beside rasterio; write to a local folder and copy it to the store")
    if not getattr(lib, "_radledger_store", False):
        lib.VSICopyFile.restype = ctypes.c_int
        lib.VSICopyFile.argtypes = [ctypes.c_char_p, ctypes.c_char_p, ctypes.c_void_p, ctypes.c_uint64,
                                    ctypes.c_void_p, ctypes.c_void_p, ctypes.c_void_p]
        lib.VSIReadDirRecursive.restype = ctypes.POINTER(ctypes.c_char_p)
        lib.VSIReadDirRecursive.argtypes = [ctypes.c_char_p]
        lib.CPLErrorReset.restype = None
        lib._radledger_store = True
    return lib


def _last_error(lib) -> str:
    return (lib.CPLGetLastErrorMsg() or b"").decode("utf-8", "replace")


def list_objects(root: str) -> list[str]:
    """Every object under ``root`` (a ``/vsis3/`` folder), as paths relative to it."""
    lib = _lib()
    lib.CPLErrorReset()
    found = lib.VSIReadDirRecursive(root.encode("utf-8"))
    names = []
    if found:
        try:
            i = 0
            while found[i]:
                names.append(found[i].decode("utf-8", "replace"))
                i += 1
        finally:
            lib.CSLDestroy(ctypes.cast(found, ctypes.c_void_p))
    return sorted(n for n in names if n and not n.endswith("/"))


def _copy(src: str, dst: str) -> None:
    lib = _lib()
    lib.CPLErrorReset()
    if lib.VSICopyFile(src.encode("utf-8"), dst.encode("utf-8"), None, _ANY_SIZE, None, None, None) != 0:
        raise OutputError(f"cannot copy {src} to {dst}: {_last_error(lib) or 'GDAL gave no reason'}; check the "
                          f"store's address and credentials (AWS_S3_ENDPOINT, AWS_ACCESS_KEY_ID, ...)")


def _skipped(rel: str) -> bool:
    name = rel.rsplit("/", 1)[-1]
    return name in _SKIP_NAMES or ".radledger-partial-" in name


@dataclass
class StoreMirror:
    """A local staging folder kept in step with an object-store prefix."""

    staging: Path
    url: str

    @property
    def root(self) -> str:
        return store_root(self.url)

    def _record(self) -> dict:
        return read_record(self.staging / RECORD)

    def _save(self, record: dict) -> None:
        write_record(self.staging / RECORD, record)

    @staticmethod
    def _state(path: Path) -> list:
        st = path.stat()
        return [st.st_size, st.st_mtime_ns]

    def pull(self) -> list[Path]:
        """Copy down each object the staging folder lacks; the local paths copied."""
        self.staging.mkdir(parents=True, exist_ok=True)
        record = self._record()
        got = []
        for rel in list_objects(self.root):
            local = self.staging / rel
            if _skipped(rel) or local.exists():
                continue
            local.parent.mkdir(parents=True, exist_ok=True)
            with atomic_output(local) as tmp:
                _copy(f"{self.root}/{rel}", str(tmp))
            record[rel] = [*self._state(local), None]
            got.append(local)
        if got:
            self._save(record)
        return got

    def push(self) -> tuple[list[str], list[str]]:
        """Upload each file new or changed since it was last copied; (uploaded, unchanged) URLs."""
        record = self._record()
        sent, same = [], []
        for path in sorted(p for p in self.staging.rglob("*") if p.is_file()):
            rel = path.relative_to(self.staging).as_posix()
            if _skipped(rel):
                continue
            url = f"{self.url.rstrip('/')}/{rel}"
            if record.get(rel, [None, None])[:2] == self._state(path):
                same.append(url)
                continue
            _copy(str(path), f"{self.root}/{rel}")
            record[rel] = [*self._state(path), remote_headers(f"{self.root}/{rel}").get("etag")]
            self._save(record)            # an interrupted upload keeps what is done
            sent.append(url)
        return sent, same


def default_staging(base: Path, url: str) -> Path:
    """``BASE/.radledger-staging/BUCKET/PREFIX``: the staging folder when the config names none."""
    return base / ".radledger-staging" / store_root(url)[len("/vsis3/"):]

