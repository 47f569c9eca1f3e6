"""Inputs gridded from the station table: one weather grid per layer and date (or scene time).

The table is read once per plan.  For an input given as ``stations`` the job reads the gridded
product ``DIR/weather/{layer}_{stamp}.tif`` as a plain raster on the grid (internal units, factor
1); it is written by the weather stage before the jobs run, from the :class:`WeatherGrid` the
source carries (the stations of that date in internal units, the method, the DEM).  Its settings
hash covers the rows of that date (names, coordinates, values), the column, the table's CRS, the
method, the unit conversion, the grid and the DEM, so a rerun reuses a grid whose stations did not
change, and the job's own hash follows the grid's.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .._version import __version__
from ..config import Config
from ..errors import InputError
from ..io.rasters import LayerSource
from ..io.stations import StationTable, read_station_table
from ..kinds import TimeKind
from ..model.layers import LAYERS, SHORTWAVE_UNITS
from ..stations.gridding import MIN_STATIONS
from .checks import check_sample
from .provenance import settings_hash, source_fingerprint
from .sources import MissingInput, layer_conversion

__all__ = ["WeatherGrid", "StationGridSource", "StationInputs", "weather_grids", "read_observations",
           "when_text", "stamp_of"]


def stamp_of(when) -> str:
    """``YYYYMMDD`` for a date, ``YYYYMMDDTHHMM`` for a UTC time (the products' file-name stamps)."""
    return when.strftime("%Y%m%dT%H%M") if isinstance(when, dt.datetime) else when.strftime("%Y%m%d")


def when_text(when) -> str:
    """A date as ``2026-07-14``, a time as ``2026-07-14T18:20Z``."""
    return when.strftime("%Y-%m-%dT%H:%MZ") if isinstance(when, dt.datetime) else when.isoformat()


@dataclass(frozen=True, eq=False)
class WeatherGrid:
    """One layer gridded from the stations for one date or scene time, and where it is written."""
    layer: str
    kind: TimeKind
    when: object                   # date (days) or UTC datetime (scenes)
    path: Path                     # DIR/weather/{layer}_{stamp}.tif
    table: str                     # the station table
    column: str
    method: str
    units: str                     # of the gridded values (internal; 'W m-2 daylight' stays a daylight mean)
    station: tuple[str, ...]       # every row of that date, with or without a value
    x: np.ndarray                  # grid CRS [m]
    y: np.ndarray
    z: np.ndarray                  # station elevation [m]
    v: np.ndarray                  # internal units, NaN = missing
    dem: object                    # the DEM's source (LayerSource or StackSource)
    settings_hash: str

    @property
    def label(self) -> str:
        """Date (or time) and layer: what every message about this grid starts with."""
        return f"{when_text(self.when)} {self.layer}"

    @property
    def used(self) -> tuple[str, ...]:
        """The stations with a value."""
        return tuple(s for s, v in zip(self.station, self.v) if np.isfinite(v))


@dataclass(frozen=True)
class StationGridSource(LayerSource):
    """The gridded product of a weather layer, read like any raster on the grid; ``weather`` says how it is made."""
    weather: WeatherGrid | None = None

    def identity(self) -> list:
        """What a job depends on here: the grid's settings hash (the file is written by this run)."""
        return ["stations", self.weather.settings_hash]


def weather_grids(jobs) -> list[WeatherGrid]:
    """Every weather grid the jobs read, once each, in time order."""
    found: dict[Path, WeatherGrid] = {}
    for job in jobs:
        for src in (p for s in job.sources.values() for p in (*(x for _, x in getattr(s, "parts", ())), s)):
            if isinstance(src, StationGridSource):   # (a derived layer's own inputs included)
                found.setdefault(src.weather.path, src.weather)
    return sorted(found.values(), key=lambda g: (when_text(g.when), g.layer))


def _gridded_units(layer: str, kind: TimeKind, declared: str) -> str:
    """The units of a gridded layer: internal, but a daily shortwave given as a daylight mean stays one
    (the day kernel converts it per pixel with the day length)."""
    if layer == "shortwave_down":
        return declared if declared == "W m-2 daylight" else SHORTWAVE_UNITS[kind][0]
    return LAYERS[layer].internal_unit


@dataclass
class _StationSample:
    """The converted values of one column, for the unit-plausibility check of planning/checks.py."""
    layer: str
    path: str
    units: str
    values: np.ndarray

    def read_sample(self) -> np.ndarray:
        return self.values.astype(np.float32)


class StationInputs:
    """The station table of a plan, read once, and the gridded source of each (layer, date)."""

    def __init__(self, cfg: Config, grid, open_source, *, inspect: bool = True):
        self.cfg, self.grid, self.open_source, self.inspect = cfg, grid, open_source, inspect
        self._table: StationTable | None = None
        self._checked: set = set()

    @property
    def table(self) -> StationTable:
        if self._table is None:
            spec = self.cfg.stations
            self._table = read_station_table(spec.path, crs=spec.crs, grid_crs=self.grid.crs,
                                             values={c: layer for layer, c in spec.columns.items()})
        return self._table

    def source(self, layer: str, kind: TimeKind, when) -> StationGridSource:
        """The gridded source of ``layer`` on ``when``; :class:`MissingInput` when the table has no row then."""
        spec, table = self.cfg.stations, self.table
        column = spec.columns[layer]
        factor, shift, declared = layer_conversion(self.cfg, layer, kind, where=f"{spec.path}: column {column}")
        self._check_units(layer, kind, column, factor, shift, declared)
        rows = table.rows_on(when)
        if rows.size == 0:
            what = f"no rows at {when_text(when)} (to the minute)" if kind is TimeKind.SCENES else \
                f"no daily rows (a date without a time) on {when_text(when)}"
            raise MissingInput(f"{spec.path}: {what} for {layer}; add them, or on_missing: skip leaves such "
                               f"dates out")
        v = table.values[column][rows] * factor + shift
        units = _gridded_units(layer, kind, declared)
        label = f"{when_text(when)} {layer}"
        n, need = int(np.isfinite(v).sum()), MIN_STATIONS[spec.method]
        if n < need:
            raise InputError(f"{spec.path}: {label}: only {n} station(s) have a value in column {column}; "
                             f"stations.method {spec.method} needs at least {need}; add stations or choose a "
                             f"method that needs fewer ({', '.join(f'{m} {k}' for m, k in MIN_STATIONS.items())})")
        dem = self.open_source("elevation", self.cfg.static["elevation"], kind, when)
        names = tuple(table.station[i] for i in rows)
        x, y, z = table.x[rows], table.y[rows], table.elevation[rows]
        h = settings_hash(__version__, "stations", spec.crs, column, spec.method, layer, str(kind), when_text(when),
                          [names, x.tolist(), y.tolist(), z.tolist(), [None if np.isnan(a) else a for a in v.tolist()]],
                          [factor, shift, units], self.grid.identity, source_fingerprint(dem),
                          self.cfg.output.compression)
        path = self.cfg.output.directory / "weather" / f"{layer}_{stamp_of(when)}.tif"
        weather = WeatherGrid(layer=layer, kind=kind, when=when, path=path, table=spec.path, column=column,
                              method=spec.method, units=units, station=names, x=x, y=y, z=z, v=v, dem=dem,
                              settings_hash=h)
        return StationGridSource(layer=layer, path=str(path), units=units, weather=weather)

    def _check_units(self, layer, kind, column, factor, shift, units) -> None:
        key = (layer, kind)
        if key in self._checked or not self.inspect:
            return
        self._checked.add(key)
        table = self.table
        rows = [i for i, t in enumerate(table.time) if (t is not None) == (kind is TimeKind.SCENES)]
        values = table.values[self.cfg.stations.columns[layer]][rows] * factor + shift
        check_sample(_StationSample(layer, f"{table.path}: column {column}", units, values), kind=kind)


def read_observations(cfg: Config, grid) -> StationTable:
    """The ``validation:`` table (net radiometers): station, lon, lat, date and/or time, net_radiation."""
    spec = cfg.validation
    return read_station_table(spec.path, crs=spec.crs, grid_crs=grid.crs, values={"net_radiation": "observed"},
                              needs_elevation=False, what="net-radiometer table")
