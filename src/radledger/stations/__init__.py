"""Weather-station tables turned into grids, and checked against the grids.

Pure numeric core, no file reading and no config:

* :mod:`radledger.stations.gridding` - elevation-aware gridding of one date's
  station values (linear trend in elevation and position, residuals
  interpolated by thin-plate spline, inverse distance weighting or ordinary
  kriging), fitted once and evaluated chunk by chunk; leave-one-out
  cross-validation.
* :mod:`radledger.stations.agreement` - agreement statistics (n, bias, MAE,
  RMSE, r2, least-squares slope and intercept) of modelled against observed
  values.
"""

from .agreement import Agreement, agreement
from .gridding import (
    METHODS,
    MIN_STATIONS,
    TRENDS,
    CrossValidation,
    FittedField,
    Trend,
    fit_field,
    leave_one_out,
)

__all__ = [
    "METHODS",
    "MIN_STATIONS",
    "TRENDS",
    "Agreement",
    "CrossValidation",
    "FittedField",
    "Trend",
    "agreement",
    "fit_field",
    "leave_one_out",
]
