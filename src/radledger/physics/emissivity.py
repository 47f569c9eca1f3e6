"""Surface emissivity: land-cover lookup tables and the NDVI-threshold method.

Reading the CSV tables is I/O and lives in :mod:`radledger.io.tables`; this
module only turns a ``{class: emissivity}`` mapping into a lookup array and
applies it.  Array functions accept Python numbers, NumPy, Dask (kept lazy)
or xarray arrays and return the same kind.

References
----------
.. [1] Sobrino, J. A., Jimenez-Munoz, J. C., Paolini, L. (2004). Land surface
   temperature retrieval from LANDSAT TM 5. Remote Sensing of Environment
   90(4), 434-440. https://doi.org/10.1016/j.rse.2004.02.003
.. [2] Carlson, T. N., Ripley, D. A. (1997). On the relation between NDVI,
   fractional vegetation cover, and leaf area index. Remote Sensing of
   Environment 62(3), 241-252. https://doi.org/10.1016/S0034-4257(97)00104-1
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping

import numpy as np

from .constants import _clip, _is_xarray, _where

__all__ = [
    "build_lookup",
    "emissivity_from_classes",
    "missing_classes",
    "sobrino_2004_ndvi",
]

#: Smallest lookup length: every uint8 land-cover code has a slot.
MIN_LOOKUP_LENGTH = 256


def build_lookup(table: Mapping[int, float], unknown=None) -> np.ndarray:
    """Lookup array from a class -> emissivity table.

    Parameters
    ----------
    table : mapping of int to float
        Land-cover class code (>= 0) to broadband emissivity [1].
    unknown : float, optional
        Emissivity for every class the table does not list [1]; ``None``
        (default) leaves those slots NaN so that unlisted classes give NaN.

    Returns
    -------
    numpy.ndarray
        float32 array of length ``max(256, largest class + 1)``; slot ``k``
        holds the emissivity of class ``k``.
    """
    codes = [int(code) for code in table]
    if any(code < 0 for code in codes):
        raise ValueError(f"land-cover classes must be 0 or more, got {min(codes)}")
    length = max(MIN_LOOKUP_LENGTH, max(codes, default=-1) + 1)
    lookup = np.full(length, np.nan if unknown is None else float(unknown), dtype=np.float32)
    for code, value in table.items():
        lookup[int(code)] = value
    return lookup


def _lookup_block(classes, lookup):
    """Apply a lookup to one NumPy block; codes outside it (or not whole) give NaN."""
    classes = np.asarray(classes)
    if classes.dtype.kind in "iu":
        valid = (classes >= 0) & (classes < lookup.size)
        index = np.where(valid, classes, 0)
    else:
        with np.errstate(invalid="ignore"):
            valid = (
                np.isfinite(classes)
                & (classes >= 0)
                & (classes < lookup.size)
                & (classes == np.floor(classes))
            )
        index = np.where(valid, classes, 0).astype(np.intp)
    return np.where(valid, lookup[index], np.float32(np.nan)).astype(np.float32, copy=False)


def emissivity_from_classes(classes, lookup):
    """Emissivity of each pixel from its land-cover class.

    Parameters
    ----------
    classes : int or array_like
        Land-cover class codes [1]; integer or float (NaN allowed for nodata).
    lookup : numpy.ndarray
        Lookup array from :func:`build_lookup` [1].

    Returns
    -------
    emissivity : float or array
        float32 emissivity per pixel [1]; NaN where the class is negative,
        not a whole number, beyond the lookup or unlisted (and no ``unknown``
        value was given).  Dask input stays lazy (one ``map_blocks``);
        xarray input keeps its dims and coords.
    """
    lookup = np.asarray(lookup, dtype=np.float32)
    if _is_xarray(classes):
        result = classes.copy(data=emissivity_from_classes(classes.data, lookup))
        result.attrs = {}
        result.name = None
        return result
    if type(classes).__module__.startswith("dask."):
        return classes.map_blocks(_lookup_block, lookup=lookup, dtype=np.float32)
    out = _lookup_block(classes, lookup)
    return float(out) if out.ndim == 0 else out


def missing_classes(classes_present: Iterable, table: Mapping[int, float]) -> list[int]:
    """Classes that occur in the data but are absent from the table.

    Parameters
    ----------
    classes_present : iterable of int
        Class codes found in the land-cover layer [1].
    table : mapping of int to float
        Land-cover class -> emissivity table [1].

    Returns
    -------
    list of int
        Sorted class codes not listed in ``table``.
    """
    listed = {int(code) for code in table}
    return sorted({int(code) for code in classes_present} - listed)


def sobrino_2004_ndvi(
    ndvi,
    *,
    ndvi_soil=0.2,
    ndvi_vegetation=0.5,
    soil_emissivity=0.97,
    vegetation_emissivity=0.99,
    cavity_factor=0.55,
):
    """Surface emissivity by the NDVI-thresholds method of Sobrino et al. (2004).

    * ``NDVI < ndvi_soil``: bare soil, ``eps = soil_emissivity``;
    * ``NDVI > ndvi_vegetation``: full vegetation, ``eps = vegetation_emissivity``;
    * between: ``eps = eps_v P_v + eps_s (1 - P_v) + d_eps`` with the
      vegetation proportion ``P_v = ((NDVI - NDVI_s) / (NDVI_v - NDVI_s))^2``
      (Carlson & Ripley 1997 [2]) and the cavity term
      ``d_eps = (1 - eps_s) (1 - P_v) F eps_v``, F = 0.55.

    With the default values the mixed range reduces to Sobrino's
    ``eps = 0.004 P_v + 0.986``.  The thresholds, end-member emissivities and F
    are from memory of Sobrino et al. (2004) [1] (where they serve Landsat TM
    band 6; for a broadband emissivity they are an approximation).  Sobrino
    derives the soil value from red reflectance; a constant stands in here.
    The method does not treat water (NDVI < 0 gives the soil value): take water
    from a land-cover table.

    Parameters
    ----------
    ndvi : float or array_like
        Normalised difference vegetation index [1].
    ndvi_soil : float, optional
        NDVI of bare soil, NDVI_s [1].
    ndvi_vegetation : float, optional
        NDVI of full vegetation cover, NDVI_v [1].
    soil_emissivity : float, optional
        Emissivity of bare soil, eps_s [1].
    vegetation_emissivity : float, optional
        Emissivity of full vegetation, eps_v [1].
    cavity_factor : float, optional
        Geometric factor F of the cavity term; 0 drops the term [1].

    Returns
    -------
    emissivity : float or array
        Surface emissivity [1]; NaN where NDVI is NaN.
    """
    span = ndvi_vegetation - ndvi_soil
    p_v = _clip((ndvi - ndvi_soil) / span, 0.0, 1.0) ** 2
    mixed = (
        vegetation_emissivity * p_v
        + soil_emissivity * (1.0 - p_v)
        + (1.0 - soil_emissivity) * (1.0 - p_v) * cavity_factor * vegetation_emissivity
    )
    result = _where(ndvi < ndvi_soil, soil_emissivity, mixed)
    # NaN NDVI fails both comparisons and keeps the (NaN) mixed value.
    return _where(ndvi > ndvi_vegetation, vegetation_emissivity, result)
