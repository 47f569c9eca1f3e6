"""Shortwave (solar) radiation: net shortwave, clear-sky shortwave, pressure.

Every function accepts Python floats, NumPy, Dask or xarray arrays and returns
the same kind.  Clear-sky functions return the units of the extraterrestrial
radiation they are given (W m-2 for an instant, MJ m-2 per period or day for
totals).

References
----------
.. [1] Allen, R. G., Pereira, L. S., Raes, D., Smith, M. (1998). Crop
   evapotranspiration. FAO Irrigation and Drainage Paper 56, FAO, Rome.
   Eqs. 7, 37, 38; Annex 3 eqs. 3-15 and 3-17 to 3-20.
.. [2] ASCE-EWRI (2005). The ASCE standardized reference evapotranspiration
   equation. ASCE, Reston VA.  Appendix D, eqs. D.1-D.4.
"""

from __future__ import annotations

import numpy as np

from .constants import _where

__all__ = [
    "net_shortwave",
    "atmospheric_pressure",
    "clear_sky_shortwave_fao56",
    "precipitable_water",
    "clear_sky_beam_diffuse_indices",
    "clear_sky_shortwave_beam_diffuse",
    "BEAM_DIFFUSE_COEFFICIENTS",
]


def net_shortwave(albedo, shortwave_down):
    """Net shortwave radiation, FAO-56 eq. 38.

    Parameters
    ----------
    albedo : float or array_like
        Surface albedo, 0..1 [1].
    shortwave_down : float or array_like
        Incoming (global) shortwave radiation [W m-2] or [MJ m-2 day-1].

    Returns
    -------
    R_ns : float or array
        ``(1 - albedo) R_s``, in the units of ``shortwave_down``.
    """
    return (1.0 - albedo) * shortwave_down


def atmospheric_pressure(elevation):
    """Mean atmospheric pressure at an elevation, FAO-56 eq. 7.

    Parameters
    ----------
    elevation : float or array_like
        Elevation above sea level [m].

    Returns
    -------
    P : float or array
        ``101.3 ((293 - 0.0065 z) / 293) ** 5.26`` [kPa].
    """
    return 101.3 * ((293.0 - 0.0065 * elevation) / 293.0) ** 5.26


def clear_sky_shortwave_fao56(extraterrestrial, elevation):
    """Clear-sky shortwave radiation, FAO-56 eq. 37 (= ASCE-EWRI eqs. 19 and 45).

    Holds for daily and hourly totals; applied to an instantaneous
    extraterrestrial irradiance it gives the same fraction of it.

    Parameters
    ----------
    extraterrestrial : float or array_like
        Extraterrestrial radiation R_a [MJ m-2 day-1], [MJ m-2 per period]
        or [W m-2].
    elevation : float or array_like
        Station elevation above sea level [m].

    Returns
    -------
    R_so : float or array
        ``(0.75 + 2e-5 z) R_a``, in the units of ``extraterrestrial``.
    """
    return (0.75 + 2e-5 * elevation) * extraterrestrial


def precipitable_water(vapour_pressure, pressure):
    """Precipitable water in the atmosphere, FAO-56 eq. 3-19 / ASCE-EWRI eq. D.3.

    Parameters
    ----------
    vapour_pressure : float or array_like
        Actual vapour pressure near the surface [kPa].
    pressure : float or array_like
        Atmospheric pressure [kPa].

    Returns
    -------
    W : float or array
        ``0.14 e_a P + 2.1`` [mm].
    """
    return 0.14 * vapour_pressure * pressure + 2.1


#: Coefficients of the beam clearness index
#: ``K_B = 0.98 exp(-a P / (K_t sin(beta)) - b (W / sin(beta)) ** c)`` and of
#: the diffuse index ``K_D = d - e K_B`` (for ``K_B >= 0.15``).
#: "fao56": FAO-56 Annex 3 eqs. 3-18 and 3-20 (read from the paper).
#: "asce-ewri-2005": ASCE-EWRI (2005) eqs. D.2 and D.4 as quoted in the
#: docstrings of the open-source RefET package (WSWUP/RefET, ``calcs.py``);
#: not read from the ASCE report itself.
BEAM_DIFFUSE_COEFFICIENTS = {
    "fao56": {"a": 0.00146, "b": 0.091, "c": 0.25, "d": 0.35, "e": 0.33},
    "asce-ewri-2005": {"a": 0.00146, "b": 0.075, "c": 0.4, "d": 0.35, "e": 0.36},
}

# Lower bound on sin(beta) inside K_B so that a grazing sun cannot divide by
# zero; the result is set to zero anyway wherever the sun is down.  The 0.01
# follows the RefET implementation of ASCE-EWRI Appendix D (common practice).
_MIN_SIN_ELEVATION = 0.01


