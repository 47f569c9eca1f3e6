"""Station tables (CSV): weather stations for gridding, net radiometers for validation.

Format (a header row, then one row per station and date or time; ``#`` starts a comment line)::

    station,lon,lat,elevation,date,tmax_c,tmin_c
    ridge,-119.42,38.61,2890,2026-07-14,21.5,8.0
    tower-a,-119.20,38.55,1620,2026-07-14T18:20:00Z,...

* ``station``, ``lon``, ``lat`` (in the table's CRS), and for weather tables ``elevation`` [m];
* ``date`` (YYYY-MM-DD: a daily value) and/or ``time`` (UTC, ISO 8601; a time without zone is UTC;
  a time of day such as ``18:20`` takes its row's ``date``): a row with a time is an instantaneous
  record, a row with only a date a daily one;
* value columns: empty, ``nan``, ``NA`` or ``null`` = missing (that station drops out of that date).

Every problem is an :class:`InputError` of one line naming the file and the line (row) and what to
change: a missing column, an unparseable date or number, a station outside the area where the grid's
CRS is defined, a station listed twice for one date or time.
"""

from __future__ import annotations

import csv
import datetime as dt
import difflib
import math
import os
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from .paths import fetch_text, is_url

__all__ = ["StationTable", "read_station_table", "MISSING_TEXT", "CRS_MARGIN_DEG"]

MISSING_TEXT = ("", "nan", "na", "n/a", "null", "none")
#: a station may lie this far outside the area of use of the grid's CRS (degrees) before it is refused
CRS_MARGIN_DEG = 2.0


@dataclass(frozen=True)
class StationTable:
    """A station table read and checked; one entry per row, coordinates in the grid's CRS."""
    path: str
    line: np.ndarray                   # the file line of each row (1 = the header's line)
    station: tuple[str, ...]
    lon: np.ndarray                    # as given, in the table's CRS
    lat: np.ndarray
    x: np.ndarray                      # in the grid's CRS
    y: np.ndarray
    elevation: np.ndarray | None       # [m]; None when the table has no elevation column
    date: tuple[dt.date, ...]          # every row's date (a timed row: its UTC date)
    time: tuple[dt.datetime | None, ...]   # UTC; None on daily rows
    values: dict[str, np.ndarray] = field(default_factory=dict)   # column -> float values, NaN = missing
    index: dict = field(default_factory=dict, repr=False)           # date or minute -> its row indices

    def __len__(self) -> int:
        return len(self.station)

    def rows_on(self, when) -> np.ndarray:
        """Indices of the daily rows of ``when`` (a date) or the rows at ``when`` (a UTC time, to the minute)."""
        key = _minute(when) if isinstance(when, dt.datetime) else when
        return np.array(self.index.get(key, ()), dtype=int)

    def kinds(self) -> set[str]:
        """``days`` when the table has daily rows, ``scenes`` when it has timed rows."""
        return ({"scenes"} if any(t is not None for t in self.time) else set()) | \
               ({"days"} if any(t is None for t in self.time) else set())


def _minute(t: dt.datetime) -> str:
    return t.strftime("%Y-%m-%dT%H:%M")


def _lines(path: str) -> list[str]:
    if is_url(path):
        return fetch_text(path, what="station table").lstrip("\ufeff").splitlines()
    try:
        with open(path, encoding="utf-8-sig", newline="") as handle:
            return handle.read().splitlines()
    except FileNotFoundError:
        raise InputError(f"{path}: file not found; check the path in the config") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: cannot be read as a UTF-8 CSV table ({exc})") from None


def _rows(lines):
    for number, line in enumerate(lines, start=1):
        stripped = line.strip()
        if stripped and not stripped.startswith("#"):
            yield number, [f.strip() for f in next(csv.reader([line]))]


def _utc(t: dt.datetime) -> dt.datetime:
    if t.tzinfo is None:
        return t.replace(tzinfo=dt.timezone.utc)
    return t.astimezone(dt.timezone.utc)


def _parse_date(text: str) -> dt.date:
    return dt.date.fromisoformat(text)


def _parse_time(text: str, day: dt.date | None) -> dt.datetime:
    s = text.strip()
    if s.endswith(("Z", "z")):
        s = s[:-1] + "+00:00"
    if "T" not in s and " " not in s.strip() and ":" in s and "-" not in s[:3]:
        if day is None:
            raise ValueError("a time of day needs the row's date")
        return _utc(dt.datetime.combine(day, dt.time.fromisoformat(s)))
    return _utc(dt.datetime.fromisoformat(s))


