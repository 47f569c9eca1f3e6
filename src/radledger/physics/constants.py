"""Physical constants and unit factors used by the radledger physics.

Also home of two private helpers, :func:`_where` and :func:`_clip`, that every
physics module shares.  ``np.where`` and ``np.clip`` silently turn an xarray
``DataArray`` into a bare NumPy array, so the physics uses these instead; they
keep the array kind of their inputs (float, NumPy, Dask, xarray).

References
----------
.. [1] Tiesinga, E., Mohr, P. J., Newell, D. B., Taylor, B. N. (2021). CODATA
   recommended values of the fundamental physical constants: 2018. Rev. Mod.
   Phys. 93, 025010. https://doi.org/10.1103/RevModPhys.93.025010
.. [2] Allen, R. G., Pereira, L. S., Raes, D., Smith, M. (1998). Crop
   evapotranspiration: guidelines for computing crop water requirements. FAO
   Irrigation and Drainage Paper 56, FAO, Rome.  Eq. 21 (solar constant),
   eq. 39 (daily Stefan-Boltzmann constant), Table 3 (unit conversion).
"""

from __future__ import annotations

import numpy as np

#: Stefan-Boltzmann constant [W m-2 K-4], CODATA 2018 (exact in the 2019 SI) [1].
STEFAN_BOLTZMANN = 5.670374419e-8

#: Stefan-Boltzmann constant as FAO-56 prints it for 24-hour totals
#: [MJ K-4 m-2 day-1] (FAO-56 eq. 39) [2].
STEFAN_BOLTZMANN_DAILY = 4.903e-9

#: Solar constant as FAO-56 uses it [MJ m-2 min-1] (FAO-56 eq. 21) [2].
SOLAR_CONSTANT = 0.0820

#: The same solar constant in [W m-2] (= 1366.67 W m-2).
SOLAR_CONSTANT_W = SOLAR_CONSTANT * 1e6 / 60.0

#: One W m-2 held for a day, in [MJ m-2 day-1] (FAO-56 Table 3) [2].
W_TO_MJ_DAY = 0.0864

#: Kelvin at 0 degC [K].
ZERO_CELSIUS = 273.15


def _is_xarray(value) -> bool:
    # xarray is a hard dependency, but the physics must not import it just to
    # check a type: look at the class's module instead.
    return type(value).__module__.startswith("xarray.")


def _where(condition, if_true, if_false):
    """Kind-preserving ``where``: xarray in, xarray out; Dask stays lazy.

    Python scalars in give a NumPy scalar (a ``float`` subclass) out.
    """
    if any(_is_xarray(v) for v in (condition, if_true, if_false)):
        import xarray as xr

        return xr.where(condition, if_true, if_false)
    # NumPy dispatches np.where to dask.array.where for Dask inputs (NEP 18).
    result = np.where(condition, if_true, if_false)
    if isinstance(result, np.ndarray) and result.ndim == 0:
        return result[()]
    return result


def _clip(value, lower, upper):
    """Kind-preserving clip built from the ``np.maximum``/``np.minimum`` ufuncs."""
    return np.minimum(np.maximum(value, lower), upper)
