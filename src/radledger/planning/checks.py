"""Checks a plan makes before anything is computed.

* Whole-layer plausibility: a decimated sample of each input (overviews where
  the file has them) is decoded and its median compared with what each unit
  implies.  This catches the common slips (degC declared K, hPa or Pa declared
  kPa, a missing albedo scale) before any product is written.  The bounds are
  common practice, deliberately wide.
* The output folder is writable and the products fit on its disk; the
  estimate counts only products that are not on disk yet, so a rerun after
  freeing space resumes without ``--force``.
* The land-cover classes within the grid (for the emissivity table).
"""

from __future__ import annotations

import os
import shutil
from typing import Iterable

import numpy as np

from ..errors import OutputError, RadledgerError, UnitError
from ..grid import TargetGrid
from ..io.gdalenv import gdal_env
from ..io.rasters import LayerSource, open_dataset
from ..io.space import human_bytes
from ..kinds import TimeKind

__all__ = ["check_sample", "output_problems", "land_cover_classes", "human_bytes", "remaining_bytes"]


def _median(a: np.ndarray) -> float | None:
    a = a[np.isfinite(a)]
    return float(np.median(a)) if a.size else None


def check_sample(src: LayerSource, *, kind: TimeKind = TimeKind.SCENES) -> None:
    """Raise :class:`UnitError` when ``src``'s values do not fit its declared units."""
    layer = src.layer
    if layer in ("land_cover",):
        return
    med = _median(src.read_sample())
    if med is None:
        return   # all nodata in the sample: products will be NaN and flagged, not an error
    where = f"{src.path}: layer {layer}"
    if layer in ("surface_temperature", "air_temperature", "air_temperature_max", "air_temperature_min",
                 "dewpoint_temperature"):
        if med < 150:
            raise UnitError(f"{where}: median {med:.4g} K after decoding is far too cold; the values look "
                            f"like degC - set layers.{_key(layer)}.units: degC (declared {src.units or 'K'})")
        if med > 400:
            raise UnitError(f"{where}: median {med:.4g} K after decoding is implausible; check "
                            f"layers.{_key(layer)}.units/scale/offset (declared {src.units or 'K'})")
    elif layer == "vapour_pressure":
        if med > 10:
            guess = "hPa" if med < 200 else "Pa"
            raise UnitError(f"{where}: median {med:.4g} kPa after decoding exceeds any saturation vapour "
                            f"pressure on Earth; the values look like {guess} - set "
                            f"layers.vapour_pressure.units: {guess} (declared {src.units or 'kPa'})")
        if med < 0:
            raise UnitError(f"{where}: median {med:.4g} kPa is negative; check scale/offset/nodata")
    elif layer == "albedo":
        if med > 1 or med < 0:
            raise UnitError(f"{where}: median {med:.4g} after decoding lies outside 0..1; set "
                            f"layers.albedo.scale (e.g. 0.001 or 0.0001 for scaled integers) and offset")
    elif layer == "shortwave_down":
        if med < 0:
            raise UnitError(f"{where}: median {med:.4g} is negative; shortwave cannot be negative - check "
                            f"layers.shortwave_down scale/offset/nodata")
        daylight = src.units == "W m-2 daylight"
        if kind is TimeKind.DAYS and not daylight and med > 45:
            raise UnitError(f"{where}: median {med:.4g} MJ m-2 day-1 (declared {src.units}) exceeds any daily "
                            f"extraterrestrial radiation; if the values are W m-2, say which mean they are: "
                            f"'W m-2 daylight' (layers.shortwave_down.units) for a mean over the daylight "
                            f"hours, or units 'W m-2' on the day's input itself for a 24-hour mean")
        if kind is TimeKind.DAYS and daylight and med > 1500:
            raise UnitError(f"{where}: median {med:.4g} W m-2 (declared a daylight mean) exceeds the solar "
                            f"constant; check layers.shortwave_down scale/offset/units")
        if kind is TimeKind.SCENES and med > 1500:
            raise UnitError(f"{where}: median {med:.4g} W m-2 exceeds the solar constant; check "
                            f"layers.shortwave_down scale/offset")
    elif layer == "relative_humidity":
        if med > 100.5 or med < 0:
            raise UnitError(f"{where}: median {med:.4g} % lies outside 0..100; check scale/units "
                            f"(units: '%' or '1' for a fraction)")
    elif layer == "elevation":
        if med < -500 or med > 9000:
            raise UnitError(f"{where}: median {med:.4g} m is not an elevation on Earth; give metres")


def _key(layer: str) -> str:
    return "air_temperature" if layer.startswith("air_temperature_") else layer


def remaining_bytes(pixels: int, targets: Iterable, in_flight: int) -> int:
    """A generous estimate of the disk still needed for ``targets`` (product paths) on a grid of ``pixels``.

    4 bytes per pixel for each product not on disk yet (a float32 COG with
    overviews is smaller after compression), plus the uncompressed
    intermediates of ``in_flight`` products being written; 0 when every
    product exists.
    """
    missing = sum(1 for t in targets if not os.path.exists(t))
    return int(pixels) * 4 * (missing + in_flight) if missing else 0


def output_problems(out, need: int, *, force: bool) -> list[RadledgerError]:
    """Output folder writable, and the products fit on its disk."""
    probe = out
    while not probe.exists() and probe.parent != probe:
        probe = probe.parent
    # a folder with no write bit at all is refused even for root, who could write anyway:
    # someone marked it read-only on purpose
    read_only = probe.is_dir() and not (probe.stat().st_mode & 0o222)
    if not probe.is_dir() or read_only or not os.access(probe, os.W_OK | os.X_OK):
        return [OutputError(f"{out}: output folder is not writable (nearest existing folder {probe}"
                            f"{', marked read-only' if read_only else ''}); choose another output.directory "
                            f"or fix its permissions")]
    free = shutil.disk_usage(probe).free
    if need > free and not force:
        return [OutputError(f"{out}: the run needs about {human_bytes(need)} but only {human_bytes(free)} is free; "
                            f"shrink the grid or the product list, free space, or rerun with --force")]
    return []


def land_cover_classes(src: LayerSource, grid: TargetGrid) -> list[int]:
    """Classes of the land cover within the grid's bounds, read block by block at native resolution.

    Reading the file's own blocks (not the grid) keeps the cost bounded by the
    file, whatever the size of the target grid.
    """
    from rasterio.warp import transform_bounds
    from rasterio.windows import Window, from_bounds

    seen = np.zeros(65536, dtype=bool)
    with gdal_env():
        ds = open_dataset(src.gdal_path, src.path)
        b = transform_bounds(grid.crs, ds.crs, *grid.bounds, densify_pts=21)
        full = Window(0, 0, ds.width, ds.height)
        try:
            area = from_bounds(*b, transform=ds.transform).round_offsets().round_lengths().intersection(full)
        except Exception:
            return []
        bh, bw = ds.block_shapes[0]
        step_r, step_c = max(bh, 512), max(bw, 512)
        r0, c0 = int(area.row_off), int(area.col_off)
        for r in range(r0, r0 + int(area.height), step_r):
            for c in range(c0, c0 + int(area.width), step_c):
                win = Window(c, r, min(step_c, c0 + area.width - c), min(step_r, r0 + area.height - r))
                a = ds.read(1, window=win)
                if src.nodata is not None:
                    a = a[a != src.nodata]
                v = a.astype(np.int64).ravel()
                v = v[(v >= 0) & (v < seen.size)]
                seen[np.unique(v)] = True
    return [int(c) for c in np.flatnonzero(seen)]
