"""Per-chunk kernels: decoded input windows in, every product of a scene or day out.

These functions are the only place where the pipeline calls the physics;
they add the range checks and quality flags around it.  One call computes
all products of a chunk from one read of its inputs.
"""

from __future__ import annotations

import numpy as np

from .. import physics as ph
from .fused import fused_applies, fused_scene
from .layers import PHYSICAL_RANGES
from .params import DayParams, SceneParams
from .products import QUALITY_BITS
from .surface import chunk_emissivity

__all__ = ["scene_kernel", "day_kernel", "humidity_to_kpa", "sun_may_be_down"]

B = QUALITY_BITS
CLOUD_FLAG_FRACTION = 0.1   # Crawford-Duchon cloud fraction above which `cloud_corrected` is set


def _checked(arrays: dict, name: str, quality: np.ndarray, rng_key: str | None = None) -> np.ndarray:
    """The layer with out-of-range values set to NaN, flags set in ``quality``."""
    a = arrays[name]
    missing = np.isnan(a)
    quality[missing] |= B["input_missing"]
    lo, hi = PHYSICAL_RANGES[rng_key or name]
    with np.errstate(invalid="ignore"):
        bad = (a < lo) | (a > hi)
    if bad.any():
        quality[bad] |= B["out_of_range"]
        a = np.where(bad, np.float32(np.nan), a)
    return a


def humidity_to_kpa(arrays: dict, quality: np.ndarray, temperature: np.ndarray | None,
                    tmax=None, tmin=None) -> np.ndarray:
    """Actual vapour pressure [kPa] from whichever humidity layer is given."""
    if "vapour_pressure" in arrays:
        return _checked(arrays, "vapour_pressure", quality)
    if "dewpoint_temperature" in arrays:
        return ph.vapour_pressure_from_dewpoint(_checked(arrays, "dewpoint_temperature", quality))
    rh = _checked(arrays, "relative_humidity", quality)
    if tmax is not None:
        # FAO-56 eq. 19: ea = RHmean/100 * (e°(Tmax) + e°(Tmin)) / 2
        return rh / 100.0 * ph.mean_saturation_vapour_pressure(tmax, tmin)
    return ph.vapour_pressure_from_relative_humidity(rh, temperature)


def sun_may_be_down(lat: np.ndarray, lon: np.ndarray, p: SceneParams) -> bool:
    """False when the sun is well up at every corner of the chunk (then no pixel can be sun-down).

    The sun's elevation changes by well under a degree across a chunk, so
    50 W m-2 of extraterrestrial irradiance (about 2 degrees of elevation) at
    all four corners leaves every pixel in between with the sun up; this
    skips a full-chunk sun-position pass on daytime scenes.
    """
    idx = ([0, 0, -1, -1], [0, -1, 0, -1])
    ra = ph.extraterrestrial_instant(np.asarray(lat)[idx], np.asarray(lon)[idx], p.day_of_year, p.utc_hour)
    return not bool(np.all(ra > 50.0))


