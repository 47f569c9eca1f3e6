"""The meteorological seasons a composite may name (``season: JJA`` + ``year``)."""

from __future__ import annotations

import calendar
from datetime import date

__all__ = ["SEASONS", "season_window"]

# season name -> (first month, last month); DJF starts in December of the previous year
SEASONS = {"DJF": (12, 2), "MAM": (3, 5), "JJA": (6, 8), "SON": (9, 11)}


def season_window(name: str, year: int) -> tuple[date, date]:
    """First and last day (inclusive) of a meteorological season.

    Parameters
    ----------
    name : str
        ``"DJF"``, ``"MAM"``, ``"JJA"`` or ``"SON"`` (case-insensitive).
    year : int
        Calendar year the season ends in [year]; DJF of 2026 runs
        2025-12-01 .. 2026-02-28.
    """
    key = str(name).upper()
    if key not in SEASONS:
        raise ValueError(f"unknown season {name!r}; valid: {', '.join(SEASONS)}")
    first, last = SEASONS[key]
    start = date(year - 1 if first > last else year, first, 1)
    return start, date(year, last, calendar.monthrange(year, last)[1])
