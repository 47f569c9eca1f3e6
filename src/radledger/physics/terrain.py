"""Terrain: slope and aspect, sun incidence, beam/diffuse split, tilted fluxes, snow.

Grid conventions: 2-D arrays north up (row 0 is the northern edge, rows run
southward, columns eastward), pixel sizes ``dx`` (east-west) and ``dy``
(north-south) in metres.  Angles in degrees.  Aspect is the downslope
direction, clockwise from north (0 = facing north, 90 = east, 180 = south),
NaN where the ground is flat.  Sun azimuth is clockwise from north.

:func:`horn_1981_slope_aspect` needs neighbours and takes a NumPy array; the
other functions work pixel by pixel and accept Python floats, NumPy, Dask or
xarray arrays, returning the same kind.

References
----------
.. [1] Horn, B. K. P. (1981). Hill shading and the reflectance map.
   Proceedings of the IEEE 69(1), 14-47. https://doi.org/10.1109/PROC.1981.11918
.. [2] Duffie, J. A., Beckman, W. A. (2013). Solar Engineering of Thermal
   Processes, 4th ed. Wiley.  Eq. 1.6.3 (angle of incidence) and section 2.15
   (isotropic sky on a tilted surface); equation numbers from memory.
.. [3] Erbs, D. G., Klein, S. A., Duffie, J. A. (1982). Estimation of the
   diffuse radiation fraction for hourly, daily and monthly-average global
   radiation. Solar Energy 28(4), 293-302.
   https://doi.org/10.1016/0038-092X(82)90302-4
.. [4] Liu, B. Y. H., Jordan, R. C. (1963). The long-term average performance
   of flat-plate solar-energy collectors. Solar Energy 7(2), 53-74.
   https://doi.org/10.1016/0038-092X(63)90006-9
.. [5] Pluess, C., Ohmura, A. (1997). Longwave radiation on snow-covered
   mountainous surfaces. Journal of Applied Meteorology 36(6), 818-824.
   https://doi.org/10.1175/1520-0450-36.6.818 (volume and pages from
   memory).
.. [6] Hall, D. K., Riggs, G. A., Salomonson, V. V. (1995). Development of
   methods for mapping global snow cover using moderate resolution imaging
   spectroradiometer data. Remote Sensing of Environment 54(2), 127-140.
   https://doi.org/10.1016/0034-4257(95)00137-P
"""

from __future__ import annotations

import numpy as np

from .constants import _clip, _where
from .longwave import surface_emission

__all__ = [
    "horn_1981_slope_aspect",
    "cos_incidence",
    "erbs_1982",
    "sky_view_factor_plane",
    "incident_shortwave_isotropic",
    "longwave_down_terrain",
    "snow_emissivity_blend",
    "snow_fraction_from_ndsi",
    "SNOW_EMISSIVITY",
]

#: Broadband thermal emissivity of snow (common practice: snow is close to a
#: black body in the thermal infrared; 0.98-0.99 is the usual value).
SNOW_EMISSIVITY = 0.99


def horn_1981_slope_aspect(elevation, dx, dy):
    """Slope and aspect from Horn's (1981) weighted 3 x 3 differences.

    With the 3 x 3 window ``a b c / d e f / g h i`` (north row first),
    ``dz/dx = ((c + 2f + i) - (a + 2d + g)) / (8 dx)`` (eastward) and
    ``dz/dy = ((a + 2b + c) - (g + 2h + i)) / (8 dy)`` (northward) [1];
    slope ``= atan(hypot(dz/dx, dz/dy))``, aspect = the direction of
    ``-grad z`` clockwise from north.  Exact for any plane.

    Parameters
    ----------
    elevation : numpy.ndarray
        2-D DEM, north up, including any halo; NaN for no data [m].
    dx : float
        Pixel size east-west [m].
    dy : float
        Pixel size north-south [m].

    Returns
    -------
    slope, aspect : tuple of numpy.ndarray
        float64 arrays shaped like ``elevation``: slope [deg] (0 = flat) and
        aspect [deg] in [0, 360), NaN where the slope is 0.  The outermost
        rows and columns, which lack neighbours, are NaN (a halo of one pixel
        suffices when running chunk by chunk), as is every pixel at or next
        to a NaN elevation.
    """
    z = np.asarray(elevation, dtype=np.float64)
    if z.ndim != 2:
        raise ValueError(f"elevation must be a 2-D array, not {z.ndim}-D")
    if not (dx > 0 and dy > 0):
        raise ValueError("dx and dy must be positive")
    slope = np.full(z.shape, np.nan)
    aspect = np.full(z.shape, np.nan)
    if min(z.shape) < 3:
        return slope, aspect
    a, b, c = z[:-2, :-2], z[:-2, 1:-1], z[:-2, 2:]
    d, f = z[1:-1, :-2], z[1:-1, 2:]
    g, h, i = z[2:, :-2], z[2:, 1:-1], z[2:, 2:]
    dz_east = ((c + 2.0 * f + i) - (a + 2.0 * d + g)) / (8.0 * dx)
    dz_north = ((a + 2.0 * b + c) - (g + 2.0 * h + i)) / (8.0 * dy)
    gradient = np.hypot(dz_east, dz_north)
    slope[1:-1, 1:-1] = np.degrees(np.arctan(gradient))
    downslope = np.mod(np.degrees(np.arctan2(-dz_east, -dz_north)), 360.0)
    aspect[1:-1, 1:-1] = np.where(gradient > 0.0, downslope, np.nan)
    # The window's centre does not enter the differences: blank no-data pixels.
    nodata = np.isnan(z)
    slope[nodata] = np.nan
    aspect[nodata] = np.nan
    return slope, aspect


