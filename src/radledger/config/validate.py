"""The config validator: helpers that check one value each and record a problem naming its key.

Validation collects all problems before raising, so ``radledger check`` can
report everything at once; the sections live in sections.py, entries.py and
composites.py.

Numbers must be finite (``.nan`` and ``.inf`` only as a nodata value), years
lie in 1..9999, a grid's resolution is at least 1e-6 CRS units and it has at
most 1e12 pixels.  Every path must be valid UTF-8 text.  A config fetched from
a URL is trusted less than the user's own files: it may read only ``http(s)``
URLs (relative paths resolve against its URL) and write only below the current
folder, unless the user gives the output folder on the command line.
"""

from __future__ import annotations

import datetime as dt
import difflib
import math
import os
from pathlib import Path, PurePosixPath
from urllib.parse import urljoin, urlsplit

from ..errors import ConfigError
from ..io.paths import is_remote, is_url, printable
from ..model.layers import ALL_LAYERS
from ..model.needs import day_needs, scene_needs
from . import composites as _composites, entries as _entries, sections as _sections, stations as _stations
from .schema import Config, keys_of

__all__ = ["Validator", "TOP_KEYS", "MAX_PIXELS", "MIN_RESOLUTION"]

TOP_KEYS = keys_of(Config, exclude=("path", "raw"))
MAX_PIXELS = 1e12          # a float32 product of this grid would be 4 TB
MIN_RESOLUTION = 1e-6      # CRS units (1e-6 degree is about 0.1 m)
YEARS = (1, 9999)          # what a calendar date can hold


def _is_text(path: str) -> bool:
    """``path`` is valid UTF-8 (no bytes the file system could not decode)."""
    try:
        path.encode("utf-8")
    except UnicodeEncodeError:
        return False
    return True


