"""The dates of a ``days:`` entry and the times of a ``scenes:`` entry.

``date: 2026-07-14`` or ``dates: {start, end, every}`` (inclusive, every N days); ``time: ...``,
``times: [t1, t2, ...]`` or ``times: discover`` (parsed from the files matching the entry's first
template).  Times are UTC.
"""

from __future__ import annotations

import datetime as dt
import glob
import os

from .inputs import template_regex

__all__ = ["entry_dates", "entry_times", "MAX_DATES"]

MAX_DATES = 100_000   # a century of days: far more than any season or water year


def entry_dates(v, entry: dict, key: str) -> list[dt.date]:
    """The dates a ``days:`` entry covers (problems go to ``v``)."""
    if "date" not in entry and "dates" not in entry:
        v.fail(f"{key}.date", "missing; give the date, e.g. 2026-07-14, or a range dates: {start, end}")
        return []
    if "date" in entry and "dates" in entry:
        v.fail(f"{key}.date", "give date: (one day) or dates: (a range), not both")
        return []
    if "date" in entry:
        d = v.date(entry["date"], f"{key}.date")
        return [d] if d else []
    spec = v.mapping(entry["dates"], f"{key}.dates", ("start", "end", "every"))
    if not spec:
        v.fail(f"{key}.dates", "give start and end (inclusive), e.g. {start: 2026-06-01, end: 2026-08-31}")
        return []
    missing = [k for k in ("start", "end") if k not in spec]
    for k in missing:
        v.fail(f"{key}.dates.{k}", "missing; a range needs start and end (inclusive)")
    if missing:
        return []
    start = v.date(spec["start"], f"{key}.dates.start")
    end = v.date(spec["end"], f"{key}.dates.end")
    every = v.number(spec.get("every"), f"{key}.dates.every", positive=True, integer=True, default=1)
    if not (start and end and every):
        return []
    if end < start:
        v.fail(f"{key}.dates.end", f"{end} is before start {start}")
        return []
    n = (end - start).days // every + 1
    if n > MAX_DATES:
        v.fail(f"{key}.dates", f"{n} dates is more than {MAX_DATES}; split the range")
        return []
    return [start + dt.timedelta(days=i * every) for i in range(n)]


def entry_times(v, entry: dict, key: str, templates: list[str]) -> list[dt.datetime]:
    """The UTC times a ``scenes:`` entry covers; ``templates``: its inputs' paths with ``{time:...}``."""
    if "time" not in entry and "times" not in entry:
        v.fail(f"{key}.time", "missing; give the scene time in UTC, e.g. 2026-07-14T18:10:00Z (or times: a list, "
                              "or times: discover)")
        return []
    if "time" in entry and "times" in entry:
        v.fail(f"{key}.time", "give time: (one scene) or times: (several), not both")
        return []
    if "time" in entry:
        t = v.time(entry["time"], f"{key}.time")
        return [t] if t else []
    times = entry["times"]
    if times == "discover":
        return _discover(v, key, templates)
    if not isinstance(times, list) or not times:
        v.fail(f"{key}.times", "must be a list of UTC times or the word discover")
        return []
    out = [v.time(t, f"{key}.times[{i}]") for i, t in enumerate(times)]
    return [t for t in out if t]


def _discover(v, key: str, templates: list[str]) -> list[dt.datetime]:
    if not templates:
        v.fail(f"{key}.times", "discover needs an input given as a template with {time:FORMAT}, e.g. "
                               "sat/albedo_{time:%Y%m%dT%H%M}.tif")
        return []
    template = templates[0]
    if v.url or "://" in template or template.startswith("/vsi"):
        v.fail(f"{key}.times", f"discover lists local files; {template} is remote - list the times instead")
        return []
    try:
        regex, formats = template_regex(template, "time")
    except ValueError as exc:
        v.fail(f"{key}.times", f"cannot discover times from {template}: {exc}")
        return []
    pattern = template
    for literal_free in ("{time:", "{time}"):
        while literal_free in pattern:
            i = pattern.index(literal_free)
            j = pattern.index("}", i)
            pattern = pattern[:i] + "*" + pattern[j + 1:]
    found = []
    for path in sorted(glob.glob(pattern)):
        m = regex.match(path)
        if not m:
            continue
        try:
            values = [dt.datetime.strptime(g, f) for g, f in zip(m.groups(), formats)]
        except ValueError:
            continue
        if len(set(values)) != 1:
            continue   # one file name holding two different times: not a match
        found.append(values[0].replace(tzinfo=dt.timezone.utc))
    if not found:
        v.fail(f"{key}.times", f"discover found no file matching {template} (folder "
                               f"{os.path.dirname(template) or '.'}); check the template")
    return sorted(set(found))
