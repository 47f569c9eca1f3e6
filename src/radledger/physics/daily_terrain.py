"""Daily clear-sky shortwave on slopes, and its ratio to flat ground.

A day's clear-sky shortwave is integrated over the sun's path with short
steps, on each pixel's slope and on flat ground, from the beam and diffuse
indices of FAO-56 Annex 3 / ASCE-EWRI (2005) Appendix D [1, 2].  The ratio
slope/flat turns a daily total for flat ground into one for the slope.

Works on NumPy arrays (floats broadcast); pixels are processed in blocks
with the sun's path shared between them, so memory stays small and the cost
is about pixels x time steps.

References
----------
.. [1] Allen, R. G., Pereira, L. S., Raes, D., Smith, M. (1998). Crop
   evapotranspiration. FAO Irrigation and Drainage Paper 56, FAO, Rome.
   Eqs. 21, 23, 24, 25; Annex 3 eqs. 3-15, 3-17, 3-18, 3-20.
.. [2] ASCE-EWRI (2005). The ASCE standardized reference evapotranspiration
   equation. ASCE, Reston VA.  Appendix D, eqs. D.1-D.4.
.. [3] Duffie, J. A., Beckman, W. A. (2013). Solar Engineering of Thermal
   Processes, 4th ed. Wiley.  Eq. 1.6.3 (angle of incidence); equation
   number from memory.
"""

from __future__ import annotations

import math

import numpy as np

from .constants import SOLAR_CONSTANT
from .horizon import horizon_at
from .shortwave import clear_sky_beam_diffuse_indices
from .solar import inverse_relative_distance, solar_declination, sunset_hour_angle

__all__ = ["clear_sky_daily_slope_flat", "clear_sky_slope_ratio_daily"]

# Minutes of solar time per radian of hour angle (15 deg per hour).
_MINUTES_PER_RADIAN = 1440.0 / (2.0 * math.pi)
# Pixels per block: the working arrays of one block stay in the CPU cache.
_BLOCK = 32768


def _day_integrals(sin_phi, cos_phi, omega_s, normal, pressure, water, horizons, azimuths,
                   declination, n_steps, turbidity, coefficients):
    """Sums over the day of K_B cos(theta)+, K_B sin(beta) and K_D sin(beta).

    Midpoint rule in hour angle between -omega_s and +omega_s (each pixel's
    own sunrise and sunset, eq. 25) with ``n_steps`` steps; the sums still
    have to be multiplied by the step and by G_sc d_r.  The latitude terms
    and ``omega_s`` are scalars when the block shares one latitude.
    """
    east_n, north_n, up_n = normal
    sin_d, cos_d = math.sin(declination), math.cos(declination)
    beam_slope = np.zeros_like(up_n)
    beam_flat = np.zeros_like(up_n)
    diffuse_flat = np.zeros_like(up_n)
    for j in range(n_steps):
        omega = omega_s * (-1.0 + (2.0 * j + 1.0) / n_steps)
        cos_w = np.cos(omega)
        # Unit vector toward the sun (east, north, up); "up" is FAO-56
        # Annex 3 eq. 3-15, sin(beta).
        up = sin_phi * sin_d + cos_phi * cos_d * cos_w
        east = -cos_d * np.sin(omega)
        north = cos_phi * sin_d - sin_phi * cos_d * cos_w
        k_beam, k_diffuse = clear_sky_beam_diffuse_indices(
            up, pressure, water, turbidity, coefficients=coefficients
        )
        # Angle of incidence as the dot product of the sun vector and the
        # surface normal (Duffie & Beckman eq. 1.6.3 in vector form) [3].
        on_slope = k_beam * np.maximum(east_n * east + north_n * north + up_n * up, 0.0)
        if horizons is not None:
            sun_azimuth = np.mod(np.degrees(np.arctan2(east, north)), 360.0)
            sun_elevation = np.degrees(np.arcsin(np.clip(up, -1.0, 1.0)))
            on_slope = on_slope * (sun_elevation > horizon_at(horizons, azimuths, sun_azimuth))
        beam_slope += on_slope
        beam_flat += k_beam * up
        diffuse_flat += k_diffuse * up
    return beam_slope, beam_flat, diffuse_flat


