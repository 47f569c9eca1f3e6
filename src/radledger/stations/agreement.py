"""Agreement statistics between modelled and observed values at stations.

Pairs where either value is NaN are dropped first.  With ``d = modelled -
observed`` over the ``n`` remaining pairs:

* ``bias = mean(d)``, ``mae = mean(|d|)``, ``rmse = sqrt(mean(d**2))``;
* ``r2`` is the squared Pearson correlation coefficient of the pairs;
* ``slope`` and ``intercept`` are the ordinary least-squares line
  ``modelled = slope * observed + intercept`` (observed is the regressor).

Where a statistic is undefined it is NaN rather than an exception, so a
table of many stations or dates can still be written:

* ``n == 0``: every statistic is NaN;
* ``n == 1``: bias, MAE and RMSE are defined; r2, slope and intercept are NaN;
* all observed values equal: slope, intercept and r2 are NaN (no line can be
  fitted against a constant regressor, and the correlation is 0/0);
* all modelled values equal (observed varying): slope is 0, intercept is the
  modelled value, and r2 is NaN (the correlation is 0/0).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Agreement", "agreement"]


@dataclass(frozen=True)
class Agreement:
    """Agreement of modelled with observed values.

    Attributes
    ----------
    n : int
        Number of pairs used (both values not NaN) [1].
    bias : float
        Mean of modelled minus observed [unit of the values].
    mae : float
        Mean absolute difference [unit of the values].
    rmse : float
        Root-mean-square difference [unit of the values].
    r2 : float
        Squared Pearson correlation coefficient [1].
    slope : float
        Slope of the least-squares line modelled = slope * observed + intercept [1].
    intercept : float
        Intercept of that line [unit of the values].
    """

    n: int
    bias: float
    mae: float
    rmse: float
    r2: float
    slope: float
    intercept: float

    def as_dict(self) -> dict[str, float]:
        """The statistics as a plain dict (one row of a table)."""
        return {
            "n": self.n,
            "bias": self.bias,
            "mae": self.mae,
            "rmse": self.rmse,
            "r2": self.r2,
            "slope": self.slope,
            "intercept": self.intercept,
        }


def agreement(observed, modelled) -> Agreement:
    """Agreement statistics of paired observed and modelled values.

    Parameters
    ----------
    observed : array_like
        Observed values, any shape; NaN marks a missing value [unit of the values].
    modelled : array_like
        Modelled values, same shape as ``observed``; NaN marks a missing
        value [unit of the values].

    Returns
    -------
    Agreement
        n, bias, MAE, RMSE, r2, slope and intercept; NaN where undefined
        (see the module docstring).

    Raises
    ------
    ValueError
        If the two arrays do not have the same shape.
    """
    obs = np.asarray(observed, dtype=float)
    mod = np.asarray(modelled, dtype=float)
    if obs.shape != mod.shape:
        raise ValueError(
            f"observed and modelled must have the same shape, got {obs.shape} and {mod.shape}"
        )
    keep = ~(np.isnan(obs) | np.isnan(mod))
    obs = obs[keep].ravel()
    mod = mod[keep].ravel()
    n = int(obs.size)
    nan = float("nan")
    if n == 0:
        return Agreement(0, nan, nan, nan, nan, nan, nan)

    diff = mod - obs
    bias = float(np.mean(diff))
    mae = float(np.mean(np.abs(diff)))
    rmse = float(np.sqrt(np.mean(diff * diff)))

    slope = intercept = r2 = nan
    if n >= 2:
        obs_constant = bool(np.all(obs == obs[0]))
        mod_constant = bool(np.all(mod == mod[0]))
        if not obs_constant:
            obs_mean = np.mean(obs)
            if mod_constant:
                slope, intercept = 0.0, float(mod[0])
            else:
                mod_mean = np.mean(mod)
                dobs = obs - obs_mean
                dmod = mod - mod_mean
                sxx = float(np.dot(dobs, dobs))
                syy = float(np.dot(dmod, dmod))
                sxy = float(np.dot(dobs, dmod))
                slope = sxy / sxx
                intercept = float(mod_mean - slope * obs_mean)
                r2 = min(1.0, sxy * sxy / (sxx * syy))
    return Agreement(n, bias, mae, rmse, r2, slope, intercept)
