"""Stage 5: one PNG map per GeoTIFF product (skipping PNGs newer than their product).

The static terrain layers get one each too (slope, aspect, sky-view factor; not the 36 horizon
files), and with ``methods.terrain`` each scene with a given shortwave gets
``quicklooks/terrain_effect_{stamp}.png``: the horizontal shortwave, the shortwave on the terrain
(``incident_shortwave``) and their difference, side by side on one colour scale.
"""

from __future__ import annotations

from pathlib import Path

from affine import Affine
from rasterio.windows import Window

from ..grid import TargetGrid
from ..io.cog import read_tags
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


def run_quicklooks(plan: Plan, products: list[Path], *, overwrite: bool = False) -> list[Path]:
    """One PNG per GeoTIFF in ``products``."""
    zones = None
    if plan.cfg.zones is not None:
        zones = read_zones(plan.cfg.zones.path, plan.cfg.zones.id, plan.grid)
    (plan.out / "quicklooks").mkdir(parents=True, exist_ok=True)
    written = []
    for path in sorted({p for p in products if p.suffix == ".tif" and not p.stem.startswith("horizon_")}):
        png = plan.out / "quicklooks" / f"{path.stem}.png"
        written.append(png)
        if not _newer(png, path, overwrite):
            write_quicklook(str(path), str(png), zones=zones, **_quicklook_args(path))
    if plan.cfg.methods.terrain != "none":
        written += _terrain_effects(plan, zones, overwrite)
    return written


def _newer(png: Path, path: Path, overwrite: bool) -> bool:
    return not overwrite and png.exists() and png.stat().st_mtime_ns >= path.stat().st_mtime_ns


def _terrain_effects(plan: Plan, zones, overwrite: bool) -> list[Path]:
    """Level ground vs terrain: each scene's given shortwave beside its ``incident_shortwave``."""
    written = []
    for job in plan.jobs:
        path = job.outputs.get("incident_shortwave") if job.kind is TimeKind.SCENES else None
        if path is None or not path.exists() or "shortwave_down" not in job.sources:
            continue
        png = plan.out / "quicklooks" / f"terrain_effect_{job.label}.png"
        written.append(png)
        if _newer(png, path, overwrite):
            continue
        terrain, bounds, crs = read_decimated(path)
        # the horizontal shortwave warped to the same decimated pixels (never the whole grid)
        h, w = terrain.shape
        t = plan.grid.transform
        coarse = TargetGrid(plan.grid.crs, Affine(t.a * plan.grid.width / w, 0.0, t.c, 0.0,
                                                  t.e * plan.grid.height / h, t.f), w, h, chunk=max(h, w))
        src = job.sources["shortwave_down"]
        flat = src.read_layers(coarse, Window(0, 0, w, h))["shortwave_down"]
        when = job.when.strftime("%Y-%m-%d %H:%M UTC")
        write_side_by_side(flat, terrain, png, bounds=bounds, crs=crs, zones=zones, label="shortwave",
                           units="W m-2", title=f"terrain effect on the shortwave, {when} "
                           f"(methods.terrain: {plan.cfg.methods.terrain})",
                           titles=("shortwave_down as given (level ground)",
                                   "incident_shortwave on the terrain's slopes"))
    return written
