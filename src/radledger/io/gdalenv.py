"""GDAL settings, chosen once and applied in every task (threads or workers).

The settings are plain strings so a distributed worker applies exactly the
same ones as the client.  Costs and reasons:

* ``GDAL_CACHEMAX=16`` (MB): GDAL's block cache defaults to 5 % of RAM
  (1.2 GB on a 24 GB machine) and dominated peak memory in our measurements
  (benchmarks/README.md).  Each chunk reads its tiles once, so a large cache buys
  nothing (benchmarks/README.md: a 96 MB cache changed no time and added
  ~100 MB, and peak memory then grew with the scene); 16 MB keeps decimated reads from
  re-decompressing tiles.
* ``GDAL_NUM_THREADS=1`` for reads inside tasks: Dask already runs one task per
  core, so per-read decompression threads would oversubscribe.  The final COG
  compression is the one step that uses ``NUM_THREADS=ALL_CPUS`` (writers.py).
* Remote inputs (``/vsicurl/``, ``/vsis3/``): no directory listing on open,
  merged consecutive ranges, multi-range requests, retries with back-off, and
  GDAL's per-process cache of recently read ranges (64 MB).  ``VSI_CACHE`` is
  deliberately off: it keeps a 25-32 MB cache *per open file handle*, and
  with one handle per input per thread it alone doubled peak memory.

Override any of them with the same-named environment variable.
"""

from __future__ import annotations

import contextlib
import os

import rasterio

__all__ = ["GDAL_OPTIONS", "gdal_env", "gdal_options"]

GDAL_OPTIONS: dict[str, str] = {
    "GDAL_CACHEMAX": "16",
    "GDAL_NUM_THREADS": "1",
    "GDAL_DISABLE_READDIR_ON_OPEN": "EMPTY_DIR",
    "CPL_VSIL_CURL_ALLOWED_EXTENSIONS": ".tif,.tiff,.TIF,.TIFF,.vrt,.nc,.ovr",
    "GDAL_HTTP_MERGE_CONSECUTIVE_RANGES": "YES",
    "GDAL_HTTP_MULTIRANGE": "YES",
    "GDAL_HTTP_MAX_RETRY": "4",
    "GDAL_HTTP_RETRY_DELAY": "0.5",
    "GDAL_HTTP_TIMEOUT": "60",
    "CPL_VSIL_CURL_CACHE_SIZE": "67108864",
    "GDAL_TIFF_INTERNAL_MASK": "YES",
}


def gdal_options() -> dict[str, str]:
    """The GDAL options in force: the defaults above, each overridable from the environment."""
    return {k: os.environ.get(k, v) for k, v in GDAL_OPTIONS.items()}


def _for_rasterio(options: dict[str, str]) -> dict:
    # rasterio hands an integer GDAL_CACHEMAX to GDALSetCacheMax64, which counts *bytes*;
    # our value (like GDAL's own environment variable below 100000) is in MB
    out = dict(options)
    v = str(out.get("GDAL_CACHEMAX", ""))
    if v.isdigit():
        n = int(v)
        out["GDAL_CACHEMAX"] = n * 1024 * 1024 if n < 100000 else n
    return out


@contextlib.contextmanager
def gdal_env(**extra):
    """Apply radledger's GDAL options (re-entrant; cheap when already inside one)."""
    if rasterio.env.hasenv() and not extra:
        yield
        return
    with rasterio.Env(**_for_rasterio({**gdal_options(), **extra})):
        yield