class _Reader:
    """Parses one table, raising on its first problem with the line named."""

    def __init__(self, path: str, what: str):
        self.path, self.what = str(path), what

    def fail(self, number, text: str) -> InputError:
        where = f"line {number}: " if number else ""
        return InputError(f"{self.path}: {where}{text}")

    def header(self, fields, number, required, values, *, needs_elevation: bool) -> dict[str, int]:
        names = {name: i for i, name in enumerate(fields)}
        lower = {name.lower(): i for name, i in names.items()}
        index = {}
        for need in required + (("elevation",) if needs_elevation else ()):
            if need not in lower:
                hint = difflib.get_close_matches(need, list(lower), n=1)
                tip = f" (did you mean '{hint[0]}'?)" if hint else ""
                raise self.fail(number, f"the {self.what} has no column '{need}'{tip}; its columns are "
                                        f"{', '.join(fields)}")
            index[need] = lower[need]
        for opt in ("date", "time") + (() if needs_elevation else ("elevation",)):
            if opt in lower:
                index[opt] = lower[opt]
        if "date" not in index and "time" not in index:
            raise self.fail(number, f"the {self.what} needs a 'date' column (daily values) or a 'time' column "
                                    f"(UTC); its columns are {', '.join(fields)}")
        for column, key in values.items():
            if column not in names:
                hint = difflib.get_close_matches(column, list(names), n=1)
                tip = f" (did you mean '{hint[0]}'?)" if hint else ""
                raise self.fail(number, f"unknown column '{column}' ({key}){tip}; the {self.what}'s columns are "
                                        f"{', '.join(fields)}")
            index[column] = names[column]
        return index

    def number(self, text: str, number: int, column: str, station: str, *, missing_ok: bool) -> float:
        if text.lower() in MISSING_TEXT:
            if missing_ok:
                return math.nan
            raise self.fail(number, f"station '{station}' has no {column}; give every row its {column}")
        try:
            value = float(text)
        except ValueError:
            raise self.fail(number, f"{column} {text!r} of station '{station}' is not a number") from None
        if not math.isfinite(value):
            if missing_ok and math.isnan(value):
                return value
            raise self.fail(number, f"{column} {text!r} of station '{station}' is not a finite number")
        return value

    def when(self, fields, index, number, station) -> tuple[dt.date, dt.datetime | None]:
        date_text = fields[index["date"]] if "date" in index else ""
        time_text = fields[index["time"]] if "time" in index else ""
        day = None
        if date_text:
            try:
                day = _parse_date(date_text)
            except ValueError:
                raise self.fail(number, f"date {date_text!r} of station '{station}' is not a date; write "
                                        f"YYYY-MM-DD (e.g. 2026-07-14)") from None
        if not time_text:
            if day is None:
                raise self.fail(number, f"station '{station}' has neither a date nor a time")
            return day, None
        try:
            t = _parse_time(time_text, day)
        except ValueError:
            raise self.fail(number, f"time {time_text!r} of station '{station}' is not a UTC time; write "
                                    f"YYYY-MM-DDTHH:MM:SSZ (e.g. 2026-07-14T18:20:00Z), or HH:MM with a date "
                                    f"column") from None
        if day is not None and t.date() != day:
            raise self.fail(number, f"time {time_text!r} of station '{station}' falls on {t.date()} (UTC), not "
                                    f"on its date {day}; fix one of them")
        return t.date(), t