def cos_incidence(slope, aspect, sun_zenith, sun_azimuth):
    """Cosine of the sun's angle of incidence on a tilted surface.

    ``cos(theta) = cos(s) cos(z) + sin(s) sin(z) cos(sun_azimuth - aspect)``
    (Duffie & Beckman 2013, eq. 1.6.3 [2]; the same as pvlib's
    ``aoi_projection``).  Negative when the surface faces away from the sun
    (self-shading); callers clip at zero.  Where ``slope == 0`` the aspect is
    ignored (it may be NaN).

    Parameters
    ----------
    slope : float or array_like
        Surface slope, 0 = horizontal [deg].
    aspect : float or array_like
        Downslope direction, clockwise from north [deg].
    sun_zenith : float or array_like
        Solar zenith angle [deg].
    sun_azimuth : float or array_like
        Solar azimuth, clockwise from north [deg].

    Returns
    -------
    cos_theta : float or array
        Cosine of the angle of incidence, -1..1 [1].
    """
    s = np.radians(slope)
    z = np.radians(sun_zenith)
    tilt = np.sin(s) * np.sin(z) * np.cos(np.radians(sun_azimuth - aspect))
    return np.cos(s) * np.cos(z) + _where(slope == 0.0, 0.0, tilt)


def erbs_1982(shortwave_down, sun_zenith, extraterrestrial_normal, *, min_cos_zenith=0.065,
              max_zenith=87.0):
    """Split global horizontal shortwave into beam and diffuse, Erbs et al. (1982).

    Clearness index ``k_t = R_s / (G_on max(cos z, min_cos_zenith))``,
    limited to 0..1; diffuse fraction ``1 - 0.09 k_t`` for ``k_t <= 0.22``,
    ``0.9511 - 0.1604 k_t + 4.388 k_t^2 - 16.638 k_t^3 + 12.336 k_t^4`` for
    ``0.22 < k_t <= 0.80`` and 0.165 above (the hourly correlation of [3],
    eq. 1, number from memory).  The beam normal irradiance is
    ``(R_s - D) / cos z``.  Where the sun is lower than ``max_zenith``, or
    ``R_s`` or the beam would be negative, the beam is 0 and all of ``R_s``
    is diffuse.  The limits follow pvlib's ``irradiance.erbs``.

    Parameters
    ----------
    shortwave_down : float or array_like
        Global horizontal shortwave irradiance R_s [W m-2].
    sun_zenith : float or array_like
        Solar zenith angle [deg].
    extraterrestrial_normal : float or array_like
        Extraterrestrial irradiance on a plane normal to the sun, G_on,
        e.g. ``SOLAR_CONSTANT_W * inverse_relative_distance(J)`` [W m-2].
    min_cos_zenith : float, optional
        Lower limit of cos z in the clearness index [1].
    max_zenith : float, optional
        Zenith angle beyond which there is no beam [deg].

    Returns
    -------
    beam_normal, diffuse_horizontal : tuple of float or array
        Direct normal irradiance [W m-2] and diffuse horizontal irradiance
        [W m-2].
    """
    cos_z = np.cos(np.radians(sun_zenith))
    kt = shortwave_down / (extraterrestrial_normal * np.maximum(cos_z, min_cos_zenith))
    kt = _clip(kt, 0.0, 1.0)
    middle = 0.9511 - 0.1604 * kt + 4.388 * kt**2 - 16.638 * kt**3 + 12.336 * kt**4
    fraction = _where((kt > 0.22) & (kt <= 0.8), middle, 1.0 - 0.09 * kt)
    fraction = _where(kt > 0.8, 0.165, fraction)
    diffuse = fraction * shortwave_down
    beam = (shortwave_down - diffuse) / cos_z
    bad = (sun_zenith > max_zenith) | (shortwave_down < 0.0) | (beam < 0.0)
    return _where(bad, 0.0, beam), _where(bad, shortwave_down, diffuse)


def sky_view_factor_plane(slope):
    """Sky-view factor of an unobstructed plane, ``(1 + cos s) / 2``.

    The view factor to the sky of a tilted plane standing on horizontal
    ground (Liu & Jordan 1963 [4]; Duffie & Beckman 2013, section 2.15 [2]);
    ``1 - V = (1 - cos s) / 2`` is its view factor to the ground.  A pixel
    inside a slope that continues beyond it sees more sky (1 for a uniform
    slope); for a DEM use the horizon-based factor
    (``horizon.dozier_frew_1990_sky_view_factor``).

    Parameters
    ----------
    slope : float or array_like
        Surface slope, 0 = horizontal [deg].

    Returns
    -------
    V : float or array
        Sky-view factor, 0.5..1 for slopes up to 90 deg [1].
    """
    return 0.5 * (1.0 + np.cos(np.radians(slope)))


