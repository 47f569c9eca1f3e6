"""GDAL settings, chosen once and applied in every task (threads or workers).

The settings are plain strings so a distributed worker applies exactly the
same ones as the client.  Costs and reasons:

* ``GDAL_CACHEMAX=96`` (MB): GDAL's block cache defaults to 5 % of RAM
  (1.2 GB on a 24 GB machine) and dominated peak memory in our measurements
  (shared/PERF.md); chunked reads need only the blocks of the chunk in flight.
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
    "GDAL_CACHEMAX": "96",
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
    # rasterio passes GDAL_CACHEMAX to GDALSetCacheMax, which wants an integer (MB)
    return {k: int(v) if k == "GDAL_CACHEMAX" and str(v).isdigit() else v for k, v in options.items()}


@contextlib.contextmanager
def gdal_env(**extra):
    """Apply radledger's GDAL options (re-entrant; cheap when already inside one)."""
    if rasterio.env.hasenv() and not extra:
        yield
        return
    with rasterio.Env(**_for_rasterio({**gdal_options(), **extra})):
        yield
