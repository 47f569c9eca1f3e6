"""Per-chunk kernels: decoded input windows in, every product of a scene or day out.

These functions are the only place where the pipeline calls the physics;
they add the range checks and quality flags around it.  One call computes
all products of a chunk from one read of its inputs.
"""

from __future__ import annotations

import numpy as np

from .. import physics as ph
from .albedo import FILL_DEFAULT, FILL_HELD, FILL_INTERPOLATED, REFERENCE_ALBEDO
from .fused import fused_scene
from .layers import NDSI_SNOW_THRESHOLD, PHYSICAL_RANGES
from .params import DayParams, DaySolar, SceneParams
from .products import DAY_QUALITY_BITS, SCENE_DAY_PRODUCT, SCENE_QUALITY_BITS
from .sun import SunGeometry
from .surface import chunk_emissivity
from .terrain import daily_slope_ratio, scene_incident_shortwave, sun_from_lattice, terrain_inputs

__all__ = ["scene_kernel", "day_kernel", "humidity_to_kpa", "clear_sky_shortwave"]

B = {**SCENE_QUALITY_BITS, **DAY_QUALITY_BITS}  # the bits' names are unique across both kinds
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


def clear_sky_shortwave(sun: SunGeometry, elevation: np.ndarray, vapour_pressure: np.ndarray,
                        method: str) -> np.ndarray:
    """Clear-sky shortwave at the instant [W m-2]: App. D beam + diffuse (default) or FAO-56 eq. 37."""
    if method == "beam-diffuse":
        pressure = ph.atmospheric_pressure(elevation)
        return ph.clear_sky_shortwave_beam_diffuse(sun.extraterrestrial, sun.cos_zenith, pressure,
                                                   ph.precipitable_water(vapour_pressure, pressure))
    return ph.clear_sky_shortwave_fao56(sun.extraterrestrial, elevation)


def snow_fraction(arrays: dict, quality: np.ndarray, bit: int) -> np.ndarray | None:
    """Snow-covered fraction [1] from ``snow_cover``, or from ``ndsi`` (snow where NDSI >= 0.4, Hall et
    al. 1995); None without either.  Nodata: no snow assumed; out of range: NaN, flagged.  Sets ``bit``
    where snow lies."""
    if "snow_cover" in arrays:
        f = _checked_optional(arrays, "snow_cover", quality)
    elif "ndsi" in arrays:
        f = ph.snow_fraction_from_ndsi(_checked_optional(arrays, "ndsi", quality), NDSI_SNOW_THRESHOLD)
    else:
        return None
    quality[np.isfinite(f) & (f > 0)] |= bit
    return f


def _checked_optional(arrays: dict, name: str, quality: np.ndarray) -> np.ndarray:
    """An optional layer: nodata stays NaN unflagged; out-of-range values become -inf, flagged (and
    spoil the pixel's products)."""
    a = arrays[name]
    lo, hi = PHYSICAL_RANGES[name]
    with np.errstate(invalid="ignore"):
        bad = (a < lo) | (a > hi)
    if bad.any():
        quality[bad] |= B["out_of_range"]
        a = np.where(bad, np.float32(np.inf), a)
    return a


def _sun_flags(q: np.ndarray, sun: SunGeometry) -> None:
    q[sun.sun_down] |= B["sun_down"]
    low = ph.low_sun(sun.elevation) & ~sun.sun_down
    q[low] |= B["low_sun"]


