"""Stage 4: one CF-NetCDF stack per product and time kind."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

from .._version import __version__
from ..kinds import TimeKind
from ..model.products import product_info
from ..outputs.netcdf import write_stack
from ..planning.plan import Plan
from .products import dated_products

__all__ = ["run_netcdf"]


def run_netcdf(plan: Plan) -> list[Path]:
    written = []
    for kind in TimeKind:
        for name, items in dated_products(plan, kind).items():
            info = product_info(name, kind)
            times = [t if isinstance(t, dt.datetime) else dt.datetime(t.year, t.month, t.day,
                                                                     tzinfo=dt.timezone.utc) for t, _ in items]
            bounds = None
            cell = "time: point"
            if kind is TimeKind.DAYS:
                bounds = [(t, t + dt.timedelta(days=1)) for t in times]
                cell = "time: mean"
            out = plan.out / "netcdf" / f"{name}_{kind}.nc"
            out.parent.mkdir(parents=True, exist_ok=True)
            write_stack([str(p) for _, p in items], times, out, grid=plan.grid, product=info,
                        cell_methods=cell, time_bounds=bounds,
                        flags=info.flags,
                        attrs={"title": plan.cfg.title, "source": f"radledger {__version__}"})
            written.append(out)
    return written
