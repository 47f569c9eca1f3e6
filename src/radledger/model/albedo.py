"""A day's albedo from the scenes around it: per pixel, linear in time between valid scene albedos.

For a day (taken at 12:00 UTC of its date) and each pixel: the nearest earlier and the nearest later
scene with a valid albedo (0..1) within ``max_gap`` days; both found: linear interpolation in time;
only one: that value (held); none: FAO-56's grass reference 0.23.  Each pixel's case goes to the
day's ``quality`` (``albedo_interpolated``, ``albedo_held``, ``albedo_default``).
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

import numpy as np
from rasterio.windows import Window

from ..grid import TargetGrid
from .layers import PHYSICAL_RANGES

__all__ = ["AlbedoBetweenScenes", "albedo_between", "FILL_INTERPOLATED", "FILL_HELD", "FILL_DEFAULT",
           "REFERENCE_ALBEDO"]

FILL_INTERPOLATED, FILL_HELD, FILL_DEFAULT = 1, 2, 3
REFERENCE_ALBEDO = 0.23     # FAO-56's grass reference albedo


def albedo_between(before: list[tuple[float, np.ndarray]], after: list[tuple[float, np.ndarray]],
                   *, default: float = REFERENCE_ALBEDO) -> tuple[np.ndarray, np.ndarray]:
    """Albedo of one day and the fill code of each pixel.

    Parameters
    ----------
    before, after : list of (days from the day, albedo array)
        Scene albedos before (days <= 0) and after (days > 0) the day, nearest first [day], [1];
        NaN or outside 0..1 = no valid value.
    default : float, optional
        Albedo where no scene gives a valid value [1].

    Returns
    -------
    albedo, fill : numpy.ndarray
        float32 albedo [1]; uint8 :data:`FILL_INTERPOLATED` / :data:`FILL_HELD` / :data:`FILL_DEFAULT`.
    """
    shape = (before or after)[0][1].shape if (before or after) else None
    lo, hi = PHYSICAL_RANGES["albedo"]

    def nearest(side):
        value = np.full(shape, np.nan)
        when = np.full(shape, np.nan)
        for offset, a in side:
            a = np.asarray(a, dtype=np.float64)
            take = np.isnan(value) & (a >= lo) & (a <= hi)
            value[take] = a[take]
            when[take] = offset
        return value, when

    if shape is None:
        raise ValueError("albedo_between needs at least one scene albedo (else the default applies)")
    e, te = nearest(before)
    l, tl = nearest(after)
    both = ~np.isnan(e) & ~np.isnan(l)
    with np.errstate(invalid="ignore", divide="ignore"):
        frac = np.where(both, -te / (tl - te), 0.0)
    albedo = np.where(both, e + (l - e) * frac, np.where(np.isnan(e), l, e))
    fill = np.where(both, FILL_INTERPOLATED, np.where(np.isnan(albedo), FILL_DEFAULT, FILL_HELD)).astype(np.uint8)
    albedo = np.where(np.isnan(albedo), default, albedo)
    return albedo.astype(np.float32), fill


@dataclass(frozen=True)
class AlbedoBetweenScenes:
    """The source of a day's albedo interpolated between scene albedos (see :func:`albedo_between`)."""
    day: dt.date
    scenes: tuple[tuple[dt.datetime, object], ...]   # (scene time, its albedo source), in time order
    max_gap: float                                   # [day]

    layer = "albedo"

    @property
    def path(self) -> str:
        return "; ".join(getattr(s, "path", "?") for _, s in self.scenes) or "(no scene within max_gap)"

    @property
    def paths(self) -> tuple[str, ...]:
        return tuple(getattr(s, "path", "") for _, s in self.scenes)

    def read_layers(self, grid: TargetGrid, window: Window, memo=None) -> dict[str, np.ndarray]:
        noon = dt.datetime.combine(self.day, dt.time(12), tzinfo=dt.timezone.utc)
        offsets = [((t - noon).total_seconds() / 86400.0, s) for t, s in self.scenes]
        before = sorted(((o, s) for o, s in offsets if o <= 0), key=lambda x: -x[0])
        after = sorted(((o, s) for o, s in offsets if o > 0), key=lambda x: x[0])
        shape = (int(window.height), int(window.width))
        if not before and not after:
            return {"albedo": np.full(shape, REFERENCE_ALBEDO, np.float32),
                    "albedo_fill": np.full(shape, FILL_DEFAULT, np.uint8)}
        albedo, fill = albedo_between([(o, s.read(grid, window, memo)) for o, s in before],
                                      [(o, s.read(grid, window, memo)) for o, s in after])
        return {"albedo": albedo, "albedo_fill": fill}