def incident_shortwave_isotropic(beam_normal, diffuse_horizontal, shortwave_down, cos_incidence,
                                 sky_view_factor, albedo, sunlit=1.0):
    """Shortwave irradiance on a tilted pixel, isotropic sky.

    ``B max(cos theta, 0) sunlit + D V + albedo R_s (1 - V)``: beam on the
    surface, isotropic sky diffuse weighted by the sky-view factor V, and
    ground-reflected shortwave from the terrain seen in the rest of the
    hemisphere.  With ``V = (1 + cos s) / 2`` and no shadow this is the
    isotropic tilted-surface model of Liu & Jordan (1963) [4] (Duffie &
    Beckman 2013, section 2.15 [2]; pvlib's ``get_total_irradiance`` with
    ``model="isotropic"``); with V from the terrain's horizons (Dozier &
    Frew 1990) it is the usual generalisation to mountains.  The reflecting
    terrain is taken to receive ``R_s`` and to have the pixel's albedo.

    Parameters
    ----------
    beam_normal : float or array_like
        Direct normal irradiance, zero when the sun is down [W m-2].
    diffuse_horizontal : float or array_like
        Diffuse irradiance on a horizontal surface [W m-2].
    shortwave_down : float or array_like
        Global horizontal irradiance R_s [W m-2].
    cos_incidence : float or array_like
        Cosine of the angle of incidence (:func:`cos_incidence`) [1].
    sky_view_factor : float or array_like
        Sky-view factor V, 0..1 [1].
    albedo : float or array_like
        Albedo of the surrounding terrain, 0..1 [1].
    sunlit : float or array_like, optional
        1 where the sun is seen, 0 in a cast shadow (booleans work) [1].

    Returns
    -------
    R_s_tilted : float or array
        Global shortwave irradiance on the tilted surface [W m-2].
    """
    beam = beam_normal * np.maximum(cos_incidence, 0.0) * sunlit
    return (
        beam
        + diffuse_horizontal * sky_view_factor
        + albedo * shortwave_down * (1.0 - sky_view_factor)
    )


def longwave_down_terrain(sky_longwave_down, sky_view_factor, terrain_temperature,
                          terrain_emissivity):
    """Downwelling longwave on a pixel that sees both sky and terrain.

    ``L = L_sky V + (1 - V) eps_t sigma T_t^4``, the form of Pluess & Ohmura
    (1997) [5] simplified: the surrounding terrain is taken at the pixel's
    own surface temperature and emissivity, and the sky longwave it
    reflects is neglected.  With V = 1 (open flat ground) this is ``L_sky``.

    Parameters
    ----------
    sky_longwave_down : float or array_like
        Longwave irradiance from the unobstructed sky hemisphere [W m-2].
    sky_view_factor : float or array_like
        Sky-view factor V, 0..1 [1].
    terrain_temperature : float or array_like
        Surface temperature of the surrounding terrain [K].
    terrain_emissivity : float or array_like
        Broadband emissivity of the surrounding terrain, 0..1 [1].

    Returns
    -------
    L_down : float or array
        Downwelling longwave irradiance [W m-2].
    """
    terrain = surface_emission(terrain_temperature, terrain_emissivity)
    return sky_longwave_down * sky_view_factor + (1.0 - sky_view_factor) * terrain


def snow_emissivity_blend(surface_emissivity, snow_fraction, snow_emissivity=SNOW_EMISSIVITY):
    """Emissivity of a pixel partly covered by snow, area-weighted.

    ``eps = (1 - f) eps_surface + f eps_snow``; ``eps_snow = 0.99`` by
    default (common practice).

    Parameters
    ----------
    surface_emissivity : float or array_like
        Broadband emissivity of the snow-free surface, 0..1 [1].
    snow_fraction : float or array_like
        Fraction of the pixel covered by snow, 0..1 [1].
    snow_emissivity : float or array_like, optional
        Broadband emissivity of snow [1].

    Returns
    -------
    eps : float or array
        Blended broadband emissivity [1].
    """
    return (1.0 - snow_fraction) * surface_emissivity + snow_fraction * snow_emissivity


def snow_fraction_from_ndsi(ndsi, threshold=0.4):
    """Snow / no snow from the Normalized Difference Snow Index, Hall et al. (1995).

    NDSI = (green - SWIR) / (green + SWIR); a pixel is snow where NDSI >= 0.4
    [6] (Hall et al. add a near-infrared reflectance test, from memory,
    that is left to the caller).

    Parameters
    ----------
    ndsi : float or array_like
        Normalized Difference Snow Index, -1..1 [1].
    threshold : float, optional
        NDSI at and above which a pixel is snow [1].

    Returns
    -------
    f : float or array
        1.0 for snow, 0.0 for no snow, NaN where ``ndsi`` is NaN [1].
    """
    return _where(np.isnan(ndsi), np.nan, _where(ndsi >= threshold, 1.0, 0.0))