class Validator:
    """Collects every problem of one config; the sections call its helpers."""

    def __init__(self, path, raw: dict, output_override):
        self.path = path
        self.url = str(path) if is_url(str(path)) else None
        self.base = Path.cwd() if self.url else Path(path).resolve().parent
        self.raw = raw
        self.problems: list[ConfigError] = []
        self.output_override = output_override
        self._failed: set[str] = set()

    # ---- helpers ---------------------------------------------------------
    def fail(self, key: str, msg: str) -> None:
        if msg.startswith("missing") and key in self._failed:
            return     # given but invalid (already said): not also "missing"
        self._failed.add(key)
        self.problems.append(ConfigError(f"{self.path}: {key}: {msg}"))

    def mapping(self, value, key: str, allowed) -> dict:
        if value is None:
            return {}
        if not isinstance(value, dict):
            self.fail(key, f"must be a mapping, got {type(value).__name__}")
            return {}
        for k in value:
            if k not in allowed:
                hint = difflib.get_close_matches(str(k), list(allowed), n=1)
                tip = f"; did you mean '{hint[0]}'?" if hint else f"; valid keys: {', '.join(allowed)}"
                self.fail(f"{key}.{k}" if key else str(k), f"unknown key{tip}")
        return value

    def choice(self, value, key: str, valid, default):
        if value is None:
            return default
        if value not in valid:
            hint = difflib.get_close_matches(str(value), list(valid), n=1)
            tip = f" (did you mean '{hint[0]}'?)" if hint else ""
            self.fail(key, f"unknown value {value!r}{tip}; valid: {', '.join(valid)}")
            return default
        return value

    def number(self, value, key: str, *, positive=False, integer=False, default=None):
        if value is None:
            return default
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            self.fail(key, f"must be a number, got {value!r}")
            return default
        try:
            as_float = float(value)
        except OverflowError:
            self.fail(key, f"{str(value)[:20]}... is too large a number; give a value that fits a float")
            return default
        if not math.isfinite(as_float):
            if key.endswith(".nodata"):          # a NaN or infinite nodata value is legitimate
                return as_float
            self.fail(key, f"must be a finite number, got {value!r}")
            return default
        if integer and int(value) != value:
            self.fail(key, f"must be a whole number, got {value!r}")
            return default
        if positive and value <= 0:
            self.fail(key, f"must be positive, got {value!r}")
            return default
        if key.endswith(".year") and not YEARS[0] <= value <= YEARS[1]:
            self.fail(key, f"{value!r} is not a year between {YEARS[0]} and {YEARS[1]}")
            return default
        return int(value) if integer else as_float

    def boolean(self, value, key: str, default: bool) -> bool:
        if value is None:
            return default
        if not isinstance(value, bool):
            self.fail(key, f"must be true or false, got {value!r}")
            return default
        return value

    def resolve(self, value, key: str) -> str | None:
        if value is None:
            return None
        if not isinstance(value, str) or not value.strip():
            self.fail(key, f"must be a file path or URL, got {value!r}")
            return None
        value = value.strip()
        if self.url:
            return self._resolve_remote(value, key)
        if is_remote(value):
            return value
        p = Path(os.path.expanduser(value))
        p = p if p.is_absolute() else (self.base / p)
        if not _is_text(str(p)):
            self.fail(key, f"{printable(p)} is not valid UTF-8 text; rename the file or folder")
            return None
        return str(p)

    def _resolve_remote(self, value: str, key: str) -> str | None:
        """A path in a config fetched from a URL: only http(s) URLs, relative ones against the config's."""
        scheme = urlsplit(value).scheme.lower()
        if value.startswith(("~", "/vsi", "\\")) or (scheme and scheme not in ("http", "https")) or \
                value.startswith("/"):
            self.fail(key, f"{value!r}: a config read from a URL may only read http(s) URLs (or paths "
                           f"relative to its own URL), not local files, other stores or GDAL virtual paths; "
                           f"download the config to use local files")
            return None
        joined = urljoin(self.url, value)
        if urlsplit(joined).scheme.lower() not in ("http", "https"):
            self.fail(key, f"{value!r} does not resolve to an http(s) URL against {self.url}")
            return None
        return joined

    def date(self, value, key: str) -> dt.date | None:
        if isinstance(value, dt.datetime):
            return value.date()
        if isinstance(value, dt.date):
            return value
        if isinstance(value, str):
            try:
                return dt.date.fromisoformat(value.strip())
            except ValueError:
                pass
        self.fail(key, f"{value!r} is not a valid date; write YYYY-MM-DD (e.g. 2026-07-14)")
        return None

    def time(self, value, key: str) -> dt.datetime | None:
        t = None
        if isinstance(value, dt.datetime):
            t = value
        elif isinstance(value, str):
            s = value.strip()
            if s.endswith(("Z", "z")):
                s = s[:-1] + "+00:00"
            try:
                t = dt.datetime.fromisoformat(s)
            except ValueError:
                t = None
        if t is not None:
            try:
                if t.tzinfo is not None:
                    t.astimezone(dt.timezone.utc)
            except OverflowError:
                t = None
        if t is None:
            self.fail(key, f"{value!r} is not a valid UTC time; write YYYY-MM-DDTHH:MM:SSZ "
                           f"(e.g. 2026-07-14T18:10:00Z)")
            return None
        if t.tzinfo is None:
            t = t.replace(tzinfo=dt.timezone.utc)   # documented: naive times are UTC
        return t.astimezone(dt.timezone.utc)

    def _dem_needed(self, scenes, days, methods, output, emissivity, static) -> None:
        """A DEM wherever what is asked needs one (model/needs.py says what needs it)."""
        if "elevation" in static:
            return
        reasons = []
        for s in scenes:
            n = scene_needs(s.layers, products=output.products, sky_emissivity=methods.sky_emissivity,
                            clouds=methods.clouds, scene_to_day=methods.scene_to_day,
                            emissivity_constant=emissivity.constant is not None)
            reasons += [r for r in n.why_elevation.split("; ") if n.elevation and r]
        if days:
            reasons.append(day_needs(days[0].layers, products=output.products).why_elevation)
        for reason in dict.fromkeys(reasons):
            self.fail("static.elevation", f"needed for {reason}; give a DEM")

    # ---- checks across keys -------------------------------------------------
    def _guarded(self, key: str, section, *args) -> list:
        """A section whose dates may still overflow the calendar (a year beyond 9999 after arithmetic)."""
        try:
            return section(self, *args)
        except (ValueError, OverflowError) as exc:
            self.fail(key, f"{exc}; dates must lie in the years {YEARS[0]}..{YEARS[1]}")
            return []

    def _check_output_directory(self, output) -> None:
        """A config from a URL writes only below the current folder (unless the user gave --out)."""
        if not self.url or self.output_override is not None or not isinstance(output, dict):
            return
        d = output.get("directory")
        if not isinstance(d, str):
            return
        parts = PurePosixPath(d.strip().replace("\\", "/")).parts
        if d.strip().startswith(("/", "~", "\\")) or ".." in parts or is_remote(d.strip()) or \
                (parts and ":" in parts[0]):
            self.fail("output.directory", f"{d!r}: a config read from a URL may write only below the current "
                                          f"folder; give a relative folder without '..', or choose the "
                                          f"output folder yourself with --out DIR")

    def _check_grid_size(self, grid) -> None:
        if grid.resolution is None:
            return
        rx, ry = grid.resolution
        if min(rx, ry) < MIN_RESOLUTION:
            self.fail("grid.resolution", f"{min(rx, ry)!r} is below {MIN_RESOLUTION} CRS units; give the "
                                         f"pixel size in the CRS's units (e.g. 30 for 30 m)")
            return
        if grid.bounds is not None:
            x0, y0, x1, y1 = grid.bounds
            pixels = math.ceil((x1 - x0) / rx) * math.ceil((y1 - y0) / ry) if \
                math.isfinite((x1 - x0) / rx * (y1 - y0) / ry) else math.inf
            if pixels > MAX_PIXELS:
                self.fail("grid", f"bounds and resolution give {pixels:.3g} pixels, more than {MAX_PIXELS:.0e}; "
                                  f"check the bounds' units and the resolution")

    # ---- the whole config ----------------------------------------------------
    def build(self) -> Config | None:
        raw = self.mapping(self.raw, "", TOP_KEYS)
        title = raw.get("title", "")
        if not isinstance(title, (str, int, float)):
            self.fail("title", "must be text")
            title = ""
        layers = _sections.layers(self, raw.get("layers"))
        static = _entries.static(self, raw.get("static"), ALL_LAYERS)
        grid = _sections.grid(self, raw.get("grid"), static)
        emissivity = _sections.emissivity(self, raw.get("emissivity"))
        methods = _sections.methods(self, raw.get("methods"))
        scenes = self._guarded("scenes", _entries.scenes, raw.get("scenes"), static)
        days = self._guarded("days", _entries.days, raw.get("days"), static)
        composites = self._guarded("composites", _composites.composites, raw.get("composites"), scenes, days)
        zones = _sections.zones(self, raw.get("zones"))
        self._check_output_directory(raw.get("output"))
        output = _sections.output(self, raw.get("output"))
        stations = _stations.stations(self, raw.get("stations"))
        validation = _stations.validation(self, raw.get("validation"))
        _stations.station_inputs(self, stations, scenes, days, static)
        self._check_grid_size(grid)
        if not _is_text(str(output.directory)):
            self.fail("output.directory", f"{printable(output.directory)} is not valid UTF-8 text; choose "
                                          f"another folder")
        if not scenes and not days:
            self.fail("scenes", "the config lists no scenes and no days; add at least one")
        needs_lc = bool(scenes) and emissivity.constant is None
        if needs_lc and "land_cover" not in static:
            self.fail("static.land_cover", "needed for the emissivity lookup; give a land-cover raster "
                                           "or set emissivity.constant")
        if needs_lc and emissivity.table is None:
            self.fail("emissivity.table", "give a class,emissivity CSV table or emissivity.constant")
        self._dem_needed(scenes, days, methods, output, emissivity, static)
        if self.problems:
            return None
        return Config(path=self.path, title=str(title), grid=grid, layers=layers, static=static,
                      emissivity=emissivity, methods=methods, scenes=tuple(scenes), days=tuple(days),
                      composites=tuple(composites), zones=zones, output=output, stations=stations,
                      validation=validation, raw=self.raw)
