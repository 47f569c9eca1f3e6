"""Stage 5: one PNG map per GeoTIFF product (skipping PNGs newer than their product)."""

from __future__ import annotations

from pathlib import Path

from ..io.cog import read_tags
from ..io.vectors import read_zones
from ..outputs.quicklooks import write_quicklook
from ..planning.plan import Plan

__all__ = ["run_quicklooks"]


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
    title = f"{name.replace('_', ' ')}  {when}".strip()
    if tags.get("time_kind") == "days" and tags.get("daily_total"):
        title += f" ({tags['daily_total']})"
    if tags.get("time_kind") == "scenes" and "shortwave_down=" not in tags.get("inputs", ""):
        title += " (clear-sky shortwave modelled)"
    return dict(title=title, units=tags.get("units", ""),
                diverging=base in ("net_radiation", "net_longwave") and stat not in ("count", "std"),
                categorical_bits=_flags_of(tags))


def run_quicklooks(plan: Plan, products: list[Path], *, overwrite: bool = False) -> list[Path]:
    """One PNG per GeoTIFF in ``products``."""
    zones = None
    if plan.cfg.zones is not None:
        zones = read_zones(plan.cfg.zones.path, plan.cfg.zones.id, plan.grid)
    (plan.out / "quicklooks").mkdir(parents=True, exist_ok=True)
    written = []
    for path in sorted({p for p in products if p.suffix == ".tif"}):
        png = plan.out / "quicklooks" / f"{path.stem}.png"
        written.append(png)
        if not overwrite and png.exists() and png.stat().st_mtime_ns >= path.stat().st_mtime_ns:
            continue
        write_quicklook(str(path), str(png), zones=zones, **_quicklook_args(path))
    return written