def clear_sky_beam_diffuse_indices(
    cos_zenith,
    pressure,
    precipitable_water,
    turbidity=1.0,
    *,
    coefficients="asce-ewri-2005",
):
    """Beam and diffuse clear-sky indices K_B and K_D (FAO-56 Annex 3 / ASCE-EWRI D).

    ``K_B = 0.98 exp(-a P / (K_t sin(beta)) - b (W / sin(beta)) ** c)``
    (FAO-56 eq. 3-18, ASCE-EWRI eq. D.2) and ``K_D = d - e K_B`` for
    ``K_B >= 0.15``, ``K_D = 0.18 + 0.82 K_B`` for ``K_B < 0.15`` (FAO-56
    eq. 3-20, ASCE-EWRI eq. D.4).  Both are zero wherever the sun is at or
    below the horizon.  ``K_B R_a`` is the clear-sky beam and ``K_D R_a`` the
    clear-sky diffuse radiation on a horizontal surface.

    Parameters
    ----------
    cos_zenith : float or array_like
        Sine of the sun's elevation beta, i.e. cosine of the zenith angle, at
        the instant or the period's midpoint [1].
    pressure : float or array_like
        Atmospheric pressure P [kPa].
    precipitable_water : float or array_like
        Precipitable water W (see :func:`precipitable_water`) [mm].
    turbidity : float or array_like, optional
        Turbidity coefficient K_t, 0 < K_t <= 1; 1.0 for clean air, about 0.5
        for extremely turbid, dusty or polluted air [1].
    coefficients : {"asce-ewri-2005", "fao56"}, optional
        Which published set of coefficients a..e to use; see
        :data:`BEAM_DIFFUSE_COEFFICIENTS`.

    Returns
    -------
    k_beam, k_diffuse : tuple of float or array
        Beam index K_B [1] and diffuse index K_D [1].
    """
    try:
        c = BEAM_DIFFUSE_COEFFICIENTS[coefficients]
    except (KeyError, TypeError):
        valid = ", ".join(BEAM_DIFFUSE_COEFFICIENTS)
        raise ValueError(
            f"unknown beam/diffuse coefficients {coefficients!r}; use one of: {valid}"
        ) from None
    sin_beta = np.maximum(cos_zenith, _MIN_SIN_ELEVATION)
    k_beam = 0.98 * np.exp(
        -c["a"] * pressure / (turbidity * sin_beta)
        - c["b"] * (precipitable_water / sin_beta) ** c["c"]
    )
    k_diffuse = _where(k_beam >= 0.15, c["d"] - c["e"] * k_beam, 0.18 + 0.82 * k_beam)
    sun_up = cos_zenith > 0.0
    return _where(sun_up, k_beam, 0.0), _where(sun_up, k_diffuse, 0.0)


def clear_sky_shortwave_beam_diffuse(
    extraterrestrial,
    cos_zenith,
    pressure,
    precipitable_water,
    turbidity=1.0,
    *,
    coefficients="asce-ewri-2005",
):
    """Clear-sky shortwave from a beam and a diffuse index (FAO-56 Annex 3 / ASCE-EWRI D).

    ``R_so = (K_B + K_D) R_a`` (FAO-56 eq. 3-17, ASCE-EWRI eq. D.1) with the
    indices K_B and K_D of :func:`clear_sky_beam_diffuse_indices`.  Zero
    wherever the sun is at or below the horizon.

    Parameters
    ----------
    extraterrestrial : float or array_like
        Extraterrestrial radiation R_a on a horizontal surface for the same
        instant or period [W m-2] or [MJ m-2 per period].
    cos_zenith : float or array_like
        Sine of the sun's elevation beta, i.e. cosine of the zenith angle, at
        the instant or the period's midpoint [1].
    pressure : float or array_like
        Atmospheric pressure P [kPa].
    precipitable_water : float or array_like
        Precipitable water W (see :func:`precipitable_water`) [mm].
    turbidity : float or array_like, optional
        Turbidity coefficient K_t, 0 < K_t <= 1; 1.0 for clean air, about 0.5
        for extremely turbid, dusty or polluted air [1].
    coefficients : {"asce-ewri-2005", "fao56"}, optional
        Which published set of coefficients a..e to use; see
        :data:`BEAM_DIFFUSE_COEFFICIENTS`.

    Returns
    -------
    R_so : float or array
        Clear-sky shortwave radiation, in the units of ``extraterrestrial``.
    """
    k_beam, k_diffuse = clear_sky_beam_diffuse_indices(
        cos_zenith, pressure, precipitable_water, turbidity, coefficients=coefficients
    )
    sun_up = cos_zenith > 0.0
    return _where(sun_up, (k_beam + k_diffuse) * extraterrestrial, 0.0)
