"""A scene's air temperature at its overpass from the day's Tmax and Tmin (Parton & Logan 1981).

A scene entry may give ``air_temperature_max`` and ``air_temperature_min`` instead of
``air_temperature``.  The pair is read for one date, the *local solar date of the grid centre*
(:func:`local_solar_date`: the scene's UTC time plus the centre's longitude / 15 h), and this
source turns it, per pixel of each block, into the ``air_temperature`` layer the kernels read:
sunrise and sunset in UTC hours from the pixel's latitude and longitude and that date (FAO-56,
:func:`radledger.physics.solar.sunrise_sunset`), the overpass as a UTC hour, and
:func:`radledger.physics.diurnal.parton_logan_1981` with the 150-cm air parameters.  The fused
loop and the NumPy kernel then receive the same array.

Where the model has no answer (polar day or night) the layer is NaN: the products are NaN there
and ``quality`` says ``input_missing``.  Where Tmax or Tmin lies outside its physical range the
layer is +inf, so the kernels flag ``out_of_range`` as they would for the daily input itself.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

import numpy as np
from rasterio.windows import Window

from .. import physics as ph
from ..grid import TargetGrid
from ..physics.diurnal import PARTON_LOGAN_1981_PARAMETERS, parton_logan_1981
from .layers import PHYSICAL_RANGES

__all__ = ["DiurnalAirTemperature", "local_solar_date", "DIURNAL_PAIR", "DIURNAL_METHOD", "DIURNAL_PARAMETERS"]

#: the daily inputs a scene may give instead of ``air_temperature``
DIURNAL_PAIR = ("air_temperature_max", "air_temperature_min")
#: Parton & Logan (1981) Table 1, 150-cm air (see physics/diurnal.py)
DIURNAL_PARAMETERS = PARTON_LOGAN_1981_PARAMETERS["air-150cm"]
#: the words products and ``radledger check`` use for the derived layer
DIURNAL_METHOD = "air_temperature: Parton & Logan (1981) from air_temperature_max, air_temperature_min"


def local_solar_date(time: dt.datetime, longitude: float) -> dt.date:
    """The date whose Tmax/Tmin serve a scene at UTC ``time`` seen at ``longitude`` [deg, east +].

    Local mean solar time = UTC + longitude / 15 h (the equation of time, at most about 16 minutes,
    is left out: the date changes only for overpasses within minutes of local midnight).
    """
    return (time + dt.timedelta(hours=float(longitude) / 15.0)).date()


def utc_hour(time: dt.datetime) -> float:
    """``time`` (tz-aware or UTC) as decimal hours of its UTC day [hour]."""
    t = time.astimezone(dt.timezone.utc) if time.tzinfo is not None else time
    return t.hour + t.minute / 60.0 + (t.second + t.microsecond / 1e6) / 3600.0


@dataclass(frozen=True)
class DiurnalAirTemperature:
    """The source of a scene's ``air_temperature`` from the day's Tmax and Tmin sources."""
    time: dt.datetime                          # the scene time (UTC)
    day: dt.date                               # the date of the daily inputs (local solar date)
    parts: tuple[tuple[str, object], ...]      # (("air_temperature_max", src), ("air_temperature_min", src))

    layer = "air_temperature"
    needs_lonlat = True                        # ChunkContext.read passes the block's lon/lat
    method = DIURNAL_METHOD

    @property
    def settings(self) -> list:
        """What the derived layer depends on besides its inputs (for the settings hash)."""
        p = DIURNAL_PARAMETERS
        return [self.method, p["a"], p["b"], p["c"], self.time.isoformat(), self.day.isoformat()]

    @property
    def path(self) -> str:
        return ", ".join(getattr(s, "path", "?") for _, s in self.parts)

    def describe(self) -> str:
        """The tag text: the method, its parameters and the date of the daily inputs."""
        p = DIURNAL_PARAMETERS
        return (f"{self.method} (a {p['a']:g} h, b {p['b']:g}, c {p['c']:g} h, 150-cm air; daily inputs of "
                f"{self.day.isoformat()}, the local solar date of the grid centre; sunrise and sunset FAO-56 "
                f"eqs. 24, 25, 31, 32 per pixel)")

    def read_layers(self, grid: TargetGrid, window: Window, memo=None, lonlat=None) -> dict[str, np.ndarray]:
        tmax, tmin = (dict(self.parts)[n].read(grid, window, memo) for n in DIURNAL_PAIR)
        lon, lat = lonlat if lonlat is not None else grid.lonlat(window)
        return {"air_temperature": air_temperature_at(tmax, tmin, lon, lat, self.time, self.day)}


def air_temperature_at(tmax: np.ndarray, tmin: np.ndarray, lon: np.ndarray, lat: np.ndarray,
                       time: dt.datetime, day: dt.date) -> np.ndarray:
    """Air temperature [K] at ``time`` from Tmax, Tmin [K] of ``day`` per pixel (float32).

    NaN where an input is missing or the sun neither rises nor sets; +inf where Tmax or Tmin lies
    outside its physical range (the kernels flag it ``out_of_range``).
    """
    doy = day.timetuple().tm_yday
    sunrise, sunset = ph.sunrise_sunset(lat, lon, doy)
    p = DIURNAL_PARAMETERS
    with np.errstate(invalid="ignore", over="ignore"):
        tx, tn = tmax.astype(np.float64), tmin.astype(np.float64)
        ta = parton_logan_1981(tx, tn, utc_hour(time), sunrise, sunset, a=p["a"], b=p["b"], c=p["c"])
        bad = np.zeros(ta.shape, bool)
        for name, v in zip(DIURNAL_PAIR, (tx, tn)):
            lo, hi = PHYSICAL_RANGES[name]
            bad |= (v < lo) | (v > hi)
        ta = np.where(bad, np.inf, ta)
    return ta.astype(np.float32)
