"""Stage 5: one PNG map per GeoTIFF product (keeping PNGs newer than their product and the zones file).

The static terrain layers get one each too (slope, aspect, sky-view factor; not the 36 horizon
files), and with ``methods.terrain`` each scene with a given shortwave gets
``quicklooks/terrain_effect_{stamp}.png``: the horizontal shortwave, the shortwave on the terrain
(``incident_shortwave``) and their difference, side by side on one colour scale.
"""

from __future__ import annotations

import multiprocessing
import os
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

from affine import Affine
from rasterio.windows import Window

from ..grid import TargetGrid
from ..io.cog import read_tags
from ..io.paths import is_remote
from ..io.vectors import read_zones
from ..kinds import TimeKind
from ..outputs.quicklooks import read_decimated, write_quicklook, write_side_by_side
from ..planning.plan import Plan

__all__ = ["run_quicklooks"]


def _sign(positive: str) -> str | None:
    """What a positive value means for the surface, from a product's ``positive`` tag."""
    if "loss" in positive:
        return "loss"
    if "gain" in positive or "absorbed" in positive:
        return "gain"
    return None


def _flags_of(tags: dict) -> dict[str, int] | None:
    """The bit meanings a flag product states in its own tags (None for other products)."""
    if not tags.get("flag_meanings"):
        return None
    return dict(zip(tags["flag_meanings"].split(), (int(m) for m in tags["flag_masks"].split())))


def _quicklook_args(path: Path) -> dict:
    tags = read_tags(path)
    name = tags.get("quantity", path.stem)
    stat = tags.get("statistic")
    base = name.split()[0]
    when = tags.get("time", "").replace("T", " ").replace("Z", " UTC")
    positive = _sign(tags.get("positive", ""))
    shown = name.replace("_", " ")
    if positive == "loss":   # stored positive = loss (net longwave): say so wherever the number is read
        shown = shown.replace("longwave", "longwave loss") + " (positive = loss)"
    args = dict(units=tags.get("units", ""), label=shown.split(" (")[0] if stat else shown,
                positive=positive, diverging=base in ("net_radiation", "daily_net_radiation", "net_longwave")
                and stat not in ("count", "std"),
                categorical_bits=_flags_of(tags), cyclic=name == "aspect")
    if stat == "count":
        window = when.replace("/", " to ")
        members = int(tags.get("members", "0") or 0)
        return dict(args, title=f"valid dates per pixel, {window} ({members} in the window)",
                    label=None, units="valid dates", counts=members, positive=None)
    title = f"{shown}  {when}".strip()
    if tags.get("time_kind") == "days" and tags.get("daily_total"):
        title += f" ({tags['daily_total']})"
    if tags.get("time_kind") == "scenes" and "shortwave_down=" not in tags.get("inputs", ""):
        title += " (clear-sky shortwave modelled)"
    return dict(args, title=title)


def run_quicklooks(plan: Plan, products: list[Path], *, overwrite: bool = False) -> tuple[list[Path], list[Path]]:
    """One PNG per GeoTIFF in ``products``; (written, kept): a PNG newer than its product (and
    than the zones file whose outlines it draws) is kept."""
    zones_file = plan.cfg.zones.path if plan.cfg.zones is not None else None
    zones = _Zones(plan)
    (plan.out / "quicklooks").mkdir(parents=True, exist_ok=True)
    written, kept, todo = [], [], []
    for path in sorted({p for p in products if p.suffix == ".tif" and not p.stem.startswith("horizon_")}):
        png = plan.out / "quicklooks" / f"{path.stem}.png"
        if _current(png, (path, zones_file), overwrite):
            kept.append(png)
            continue
        todo.append((str(path), str(png)))
    _draw_all(todo, zones.get() if todo else None)
    written += [Path(png) for _, png in todo]
    if plan.cfg.methods.terrain != "none":
        w, k = _terrain_effects(plan, zones, zones_file, overwrite)
        written += w
        kept += k
    return written, kept


#: quicklooks drawn by one process before the rest are shared with worker processes (each worker
#: costs ~0.5 s to start: matplotlib's import)
PARALLEL_FROM = 12


def _draw_one(tif: str, png: str, zones) -> None:
    write_quicklook(tif, png, zones=zones, **_quicklook_args(Path(tif)))


def _draw_all(todo: list[tuple[str, str]], zones) -> None:
    """Draw every (product, PNG) pair; many of them on every core.

    Matplotlib draws under Python's global lock, so threads would not help: a season's PNGs go to
    worker processes (started by a fork server, not forked from this process and its threads).
    """
    workers = min(os.cpu_count() or 1, 4, len(todo) // (PARALLEL_FROM // 2) or 1)
    if len(todo) < PARALLEL_FROM or workers < 2:
        for tif, png in todo:
            _draw_one(tif, png, zones)
        return
    context = multiprocessing.get_context("forkserver" if "forkserver" in multiprocessing.get_all_start_methods()
                                          else "spawn")
    with ProcessPoolExecutor(max_workers=workers, mp_context=context) as pool:
        futures = [pool.submit(_draw_one, tif, png, zones) for tif, png in todo]
        try:
            for f in futures:
                f.result()
        except BaseException:
            for f in futures:
                f.cancel()
            raise


class _Zones:
    """The zones to outline, read on first use (an unchanged rerun reads nothing)."""

    def __init__(self, plan: Plan):
        self.plan = plan
        self.zones = None

    def get(self):
        z = self.plan.cfg.zones
        if z is not None and self.zones is None:
            self.zones = read_zones(z.path, z.id, self.plan.grid)
        return self.zones


def _current(png: Path, sources, overwrite: bool) -> bool:
    """The PNG exists and is newer than each local source file (remote zones: by the product only)."""
    if overwrite or not png.exists():
        return False
    made = png.stat().st_mtime_ns
    for src in sources:
        if src is None or is_remote(str(src)):
            continue
        try:
            if Path(src).stat().st_mtime_ns > made:
                return False
        except OSError:
            continue
    return True


def _terrain_effects(plan: Plan, zones: _Zones, zones_file, overwrite: bool) -> tuple[list[Path], list[Path]]:
    """Level ground vs terrain: each scene's given shortwave beside its ``incident_shortwave``."""
    written, kept = [], []
    for job in plan.jobs:
        path = job.outputs.get("incident_shortwave") if job.kind is TimeKind.SCENES else None
        if path is None or not path.exists() or "shortwave_down" not in job.sources:
            continue
        png = plan.out / "quicklooks" / f"terrain_effect_{job.label}.png"
        if _current(png, (path, zones_file), overwrite):
            kept.append(png)
            continue
        written.append(png)
        terrain, bounds, crs = read_decimated(path)
        # the horizontal shortwave warped to the same decimated pixels (never the whole grid)
        h, w = terrain.shape
        t = plan.grid.transform
        coarse = TargetGrid(plan.grid.crs, Affine(t.a * plan.grid.width / w, 0.0, t.c, 0.0,
                                                  t.e * plan.grid.height / h, t.f), w, h, chunk=max(h, w))
        src = job.sources["shortwave_down"]
        flat = src.read_layers(coarse, Window(0, 0, w, h))["shortwave_down"]
        when = job.when.strftime("%Y-%m-%d %H:%M UTC")
        write_side_by_side(flat, terrain, png, bounds=bounds, crs=crs, zones=zones.get(), label="shortwave",
                           units="W m-2", title=f"terrain effect on the shortwave, {when} "
                           f"(methods.terrain: {plan.cfg.methods.terrain})",
                           titles=("shortwave_down as given (level ground)",
                                   "incident_shortwave on the terrain's slopes"))
    return written, kept
