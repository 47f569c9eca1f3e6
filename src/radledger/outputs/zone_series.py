"""A season's zone summaries as one long table per product: one row per date (or time) and zone.

``zones/{product}_{scenes|days}.csv``: the first column is ``date`` (days, ``YYYY-MM-DD``) or
``time`` (scenes, UTC ``YYYY-MM-DDTHH:MMZ``), then the zone id column, the statistics of the
per-date tables (:data:`radledger.outputs.zones.ZONE_COLUMNS`) and ``units``.  Rows are in time
order, zones in file order within a date: the layout pandas, R or a spreadsheet pivots directly
(``pd.read_csv(...).pivot(index="date", columns="basin", values="mean")``).

The rows are copied from the per-date tables as written (same numbers, same formatting), so the
two never disagree.
"""

from __future__ import annotations

import csv
import datetime as dt
import os
from pathlib import Path
from typing import Sequence

from ..io.atomic import atomic_output
from .zones import ZONE_COLUMNS

__all__ = ["write_zone_series", "series_stamp"]


def series_stamp(when) -> str:
    """``YYYY-MM-DD`` for a date, ``YYYY-MM-DDTHH:MMZ`` for a scene time (UTC)."""
    if isinstance(when, dt.datetime):
        if when.tzinfo is not None:
            when = when.astimezone(dt.timezone.utc)
        return when.strftime("%Y-%m-%dT%H:%MZ")
    return when.isoformat()


def write_zone_series(members: Sequence[tuple[object, str | os.PathLike]], path: str | os.PathLike,
                      id_field: str, units: str) -> Path:
    """Concatenate per-date zone tables into one long table (atomic write).

    ``members``: (date or time, per-date table) pairs in any order; each table has the columns
    ``id_field`` and :data:`ZONE_COLUMNS` as :func:`radledger.outputs.zones.write_zone_csv` writes.
    """
    first = "time" if any(isinstance(w, dt.datetime) for w, _ in members) else "date"
    ordered = sorted(members, key=lambda m: series_stamp(m[0]))
    with atomic_output(path) as tmp:
        with open(tmp, "w", newline="", encoding="utf-8") as out:
            writer = csv.writer(out)
            writer.writerow([first, id_field, *ZONE_COLUMNS, "units"])
            for when, table in ordered:
                stamp = series_stamp(when)
                with open(table, newline="", encoding="utf-8") as fh:
                    reader = csv.reader(fh)
                    header = next(reader)
                    order = [header.index(c) for c in (id_field, *ZONE_COLUMNS)]
                    for row in reader:
                        writer.writerow([stamp, *(row[k] for k in order), units])
    return Path(path)
