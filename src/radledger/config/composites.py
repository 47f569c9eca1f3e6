"""Validation of ``composites:``: date windows (start/end or season + year) and statistics."""

from __future__ import annotations

from ..model.products import COMPOSITE_STATISTICS
from .entries import entries
from .schema import CompositeSpec
from .seasons import SEASONS, season_window

__all__ = ["composites", "COMPOSITE_KEYS"]

#: the YAML keys of a composite (``from`` is CompositeSpec.source; season + year give start/end)
COMPOSITE_KEYS = ("name", "from", "start", "end", "season", "year", "statistics", "min_count")


def composites(v, value, scenes, days) -> list[CompositeSpec]:
    out, names = [], set()
    for i, entry in enumerate(entries(v, value, "composites")):
        key = f"composites[{i}]"
        entry = v.mapping(entry, key, COMPOSITE_KEYS)
        name = entry.get("name")
        if not isinstance(name, str) or not name.strip() or any(c in name for c in "/\\:*?\"<>| "):
            v.fail(f"{key}.name", f"{name!r} must be a short name usable in a file name (no spaces or /)")
            name = None
        elif name in names:
            v.fail(f"{key}.name", f"{name!r} is used twice")
        names.add(name)
        source = v.choice(entry.get("from"), f"{key}.from", ("days", "scenes"), "days")
        start = end = None
        if "season" in entry:
            season = v.choice(entry.get("season"), f"{key}.season", tuple(SEASONS), None)
            year = v.number(entry.get("year"), f"{key}.year", integer=True)
            if year is None:
                v.fail(f"{key}.year", "missing; a season needs the year (DJF runs Dec of year-1 to Feb)")
            if "start" in entry or "end" in entry:
                v.fail(key, "give season/year or start/end, not both")
            if season and year:
                start, end = season_window(season, year)
        else:
            for k in ("start", "end"):
                if k not in entry:
                    v.fail(f"{key}.{k}", "missing; give start and end dates (inclusive) or season and year")
            start = v.date(entry["start"], f"{key}.start") if "start" in entry else None
            end = v.date(entry["end"], f"{key}.end") if "end" in entry else None
            if start and end and end < start:
                v.fail(f"{key}.end", f"{end} is before start {start}")
        stats = entry.get("statistics", list(CompositeSpec.statistics))
        if isinstance(stats, str):
            stats = [stats]
        if not isinstance(stats, list) or not stats:
            v.fail(f"{key}.statistics", f"must be a list of: {', '.join(COMPOSITE_STATISTICS)}")
            stats = []
        stats = [v.choice(s, f"{key}.statistics", COMPOSITE_STATISTICS, None) for s in stats]
        stats = tuple(dict.fromkeys(s for s in stats if s))
        if "total" in stats and source != "days":
            v.fail(f"{key}.statistics", "total is defined for composites from days only "
                                           "(mean x days in the window, MJ m-2)")
        min_count = v.number(entry.get("min_count"), f"{key}.min_count", integer=True,
                                default=CompositeSpec.min_count)
        if min_count is not None and min_count < 0:
            v.fail(f"{key}.min_count", "must be 0 or more")
        if source == "days" and not days:
            v.fail(f"{key}.from", "composite from days, but the config lists no days")
        if source == "scenes" and not scenes:
            v.fail(f"{key}.from", "composite from scenes, but the config lists no scenes")
        if name and start and end:
            out.append(CompositeSpec(name=name, source=source, start=start, end=end, statistics=stats,
                                     min_count=min_count or 0, key=key))
    return out
