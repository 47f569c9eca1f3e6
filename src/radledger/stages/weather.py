"""Stage 0: the weather grids made from the station table, before the jobs that read them.

For each (layer, date or scene time) an input names as ``stations``: fit the elevation-aware field
(radledger.stations), evaluate it chunk by chunk with the DEM, write ``DIR/weather/{layer}_{stamp}.tif``
tagged with the method, the stations used, the trend and the leave-one-out statistics; a grid whose
settings hash is unchanged is kept.  Then ``DIR/weather/cross_validation.csv`` lists the
leave-one-out bias and RMSE of every grid of the plan (read back from the tags of kept grids).
"""

from __future__ import annotations

import datetime as dt
import math
import warnings
from pathlib import Path

from dask.base import tokenize

from ..errors import InputError
from ..execution.engine import Engine
from ..io.atomic import read_record, write_record
from ..io.cog import ProductFile, is_current, read_tags
from ..model.products import Product
from ..outputs.weather import (WEATHER_NAMES, CrossValidationRow, gridding_tags, predict_chunk,
                               write_cross_validation)
from ..planning.plan import Plan
from ..planning.provenance import product_tags, settings_hash
from ..planning.stations import WeatherGrid, weather_grids
from ..stations.gridding import CrossValidation, fit_field, leave_one_out

__all__ = ["run_weather", "CROSS_VALIDATION_FILE"]

CROSS_VALIDATION_FILE = "cross_validation.csv"
#: the hash of the grids the table was made for (a rerun with the same grids keeps the table)
CROSS_VALIDATION_RECORD = ".radledger-cross-validation.json"


def run_weather(plan: Plan, engine: Engine, *, overwrite: bool) -> tuple[list[Path], list[Path]]:
    """Write every weather grid of the plan that is not current, and the cross-validation table."""
    grids = weather_grids(plan.jobs)
    if not grids:
        return [], []
    todo = [g for g in grids if overwrite or not is_current(g.path, g.settings_hash)]
    skipped = [g.path for g in grids if g not in todo]
    # every field is fitted before any grid is written: a date the stations cannot grid stops the run clean
    fields = [fit_field(g.x, g.y, g.z, g.v, g.method, label=g.label) for g in todo]
    written = [write_weather_grid(plan, g, engine, field=f) for g, f in zip(todo, fields)]
    table = plan.out / "weather" / CROSS_VALIDATION_FILE
    record = plan.out / "weather" / CROSS_VALIDATION_RECORD
    key = settings_hash("cross validation", sorted(g.settings_hash for g in grids))
    if not overwrite and table.exists() and read_record(record).get(CROSS_VALIDATION_FILE) == key:
        return written, skipped + [table]                                   # same grids: same table
    write_cross_validation([_cv_row(g) for g in grids], table)
    write_record(record, {CROSS_VALIDATION_FILE: key})
    return written + [table], skipped


def _cross_validate(g: WeatherGrid) -> CrossValidation | None:
    """Leave-one-out over the stations of ``g``; None when too few stations or a subset cannot be fitted."""
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return leave_one_out(g.x, g.y, g.z, g.v, g.method, label=g.label)
    except InputError:
        return None


class _NoCrossValidation:
    n, bias, rmse = 0, math.nan, math.nan


def write_weather_grid(plan: Plan, g: WeatherGrid, engine: Engine, *, field=None) -> Path:
    """Fit (unless ``field`` is given), cross-validate and write one weather grid.

    Raises :class:`InputError` naming the date and layer when the stations cannot be gridded.
    """
    field = field if field is not None else fit_field(g.x, g.y, g.z, g.v, g.method, label=g.label)
    cv = _cross_validate(g) or _NoCrossValidation()
    long_name, standard_name = WEATHER_NAMES[g.layer]
    product = Product(g.layer, f"{long_name} gridded from stations", g.units, standard_name)
    time = g.when.strftime("%Y-%m-%dT%H:%M:%SZ") if isinstance(g.when, dt.datetime) else g.when.isoformat()
    tags = product_tags(product, method=f"stations: {g.method} of the residuals of a linear trend in elevation "
                                        f"and position, the trend restored with the DEM",
                        time=time, time_kind=str(g.kind), inputs=f"{g.table} column {g.column}",
                        title=plan.cfg.title, settings_hash=g.settings_hash,
                        extra=gridding_tags(field, cv, stations=[g.station[i] for i in field.station_index]))
    f = ProductFile(final=g.path, grid=plan.grid, dtype="float32", tags=tags, band_description=product.long_name,
                    compression=plan.cfg.output.compression)
    try:
        f.create(keep_open=not engine.distributed)
        sink = f.sink(engine.lock(f.intermediate))
        name = f"radledger-weather-{g.layer}-" + tokenize(g.settings_hash, plan.grid.identity, plan.grid.chunk)
        dsk = {(name, k): (predict_chunk, field, g.dem, plan.grid, win, sink)
               for k, win in enumerate(plan.grid.windows())}
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            engine.get(dsk, list(dsk), label=f"weather {g.label}")
        return f.finish()
    except BaseException:
        f.abort()
        raise


def _float(text) -> float:
    try:
        return float(text)
    except (TypeError, ValueError):
        return math.nan


def _cv_row(g: WeatherGrid) -> CrossValidationRow:
    tags = read_tags(g.path)
    when = g.when
    return CrossValidationRow(
        variable=g.layer, date=(when.date() if isinstance(when, dt.datetime) else when).isoformat(),
        time=when.strftime("%Y-%m-%dT%H:%M:%SZ") if isinstance(when, dt.datetime) else "", method=g.method,
        units=g.units,
        n=int(_float(tags.get("cv_n")) if tags.get("cv_n") else 0), bias=_float(tags.get("cv_bias")),
        rmse=_float(tags.get("cv_rmse")))