def read_station_table(path: str | os.PathLike, *, crs: str, grid_crs, values: dict[str, str],
                       needs_elevation: bool = True, what: str = "station table") -> StationTable:
    """Read and check a station table.

    Parameters
    ----------
    path : str or path-like
        CSV file or http(s) URL.
    crs : str
        CRS of the ``lon``/``lat`` columns (e.g. ``EPSG:4326``).
    grid_crs : CRS or str
        The target grid's CRS: coordinates are transformed to it, and a station outside the area
        where it is defined is refused (a likely sign error, swapped columns or wrong ``crs``).
    values : dict
        ``{column: what it holds}`` of the value columns to read (the text names it in messages).
    needs_elevation : bool
        Whether the table must have an ``elevation`` column [m].
    what : str
        What the table is, for messages.

    Raises
    ------
    InputError
        On the first problem, naming the file and line.
    """
    path = str(path)
    reader = _Reader(path, what)
    lines = _lines(path)
    index = None
    header_line = 0
    rows, numbers = [], []
    for number, fields in _rows(lines):
        if index is None:
            index = reader.header(fields, number, ("station", "lon", "lat"), values,
                                  needs_elevation=needs_elevation)
            header_line, width = number, len(fields)
            continue
        if len(fields) != width:
            raise reader.fail(number, f"{len(fields)} fields where the header has {width}; quote a value that "
                                      f"contains a comma")
        rows.append(fields)
        numbers.append(number)
    if index is None:
        raise reader.fail(None, f"the {what} is empty; it needs a header (station, lon, lat, ...) and rows")
    if not rows:
        raise reader.fail(header_line, f"the {what} has a header but no rows")

    station, when, lon, lat, elev = [], [], [], [], []
    out = {column: np.full(len(rows), np.nan) for column in values}
    seen: dict[tuple, int] = {}
    for k, (fields, number) in enumerate(zip(rows, numbers)):
        name = fields[index["station"]]
        if not name:
            raise reader.fail(number, "the station column is empty; name every station")
        day, t = reader.when(fields, index, number, name)
        key = (name, _minute(t) if t is not None else day)
        if key in seen:
            at = f"time {_minute(t)}Z" if t is not None else f"date {day}"
            raise reader.fail(number, f"station '{name}' on {at} repeats line {seen[key]}; keep one row per "
                                      f"station and {'time' if t is not None else 'date'}")
        seen[key] = number
        lon.append(reader.number(fields[index["lon"]], number, "lon", name, missing_ok=False))
        lat.append(reader.number(fields[index["lat"]], number, "lat", name, missing_ok=False))
        if "elevation" in index:
            elev.append(reader.number(fields[index["elevation"]], number, "elevation", name,
                                      missing_ok=not needs_elevation))
        for column in values:
            out[column][k] = reader.number(fields[index[column]], number, column, name, missing_ok=True)
        station.append(name)
        when.append((day, t))
    lon_a, lat_a = np.array(lon), np.array(lat)
    x, y = _to_grid(reader, numbers, station, lon_a, lat_a, crs, grid_crs)
    index: dict = {}
    for k, (day, t) in enumerate(when):
        index.setdefault(_minute(t) if t is not None else day, []).append(k)
    return StationTable(path=path, line=np.array(numbers), station=tuple(station), lon=lon_a, lat=lat_a, x=x, y=y,
                        elevation=np.array(elev) if elev else None, date=tuple(d for d, _ in when),
                        time=tuple(t for _, t in when), values=out, index=index)


def _to_grid(reader: _Reader, numbers, station, lon, lat, crs, grid_crs):
    """The stations in the grid's CRS; the first one outside the area where that CRS is defined raises."""
    from pyproj import CRS, Transformer

    src, dst = CRS.from_user_input(crs), CRS.from_user_input(grid_crs)
    if src.is_geographic:
        bad = np.flatnonzero((np.abs(lat) > 90) | (lon < -180) | (lon > 360))
        if bad.size:
            k = bad[0]
            raise reader.fail(numbers[k], f"station '{station[k]}' at lon {lon[k]:g}, lat {lat[k]:g} is not a "
                                          f"longitude/latitude in {crs}; check the columns and the table's crs")
        glon, glat = lon, lat
    else:
        glon, glat = Transformer.from_crs(src, "EPSG:4326", always_xy=True).transform(lon, lat)
    x, y = Transformer.from_crs(src, dst, always_xy=True).transform(lon, lat)
    x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    area = _area_of_use(dst)
    outside = ~(np.isfinite(x) & np.isfinite(y))
    if area is not None:
        m = CRS_MARGIN_DEG
        glon, glat = np.asarray(glon, dtype=float), np.asarray(glat, dtype=float)
        width = (area.east - area.west) % 360 or 360.0
        d = (glon - area.west) % 360                       # degrees east of the area's west edge
        outside |= ~((d <= width + m) | (d >= 360 - m))
        outside |= (glat < area.south - m) | (glat > area.north + m)
    bad = np.flatnonzero(outside)
    if bad.size:
        k = bad[0]
        where = (f" (its area of use: lon {area.west:g} .. {area.east:g}, lat {area.south:g} .. {area.north:g})"
                 if area is not None else "")
        raise reader.fail(numbers[k], f"station '{station[k]}' at lon {lon[k]:g}, lat {lat[k]:g} ({crs}) lies "
                                      f"outside the bounds of the grid's CRS {_crs_name(dst)}{where}; check the "
                                      f"sign and order of lon/lat and the table's crs")
    return x, y


def _area_of_use(crs):
    """Where ``crs`` is defined (lon/lat bounds); a CRS read from a file's WKT finds it through its EPSG code.
    None for a custom CRS (then only a finite projection is required)."""
    if crs.area_of_use is not None:
        return crs.area_of_use
    epsg = crs.to_epsg()
    if epsg is None:
        return None
    from pyproj import CRS
    return CRS.from_epsg(epsg).area_of_use


def _crs_name(crs) -> str:
    epsg = crs.to_epsg()
    return f"EPSG:{epsg}" if epsg else crs.name