def scene_kernel(arrays: dict[str, np.ndarray], sun: SunGeometry | None, lonlat, p: SceneParams, *,
                 reuse: bool = False) -> dict[str, np.ndarray]:
    """Every scene product of one chunk [W m-2, 1]; see :data:`products.SCENE_PRODUCTS`.

    ``sun``: the sun over the chunk when ``p.needs.sun`` (else None); ``lonlat``: the pixels'
    longitude and latitude when the scene-to-day product is asked for.  ``reuse``: the fused
    path may return per-thread buffers valid until the thread's next call.
    """
    needs = p.needs
    shape = next(iter(arrays.values())).shape
    if needs.fused:
        out = fused_scene(arrays, p, reuse=reuse)
        if sun is not None:
            _sun_flags(out["quality"], sun)
        return out
    q = np.zeros(shape, dtype=np.uint8)
    albedo = _checked(arrays, "albedo", q)
    ts = _checked(arrays, "surface_temperature", q)
    ta = _checked(arrays, "air_temperature", q)
    ea = humidity_to_kpa(arrays, q, ta)
    eps_s = chunk_emissivity(arrays, p, q)
    snow = snow_fraction(arrays, q, B["snow"])
    if snow is not None:   # nodata: the land-cover emissivity as it is; out of range (inf): NaN
        eps_s = np.where(np.isnan(snow), eps_s, ph.snow_emissivity_blend(eps_s, snow))
        eps_s = np.where(np.isinf(snow), np.nan, eps_s)

    if sun is not None:
        _sun_flags(q, sun)
    rso = z = None
    if needs.clear_sky:
        z = _checked(arrays, "elevation", q)
        rso = clear_sky_shortwave(sun, z, ea, p.clear_sky_shortwave)
    if "shortwave_down" in arrays:
        rs = _checked(arrays, "shortwave_down", q)
    else:
        rs = rso
        q |= B["modelled_shortwave"]
    rs_in, svf = rs, None
    if p.terrain != "none":
        layers = terrain_inputs(arrays, q, B["input_missing"])
        svf = layers[2]
        if sun is None:   # the terrain's source brings the sun on its lattice
            sun = sun_from_lattice(arrays["sun_lattice"], shape)
        terms = None      # a modelled App. D clear sky keeps its own beam and diffuse terms
        if "shortwave_down" not in arrays and p.clear_sky_shortwave == "beam-diffuse":
            pressure = ph.atmospheric_pressure(z)
            terms = ph.clear_sky_beam_diffuse_indices(sun.cos_zenith, pressure,
                                                      ph.precipitable_water(ea, pressure))
        rs_in = scene_incident_shortwave(arrays, sun, rs, albedo, layers, p.terrain, clear_sky_terms=terms)

    eps_clear = ph.sky_emissivity(ta, ea, model=p.sky_emissivity)
    eps_sky = eps_clear
    if p.clouds == "crawford-duchon":
        elevation = sun.elevation
        eps_sky = ph.crawford_duchon_1999(eps_clear, rs, rso, sun_elevation=elevation)
        # flag only a noticeable correction: cloud fraction c = 1 - Rs/Rso >= CLOUD_FLAG_FRACTION
        corrected = ~ph.low_sun(elevation) & (rso > 0) & (rs < (1.0 - CLOUD_FLAG_FRACTION) * rso)
        q[corrected] |= B["cloud_corrected"]

    out: dict[str, np.ndarray] = {}
    rld = ph.longwave_down(eps_sky, ta)
    if svf is not None:   # sky in view, and terrain at the pixel's own Ts and emissivity (Pluess & Ohmura 1997)
        rld = ph.longwave_down_terrain(rld, svf, ts, eps_s)
    rns = ph.net_shortwave(albedo, rs_in)
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
    if "incident_shortwave" in want:
        out["incident_shortwave"] = rs_in
    if SCENE_DAY_PRODUCT in want:
        out[SCENE_DAY_PRODUCT] = _scene_to_day(out.get("net_radiation", rns - rnl), lonlat, sun, rso, z, p)
    if "quality" in want:
        out["quality"] = q
    return out