def clear_sky_daily_slope_flat(latitude, day_of_year, slope, aspect, pressure,
                               precipitable_water, sky_view_factor=None, albedo=0.0,
                               horizon_angles=None, horizon_azimuths=None, *, turbidity=1.0,
                               coefficients="asce-ewri-2005", step_minutes=5.0):
    """Daily clear-sky shortwave on each pixel's slope and on flat ground.

    The day is swept in hour angle from sunrise to sunset (FAO-56 eqs. 24,
    23 and 25 for declination, Earth-Sun distance and sunset hour angle)
    with steps of about ``step_minutes``.  At each step, with ``G_sc d_r``
    the extraterrestrial irradiance normal to the sun and sin(beta) from
    Annex 3 eq. 3-15:

    * flat ground: beam ``K_B G_sc d_r sin(beta)``, diffuse
      ``K_D G_sc d_r sin(beta)`` (Annex 3 eqs. 3-17 to 3-20, per instant);
    * slope: beam ``K_B G_sc d_r max(cos theta, 0)``, zero where the terrain
      hides the sun (if horizons are given), and diffuse
      ``K_D G_sc d_r sin(beta) V``; plus ``albedo (flat total) (1 - V)``
      reflected by the terrain in view.

    Parameters
    ----------
    latitude : float or numpy.ndarray
        Latitude, north positive [deg].
    day_of_year : int
        Day of the year J, 1..366 [1].
    slope : float or numpy.ndarray
        Surface slope, 0 = horizontal [deg].
    aspect : float or numpy.ndarray
        Downslope direction clockwise from north; NaN allowed where
        ``slope == 0`` [deg].
    pressure : float or numpy.ndarray
        Atmospheric pressure P [kPa].
    precipitable_water : float or numpy.ndarray
        Precipitable water W [mm].
    sky_view_factor : float or numpy.ndarray, optional
        Sky-view factor V; None for a tilted plane on flat ground,
        ``(1 + cos s) / 2``.  For a DEM pass the horizon-based factor
        (``horizon.dozier_frew_1990_sky_view_factor``) [1].
    albedo : float or numpy.ndarray, optional
        Albedo of the terrain that reflects onto the pixel [1].
    horizon_angles : numpy.ndarray, optional
        Horizon angles of shape ``(n_azimuths,) + pixels' shape``, from
        :func:`~radledger.physics.horizon.horizon_angles` [deg].
    horizon_azimuths : array_like, optional
        Their azimuths, clockwise from north, increasing [deg].
    turbidity : float, optional
        Turbidity coefficient K_t, 0 < K_t <= 1 [1].
    coefficients : {"asce-ewri-2005", "fao56"}, optional
        Coefficient set of the beam and diffuse indices.
    step_minutes : float, optional
        Largest time step of the sweep [min].

    Returns
    -------
    on_slope, on_flat : tuple of numpy.ndarray
        Daily clear-sky shortwave on the slope and on flat ground at the
        same place [MJ m-2 day-1].
    """
    if sky_view_factor is None:
        sky_view_factor = 0.5 * (1.0 + np.cos(np.radians(slope)))
    arrays = np.broadcast_arrays(
        *(np.asarray(a, dtype=np.float64) for a in (
            latitude, slope, aspect, pressure, precipitable_water, sky_view_factor, albedo
        ))
    )
    shape = arrays[0].shape
    lat, s, asp, pres, water, svf, alb = (a.ravel() for a in arrays)
    horizons = None
    if horizon_angles is not None:
        if horizon_azimuths is None:
            raise ValueError("horizon_angles need their horizon_azimuths")
        horizons = np.asarray(horizon_angles)
        if horizons.shape[1:] != shape:
            raise ValueError(
                f"horizon_angles of shape {horizons.shape} do not match pixels of shape {shape}"
            )
        horizons = horizons.reshape(horizons.shape[0], -1)
    declination = float(solar_declination(day_of_year))
    omega_s = sunset_hour_angle(lat, declination)
    if not step_minutes > 0:
        raise ValueError("step_minutes must be positive")
    widest = float(np.nanmax(omega_s)) if omega_s.size and np.isfinite(omega_s).any() else 0.0
    n_steps = max(1, math.ceil(2.0 * widest * _MINUTES_PER_RADIAN / step_minutes))

    phi = np.radians(lat)
    slope_rad = np.radians(s)
    aspect_rad = np.radians(np.where(s == 0.0, 0.0, asp))
    on_slope = np.empty_like(lat)
    on_flat = np.empty_like(lat)
    for start in range(0, lat.size, _BLOCK):
        part = slice(start, start + _BLOCK)
        sin_slope = np.sin(slope_rad[part])
        normal = (
            sin_slope * np.sin(aspect_rad[part]),
            sin_slope * np.cos(aspect_rad[part]),
            np.cos(slope_rad[part]),
        )
        # One latitude for the whole block: the sun's path is shared (scalars).
        lat_part = phi[part]
        if lat_part.size and np.all(lat_part == lat_part[0]):
            lat_part, omega_part = lat_part[0], omega_s[part][0]
        else:
            omega_part = omega_s[part]
        beam_slope, beam_flat, diffuse_flat = _day_integrals(
            np.sin(lat_part), np.cos(lat_part), omega_part, normal, pres[part], water[part],
            None if horizons is None else horizons[:, part], horizon_azimuths, declination,
            n_steps, turbidity, coefficients,
        )
        # G_sc [MJ m-2 min-1] d_r times the step in minutes of solar time.
        scale = (
            SOLAR_CONSTANT * inverse_relative_distance(day_of_year)
            * (2.0 * omega_s[part] / n_steps) * _MINUTES_PER_RADIAN
        )
        flat = beam_flat + diffuse_flat
        v = svf[part]
        on_slope[part] = scale * (beam_slope + v * diffuse_flat + alb[part] * (1.0 - v) * flat)
        on_flat[part] = scale * flat
    return on_slope.reshape(shape), on_flat.reshape(shape)