def scene_kernel(arrays: dict[str, np.ndarray], lon: np.ndarray | None, lat: np.ndarray | None,
                 p: SceneParams, *, reuse: bool = False) -> dict[str, np.ndarray]:
    """Every scene product of one chunk [W m-2, 1]; see :data:`products.SCENE_PRODUCTS`.

    ``reuse``: the fused path may return per-thread buffers valid until the thread's next call.
    """
    shape = next(iter(arrays.values())).shape
    q = np.zeros(shape, dtype=np.uint8)
    if fused_applies(p, arrays):
        out = fused_scene(arrays, p, reuse=reuse)
        if lat is not None and sun_may_be_down(lat, lon, p):
            ra = ph.extraterrestrial_instant(lat, lon, p.day_of_year, p.utc_hour)
            out["quality"][ra <= 0] |= B["sun_down"]
        return out
    albedo = _checked(arrays, "albedo", q)
    ts = _checked(arrays, "surface_temperature", q)
    ta = _checked(arrays, "air_temperature", q)
    ea = humidity_to_kpa(arrays, q, ta)
    eps_s = chunk_emissivity(arrays, p, q)

    rso = None
    if lat is not None:
        ra = ph.extraterrestrial_instant(lat, lon, p.day_of_year, p.utc_hour)
        q[ra <= 0] |= B["sun_down"]
        z = _checked(arrays, "elevation", q)
        if p.clear_sky_shortwave == "beam-diffuse":
            cosz = ph.cos_zenith(lat, ph.solar_declination(p.day_of_year),
                                 ph.hour_angle(p.utc_hour, lon, p.day_of_year))
            pres = ph.atmospheric_pressure(z)
            rso = ph.clear_sky_shortwave_beam_diffuse(ra, cosz, pres, ph.precipitable_water(ea, pres))
        else:
            rso = ph.clear_sky_shortwave_fao56(ra, z)
    if "shortwave_down" in arrays:
        rs = _checked(arrays, "shortwave_down", q)
    else:
        rs = rso
        q |= B["modelled_shortwave"]

    eps_clear = ph.sky_emissivity(ta, ea, model=p.sky_emissivity)
    eps_sky = eps_clear
    if p.clouds == "crawford-duchon":
        with np.errstate(invalid="ignore", divide="ignore"):
            day = rso > 0
            cd = ph.crawford_duchon_1999(eps_clear, rs, np.where(day, rso, np.float32(1.0)))
            eps_sky = np.where(day, cd, eps_clear)
            # flag only a noticeable correction: cloud fraction c = 1 - Rs/Rso >= CLOUD_FLAG_FRACTION
            q[day & (rs < (1.0 - CLOUD_FLAG_FRACTION) * rso)] |= B["cloud_corrected"]
            q[day & (rs > rso)] |= B["shortwave_capped"]

    out: dict[str, np.ndarray] = {}
    rld = ph.longwave_down(eps_sky, ta)
    rns = ph.net_shortwave(albedo, rs)
    rnl = ph.net_longwave(eps_s, ts, rld)
    want = set(p.products)
    if "net_radiation" in want:
        out["net_radiation"] = ph.net_radiation_instant(rns, rnl)
    if "net_shortwave" in want:
        out["net_shortwave"] = rns
    if "net_longwave" in want:
        out["net_longwave"] = rnl
    if "longwave_down" in want:
        out["longwave_down"] = rld
    if "longwave_up" in want:
        out["longwave_up"] = ph.surface_emission(ts, eps_s) + (1.0 - eps_s) * rld
    if "surface_emissivity" in want:
        out["surface_emissivity"] = eps_s
    if "sky_emissivity" in want:
        out["sky_emissivity"] = eps_sky
    if "daily_net_radiation" in want:
        out["daily_net_radiation"] = _scene_to_day(out.get("net_radiation", rns - rnl), lon, lat, rso, p)
    if "quality" in want:
        out["quality"] = q
    return out


def _scene_to_day(rn: np.ndarray, lon, lat, rso, p: SceneParams) -> np.ndarray:
    """Daily net radiation [MJ m-2 day-1] from an instantaneous map; NaN while the sun is down."""
    if p.scene_to_day == "sinusoidal":
        rise, sset = ph.sunrise_sunset(lat, lon, p.day_of_year)
        day = ph.sinusoidal_daily_bisht_2005(rn, p.utc_hour, rise, sset)
    else:
        # Jackson et al. (1983) ratio with clear-sky shortwave for both the day and the instant
        z = rso / ph.extraterrestrial_instant(lat, lon, p.day_of_year, p.utc_hour)   # (0.75 + 2e-5 z)
        rso_day = z * ph.extraterrestrial_daily(lat, p.day_of_year)
        day = ph.shortwave_ratio_daily_jackson_1983(rn, rso, rso_day)
    return np.where(rso > 0, day, np.float32(np.nan)).astype(np.float32)


def day_kernel(arrays: dict[str, np.ndarray], lat: np.ndarray, p: DayParams) -> dict[str, np.ndarray]:
    """Every FAO-56 day product of one chunk [MJ m-2 day-1]."""
    shape = lat.shape
    q = np.zeros(shape, dtype=np.uint8)
    rs = _checked(arrays, "shortwave_down", q, "shortwave_down_day")
    tmax = _checked(arrays, "air_temperature_max", q)
    tmin = _checked(arrays, "air_temperature_min", q)
    ea = humidity_to_kpa(arrays, q, None, tmax, tmin)
    z = _checked(arrays, "elevation", q)
    albedo = _checked(arrays, "albedo", q) if "albedo" in arrays else np.float32(0.23)
    terms = ph.fao56_net_radiation_components_daily(rs, tmax, tmin, ea, lat, p.day_of_year, z, albedo)
    with np.errstate(invalid="ignore"):
        q[rs > terms["clear_sky_shortwave"]] |= B["shortwave_capped"]
    out = {}
    for name in ("net_radiation", "net_shortwave", "net_longwave", "clear_sky_shortwave"):
        if name in p.products:
            out[name] = np.broadcast_to(terms[name], shape)
    if "quality" in p.products:
        out["quality"] = q
    return out
