"""The config validator: helpers that check one value each and record a problem naming its key.

Validation collects all problems before raising, so ``radledger check`` can
report everything at once; the sections live in sections.py, entries.py and
composites.py.
"""

from __future__ import annotations

import datetime as dt
import difflib
import os
from pathlib import Path

from ..errors import ConfigError
from ..io.paths import is_remote, is_url
from ..model.needs import day_needs, scene_needs
from . import composites as _composites, entries as _entries, sections as _sections, stations as _stations
from ..model.layers import ALL_LAYERS
from .schema import Config, keys_of

__all__ = ["Validator", "TOP_KEYS"]

TOP_KEYS = keys_of(Config, exclude=("path", "raw"))


class Validator:
    """Collects every problem of one config; the sections call its helpers."""

    def __init__(self, path, raw: dict, output_override):
        self.path = path
        self.url = str(path) if is_url(str(path)) else None
        self.base = Path.cwd() if self.url else Path(path).resolve().parent
        self.raw = raw
        self.problems: list[ConfigError] = []
        self.output_override = output_override

    # ---- helpers ---------------------------------------------------------
    def fail(self, key: str, msg: str) -> None:
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
        if integer and int(value) != value:
            self.fail(key, f"must be a whole number, got {value!r}")
            return default
        if positive and value <= 0:
            self.fail(key, f"must be positive, got {value!r}")
            return default
        return int(value) if integer else float(value)

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
        if is_remote(value):
            return value
        if self.url:
            from urllib.parse import urljoin
            return urljoin(self.url, value)
        p = Path(os.path.expanduser(value))
        return str(p if p.is_absolute() else (self.base / p))

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
        scenes = _entries.scenes(self, raw.get("scenes"), static)
        days = _entries.days(self, raw.get("days"), static)
        composites = _composites.composites(self, raw.get("composites"), scenes, days)
        zones = _sections.zones(self, raw.get("zones"))
        output = _sections.output(self, raw.get("output"))
        stations = _stations.stations(self, raw.get("stations"))
        validation = _stations.validation(self, raw.get("validation"))
        _stations.station_inputs(self, stations, scenes, days, static)
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