def _scene_to_day(rn: np.ndarray, lonlat, sun: SunGeometry, rso, z, p: SceneParams) -> np.ndarray:
    """Daily net radiation [MJ m-2 day-1] from an instantaneous map; NaN while the sun is down."""
    lon, lat = lonlat
    if p.scene_to_day == "sinusoidal":
        rise, sset = ph.sunrise_sunset(lat, lon, p.day_of_year)
        day = ph.sinusoidal_daily_bisht_2005(rn, p.utc_hour, rise, sset)
    else:
        # Jackson et al. (1983): Rn_day = Rn x Rso_day / Rso; the day's clear sky by FAO-56 eq. 37
        rso_day = ph.clear_sky_shortwave_fao56(ph.extraterrestrial_daily(lat, p.day_of_year), z)
        day = ph.shortwave_ratio_daily_jackson_1983(rn, rso, rso_day)
    return np.where(sun.cos_zenith > 0, day, np.float32(np.nan)).astype(np.float32)


def day_kernel(arrays: dict[str, np.ndarray], solar: DaySolar, p: DayParams) -> dict[str, np.ndarray]:
    """Every FAO-56 day product of one chunk [MJ m-2 day-1] (``solar``: R_a and N over the chunk)."""
    shape = solar.extraterrestrial.shape
    q = np.zeros(shape, dtype=np.uint8)
    if p.shortwave_daylight_mean:
        # a mean over the daylight hours [W m-2] x the day length N (FAO-56 eqs. 25 and 34) -> MJ m-2 day-1
        arrays = {**arrays, "shortwave_down": arrays["shortwave_down"] * (solar.daylight_hours * np.float32(3600e-6))}
    rs = _checked(arrays, "shortwave_down", q, "shortwave_down_day")
    tmax = _checked(arrays, "air_temperature_max", q)
    tmin = _checked(arrays, "air_temperature_min", q)
    ea = humidity_to_kpa(arrays, q, None, tmax, tmin)
    z = _checked(arrays, "elevation", q)
    if "albedo_fill" in arrays:   # interpolated between scenes (model/albedo.py): never missing
        albedo = arrays["albedo"]
        fill = arrays["albedo_fill"]
        q[fill == FILL_INTERPOLATED] |= B["albedo_interpolated"]
        q[fill == FILL_HELD] |= B["albedo_held"]
        q[fill == FILL_DEFAULT] |= B["albedo_default"]
    elif "albedo" in arrays:
        albedo = _checked(arrays, "albedo", q)
    else:   # FAO-56's grass reference, flagged: snow, water and forest differ a lot
        albedo = np.float32(REFERENCE_ALBEDO)
        q |= B["albedo_default"]
    snow_fraction(arrays, q, B["snow_on_ground"])   # flagged only: eq. 39 has no surface emissivity
    terms = ph.fao56_net_radiation_components_daily(rs, tmax, tmin, ea, None, p.day_of_year, z, albedo,
                                                    extraterrestrial=solar.extraterrestrial)
    rs_in = rs
    if p.terrain != "none":
        # Rs on the slope = Rs x clear-sky ratio slope/flat; Rs/Rso of the net longwave stays on flat ground
        pressure = ph.atmospheric_pressure(z)
        layers = terrain_inputs(arrays, q, B["input_missing"])
        rs_in = rs * daily_slope_ratio(arrays, layers, solar.latitude, p.day_of_year, pressure,
                                       ph.precipitable_water(ea, pressure), albedo, p.terrain)
        terms = dict(terms, net_shortwave=ph.net_shortwave(albedo, rs_in))
        terms["net_radiation"] = terms["net_shortwave"] - terms["net_longwave"]
    terms["incident_shortwave"] = rs_in
    with np.errstate(invalid="ignore", divide="ignore"):
        rso = terms["clear_sky_shortwave"]
        lo, hi = ph.RELATIVE_SHORTWAVE_LIMITS
        q[rs > hi * rso] |= B["shortwave_capped"]
        q[(rso > 0) & (rs < lo * rso)] |= B["overcast_held"]
    out = {}
    for name in ("net_radiation", "net_shortwave", "net_longwave", "clear_sky_shortwave", "incident_shortwave"):
        if name in p.products:
            out[name] = np.broadcast_to(terms[name], shape)
    if "quality" in p.products:
        out["quality"] = q
    return out
