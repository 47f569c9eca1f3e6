"""Plots of the validation pairs: a scatter per product kind and a time series per station.

Drawn on private :class:`matplotlib.figure.Figure` objects with the Agg canvas (no pyplot, no global
state) and written whole or not at all.
"""

from __future__ import annotations

import datetime as dt
import math
import re
from pathlib import Path

import numpy as np
from matplotlib import colormaps
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.dates import AutoDateLocator, ConciseDateFormatter
from matplotlib.figure import Figure

from .._version import __version__
from ..io.atomic import atomic_output
from ..stations.agreement import Agreement
from .validation import Pair

__all__ = ["write_scatter", "write_timeseries", "station_file_stem", "UNITS"]

UNITS = {"scenes": "W m-2", "days": "MJ m-2 day-1"}
_WHAT = {"scenes": "instantaneous net radiation at the scene times", "days": "daily net radiation (FAO-56)"}
DPI = 100


def station_file_stem(station: str) -> str:
    """A station name as a file-name part: letters, digits, '.', '-' and '_' kept, anything else '_'."""
    return re.sub(r"[^A-Za-z0-9._-]+", "_", station).strip("_") or "station"


def _save(fig: Figure, path: str | Path) -> Path:
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    with atomic_output(path) as tmp:
        fig.savefig(tmp, format="png", dpi=DPI, metadata={"Software": f"radledger {__version__}"})
    return path


def _stats_text(s: Agreement, units: str) -> str:
    def f(v, digits=3):
        return "n/a" if v is None or (isinstance(v, float) and math.isnan(v)) else f"{v:.{digits}g}"
    return (f"n = {s.n}\nbias = {f(s.bias)} {units}\nMAE = {f(s.mae)} {units}\nRMSE = {f(s.rmse)} {units}\n"
            f"r$^2$ = {f(s.r2)}\nslope = {f(s.slope)}\nintercept = {f(s.intercept)} {units}")


def write_scatter(pairs: list[Pair], stats: Agreement, kind: str, path: str | Path) -> Path:
    """Modelled (pixel holding the station) against observed, one colour per station, with the 1:1 line,
    the least-squares line and the statistics of all stations."""
    units = UNITS[kind]
    fig = Figure(figsize=(7.0, 6.5), dpi=DPI)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    stations = sorted({p.station for p in pairs})
    colours = colormaps["tab10"].colors
    for k, station in enumerate(stations):
        mine = [p for p in pairs if p.station == station]
        ax.scatter([p.observed for p in mine], [p.modelled for p in mine], s=36, color=colours[k % 10],
                   edgecolor="black", linewidth=0.4, label=station, zorder=3)
    values = np.array([v for p in pairs for v in (p.observed, p.modelled)], dtype=float)
    values = values[np.isfinite(values)]
    lo, hi = (float(values.min()), float(values.max())) if values.size else (0.0, 1.0)
    pad = 0.05 * (hi - lo or abs(hi) or 1.0)
    lo, hi = lo - pad, hi + pad
    ax.plot([lo, hi], [lo, hi], color="0.35", linestyle="--", linewidth=1.0, label="1:1", zorder=2)
    if np.isfinite(stats.slope):
        line = f"least squares: modelled = {stats.slope:.3g} observed {stats.intercept:+.3g}"
        ax.plot([lo, hi], [stats.slope * lo + stats.intercept, stats.slope * hi + stats.intercept], color="crimson",
                linewidth=1.4, label=line, zorder=2)
    ax.set_xlim(lo, hi)
    ax.set_ylim(lo, hi)
    ax.set_aspect("equal", adjustable="box")
    ax.grid(True, color="0.9", zorder=0)
    ax.set_xlabel(f"observed (net radiometer) [{units}]")
    ax.set_ylabel(f"modelled, pixel holding the station [{units}]")
    ax.set_title(f"{_WHAT[kind]}: modelled vs observed", fontsize=11)
    ax.text(0.03, 0.97, _stats_text(stats, units), transform=ax.transAxes, va="top", ha="left", fontsize=9,
            bbox=dict(boxstyle="round", facecolor="white", edgecolor="0.7", alpha=0.9), zorder=4)
    ax.legend(loc="lower right", fontsize=8, framealpha=0.9)
    fig.tight_layout()
    return _save(fig, path)


def _when(p: Pair) -> dt.datetime:
    if p.time:
        return dt.datetime.strptime(p.time, "%Y-%m-%dT%H:%M:%SZ")
    return dt.datetime.strptime(p.date, "%Y-%m-%d")


def write_timeseries(pairs: list[Pair], station: str, path: str | Path) -> Path:
    """Observed and modelled (pixel and 3 x 3 mean) over time at one station, one panel per product kind."""
    kinds = [k for k in ("scenes", "days") if any(p.kind == k for p in pairs)]
    fig = Figure(figsize=(8.0, 3.2 * len(kinds) + 0.6), dpi=DPI)
    FigureCanvasAgg(fig)
    for i, kind in enumerate(kinds):
        ax = fig.add_subplot(len(kinds), 1, i + 1)
        mine = sorted((p for p in pairs if p.kind == kind), key=_when)
        t = [_when(p) for p in mine]
        ax.plot(t, [p.observed for p in mine], "o-", color="black", markersize=5, linewidth=1, label="observed")
        ax.plot(t, [p.modelled for p in mine], "s--", color="crimson", markersize=5, linewidth=1,
                label="modelled (pixel)")
        ax.plot(t, [p.modelled_3x3 for p in mine], "^:", color="royalblue", markersize=4, linewidth=1,
                markerfacecolor="none", label="modelled (3 x 3 mean)")
        ax.set_ylabel(f"net radiation [{UNITS[kind]}]")
        ax.set_title(f"{station}: {_WHAT[kind]}", fontsize=10)
        ax.grid(True, color="0.9")
        ax.legend(fontsize=8, loc="best")
        locator = AutoDateLocator()
        ax.xaxis.set_major_locator(locator)
        ax.xaxis.set_major_formatter(ConciseDateFormatter(locator))
    fig.tight_layout()
    return _save(fig, path)