def clear_sky_slope_ratio_daily(latitude, day_of_year, slope, aspect, pressure,
                                precipitable_water, sky_view_factor=None, albedo=0.0,
                                horizon_angles=None, horizon_azimuths=None, *, turbidity=1.0,
                                coefficients="asce-ewri-2005", step_minutes=5.0):
    """Ratio of a day's clear-sky shortwave on the slope to that on flat ground.

    ``on_slope / on_flat`` of :func:`clear_sky_daily_slope_flat` (see there
    for the model and the parameters); 1 where flat ground gets no sun at all
    (polar night), NaN where an input is NaN.

    Parameters
    ----------
    latitude : float or numpy.ndarray
        Latitude, north positive [deg].
    day_of_year : int
        Day of the year J, 1..366 [1].
    slope : float or numpy.ndarray
        Surface slope [deg].
    aspect : float or numpy.ndarray
        Downslope direction clockwise from north [deg].
    pressure : float or numpy.ndarray
        Atmospheric pressure P [kPa].
    precipitable_water : float or numpy.ndarray
        Precipitable water W [mm].
    sky_view_factor : float or numpy.ndarray, optional
        Sky-view factor V; None for ``(1 + cos s) / 2`` [1].
    albedo : float or numpy.ndarray, optional
        Albedo of the terrain that reflects onto the pixel [1].
    horizon_angles : numpy.ndarray, optional
        Horizon angles of shape ``(n_azimuths,) + pixels' shape`` [deg].
    horizon_azimuths : array_like, optional
        Their azimuths, clockwise from north [deg].
    turbidity : float, optional
        Turbidity coefficient K_t [1].
    coefficients : {"asce-ewri-2005", "fao56"}, optional
        Coefficient set of the beam and diffuse indices.
    step_minutes : float, optional
        Largest time step of the sweep [min].

    Returns
    -------
    numpy.ndarray
        Daily clear-sky ratio slope / flat [1].
    """
    on_slope, on_flat = clear_sky_daily_slope_flat(
        latitude, day_of_year, slope, aspect, pressure, precipitable_water, sky_view_factor,
        albedo, horizon_angles, horizon_azimuths, turbidity=turbidity,
        coefficients=coefficients, step_minutes=step_minutes,
    )
    sunny = on_flat > 0.0
    ratio = np.divide(on_slope, on_flat, out=np.ones_like(on_flat), where=sunny)
    ratio[np.isnan(on_slope) | np.isnan(on_flat)] = np.nan
    return ratio
