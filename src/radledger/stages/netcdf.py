"""Stage 4: one CF-NetCDF stack per product (``output.netcdf``) and time kind.

A stack is kept on a rerun when it holds the same dates of the same products: its global
attribute ``settings_hash`` is the hash of each member's time and ``settings_hash`` tag, the
grid and the stack's layout.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

from .._version import __version__
from ..io.cog import read_tags
from ..kinds import TimeKind
from ..model.products import product_info
from ..outputs.netcdf import COMPRESSION, read_stack_hash, write_stack
from ..planning.plan import Plan
from ..planning.provenance import settings_hash
from .products import dated_products

__all__ = ["run_netcdf"]


def run_netcdf(plan: Plan, *, overwrite: bool = False) -> tuple[list[Path], list[Path]]:
    """The stacks that are not current; (written, kept) paths."""
    written, kept = [], []
    for kind in TimeKind:
        for name, items in dated_products(plan, kind).items():
            if name not in plan.cfg.output.netcdf:
                continue
            info = product_info(name, kind)
            out = plan.out / "netcdf" / f"{name}_{kind}.nc"
            key = settings_hash("netcdf stack", plan.grid.identity, plan.cfg.title, COMPRESSION,
                                [(str(t), read_tags(p).get("settings_hash")) for t, p in items])
            if not overwrite and out.exists() and read_stack_hash(out) == key:
                kept.append(out)
                continue
            times = [t if isinstance(t, dt.datetime) else dt.datetime(t.year, t.month, t.day,
                                                                     tzinfo=dt.timezone.utc) for t, _ in items]
            bounds = None
            cell = "time: point"
            if kind is TimeKind.DAYS:
                bounds = [(t, t + dt.timedelta(days=1)) for t in times]
                cell = "time: mean"
            out.parent.mkdir(parents=True, exist_ok=True)
            write_stack([str(p) for _, p in items], times, out, grid=plan.grid, product=info,
                        cell_methods=cell, time_bounds=bounds, flags=info.flags,
                        attrs={"title": plan.cfg.title, "source": f"radledger {__version__}",
                               "settings_hash": key})
            written.append(out)
    return written, kept
