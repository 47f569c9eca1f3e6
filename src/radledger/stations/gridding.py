"""Elevation-aware gridding of station values (residual interpolation).

For one date and one variable, the stations that have a value are used to

1. fit a linear trend ``v = b0 + b_z z + b_x x + b_y y`` by least squares
   (station elevation ``z`` [m], grid-CRS coordinates ``x``, ``y`` [m]);
2. interpolate the residuals ``v - trend`` in the plane with one method;
3. at each pixel, add the interpolated residual to the trend evaluated with
   the pixel's DEM elevation and coordinates.

This is residual (detrended) interpolation, the usual way of carrying an
elevation gradient such as the temperature lapse rate into an interpolated
field (common practice; e.g. Daly et al. 1994, PRISM, use an elevation
regression; here one global regression is used).

Trend fall-back (design choice).  A trend term is fitted only when the
stations support it: the full trend (``z``, ``x``, ``y``: 4 coefficients)
needs at least 5 stations, so that it is a least-squares fit and not an exact
fit through 4 points; an elevation-only trend (``z``: 2 coefficients) needs at
least 3.  With fewer stations, or when the stations make a term undefined
(all at one elevation, all on one line), the next simpler trend is used:
full -> elevation only -> ``x``/``y`` only -> constant (the station mean).
Elevation is tried before ``x``/``y`` because it is the dominant gradient of
the variables gridded here (temperature, humidity); ``x``/``y`` alone serves
stations that all stand at one elevation.  ``FittedField.trend.terms`` records
what was used.

Residual interpolation methods:

``spline``
    Thin-plate spline with a degree-1 polynomial (Duchon 1977; Wahba 1990,
    *Spline models for observational data*, ch. 2), through
    :class:`scipy.interpolate.RBFInterpolator` with
    ``kernel="thin_plate_spline"``; option ``smoothing`` (default 0: exact
    interpolation), applied with coordinates in kilometres from the station
    centroid.  Chosen over ``verde.Spline`` because scipy evaluates at any
    set of points (a chunk of pixels), pickles, and adds no dependency chain
    (verde brings pandas, xarray, scikit-learn and pooch).  Needs 3 stations
    not all on one line.
``idw``
    Inverse distance weighting (Shepard 1968) with all stations, weights
    ``1 / d**power``, ``power = 2`` by default; exact at a station.  Needs 1
    station.
``kriging``
    Ordinary kriging (Cressie 1993, *Statistics for spatial data*, sec. 3.2)
    with :class:`pykrige.ok.OrdinaryKriging`.  The variogram model (default
    ``spherical``: sill, range, nugget) is fitted by PyKrige's soft-L1 least
    squares to the empirical semivariogram of the residuals in ``nlags``
    (default 6) equal-width distance bins; ``exact_values=True``.  Needs 6
    stations (15 station pairs for the 6 lag bins; design choice).

If the residuals are all equal (e.g. the trend fits the stations exactly) the
residual field is that constant, whatever the method.

A fitted field is a small picklable object: fit once per date and variable,
then call :meth:`FittedField.predict` on each chunk of pixels (for Dask, e.g.
``dask.array.map_blocks(field.predict, X, Y, Z)``).  ``predict`` works through
a chunk in blocks, so its memory stays bounded whatever the chunk size.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..errors import InputError
from .agreement import agreement

__all__ = [
    "METHODS",
    "MIN_STATIONS",
    "TRENDS",
    "CrossValidation",
    "FittedField",
    "Trend",
    "fit_field",
    "leave_one_out",
]

METHODS = ("spline", "idw", "kriging")
MIN_STATIONS = {"spline": 3, "idw": 1, "kriging": 6}
_OPTIONS = {
    "spline": {"smoothing": 0.0},
    "idw": {"power": 2.0},
    "kriging": {"variogram_model": "spherical", "nlags": 6},
}
# requested trend -> terms tried in order (the fall-back ladder)
TRENDS = {
    "full": (("z", "x", "y"), ("z",), ("x", "y"), ()),
    "elevation": (("z",), ()),
    "xy": (("x", "y"), ()),
    "none": ((),),
}
_KM = 1000.0  # residual interpolation works in km from the station centroid
_BLOCK_CELLS = 2_000_000  # pixels x stations evaluated at once (tens of MB)


def _where(label: str) -> str:
    return f"{label}: " if label else ""


@dataclass(frozen=True)
class Trend:
    """A fitted linear trend ``v = mean + b_z (z - z0) + b_x (x - x0) + b_y (y - y0)``.

    Attributes
    ----------
    terms : tuple of str
        Terms fitted, a subset of ("z", "x", "y"); unused slopes are 0.
    x0, y0, z0 : float
        Station centroid the trend is centred on [m].
    mean : float
        Trend value at the centroid [unit of v].
    b_z : float
        Elevation gradient [unit of v per m].
    b_x, b_y : float
        Horizontal gradients [unit of v per m].
    """

    terms: tuple[str, ...]
    x0: float
    y0: float
    z0: float
    mean: float
    b_z: float = 0.0
    b_x: float = 0.0
    b_y: float = 0.0

    @property
    def b0(self) -> float:
        """Intercept of ``v = b0 + b_z z + b_x x + b_y y`` [unit of v]."""
        return self.mean - self.b_z * self.z0 - self.b_x * self.x0 - self.b_y * self.y0

    def __call__(self, x, y, z):
        """Trend at points ``x``, ``y`` [m] with elevation ``z`` [m]."""
        return (
            self.mean
            + self.b_z * (np.asarray(z, dtype=float) - self.z0)
            + self.b_x * (np.asarray(x, dtype=float) - self.x0)
            + self.b_y * (np.asarray(y, dtype=float) - self.y0)
        )


def _fit_trend(x, y, z, v, ladder) -> Trend:
    centre = {"x": x.mean(), "y": y.mean(), "z": z.mean()}
    cols = {"x": x - centre["x"], "y": y - centre["y"], "z": z - centre["z"]}
    for terms in ladder:
        if terms and v.size < len(terms) + 2:
            continue
        scale = [cols[t].std() or 1.0 for t in terms]
        design = np.column_stack([np.ones(v.size)] + [cols[t] / s for t, s in zip(terms, scale)])
        if np.linalg.matrix_rank(design) < design.shape[1]:
            continue
        coef, *_ = np.linalg.lstsq(design, v, rcond=None)
        slopes = {f"b_{t}": float(c / s) for t, c, s in zip(terms, coef[1:], scale)}
        return Trend(tuple(terms), float(centre["x"]), float(centre["y"]), float(centre["z"]),
                     float(coef[0]), **slopes)
    raise AssertionError("unreachable: the constant trend always fits")  # pragma: no cover


# Residual fields: called with an (n, 2) array of points in km from the centroid.
class _Constant:
    def __init__(self, value):
        self.value = float(value)

    def __call__(self, pts):
        return np.full(pts.shape[0], self.value)


class _IDW:
    def __init__(self, pts, r, power):
        self.pts, self.r, self.power = pts, r, float(power)

    def __call__(self, pts):
        d2 = ((pts[:, None, :] - self.pts[None, :, :]) ** 2).sum(axis=-1)
        with np.errstate(divide="ignore", invalid="ignore"):
            w = d2 ** (-0.5 * self.power)
            out = (w @ self.r) / w.sum(axis=1)
        hit_row, hit_station = np.nonzero(d2 == 0.0)
        out[hit_row] = self.r[hit_station]  # exact at a station
        return out


class _Kriging:
    def __init__(self, pts, r, variogram_model, nlags):
        from pykrige.ok import OrdinaryKriging

        self.ok = OrdinaryKriging(pts[:, 0], pts[:, 1], r, variogram_model=variogram_model,
                                  nlags=int(nlags), coordinates_type="euclidean",
                                  exact_values=True)

    def __call__(self, pts):
        values, _variance = self.ok.execute("points", pts[:, 0], pts[:, 1], backend="vectorized")
        return np.asarray(values, dtype=float)


@dataclass
class FittedField:
    """A gridding fitted for one date and variable; evaluate it with :meth:`predict`.

    Holds the ``method``, the ``label`` (date and variable), the fitted
    ``trend``, the stations used (``x``, ``y`` [m], elevation ``z`` [m],
    value ``v``; ``station_index`` = their positions in the arrays given to
    :func:`fit_field`), the method ``options`` in effect, and the fitted
    residual interpolator.
    """

    method: str
    label: str
    trend: Trend
    x: np.ndarray
    y: np.ndarray
    z: np.ndarray
    v: np.ndarray
    station_index: np.ndarray
    options: dict[str, Any]
    _residual_field: Any = field(repr=False, default=None)

    @property
    def residuals(self) -> np.ndarray:
        """Station values minus the trend [unit of v]."""
        return self.v - self.trend(self.x, self.y, self.z)

    def predict(self, X, Y, Z):
        """The gridded field at pixels ``X``, ``Y`` with DEM elevation ``Z``.

        Parameters
        ----------
        X, Y : array_like
            Pixel coordinates in the grid CRS, any (broadcastable) shape [m].
        Z : array_like
            DEM elevation at the pixels [m].

        Returns
        -------
        numpy.ndarray
            Field values, float64, of the broadcast shape; NaN where any of
            ``X``, ``Y``, ``Z`` is NaN [unit of v].
        """
        X, Y, Z = np.broadcast_arrays(
            np.asarray(X, dtype=float), np.asarray(Y, dtype=float), np.asarray(Z, dtype=float)
        )
        shape = X.shape
        xf, yf, zf = X.ravel(), Y.ravel(), Z.ravel()
        out = np.full(xf.shape, np.nan)
        idx = np.flatnonzero(np.isfinite(xf) & np.isfinite(yf) & np.isfinite(zf))
        block = max(1, _BLOCK_CELLS // max(1, self.v.size))
        for start in range(0, idx.size, block):
            sel = idx[start : start + block]
            xs, ys = xf[sel], yf[sel]
            pts = np.column_stack([xs - self.trend.x0, ys - self.trend.y0]) / _KM
            out[sel] = self.trend(xs, ys, zf[sel]) + self._residual_field(pts)
        return out.reshape(shape)


def _stations(x, y, z, v, label):
    arrays = [np.asarray(a, dtype=float).ravel() for a in (x, y, z, v)]
    if len({a.size for a in arrays}) != 1:
        raise ValueError(
            "x, y, z and v must have one value per station, got sizes "
            + ", ".join(str(a.size) for a in arrays)
        )
    x, y, z, v = arrays
    used = np.flatnonzero(~np.isnan(v))
    bad = used[~(np.isfinite(x[used]) & np.isfinite(y[used]) & np.isfinite(z[used]))]
    if bad.size:
        raise InputError(
            f"{_where(label)}station(s) at position {bad.tolist()} have a value but no "
            "finite x, y or elevation; give every station its coordinates and elevation"
        )
    if not np.all(np.isfinite(v[used])):
        raise InputError(f"{_where(label)}a station value is infinite; check the station table")
    xy = np.column_stack([x[used], y[used]])
    if np.unique(xy, axis=0).shape[0] < used.size:
        raise InputError(
            f"{_where(label)}two stations with values share one location; "
            "merge or drop one of them"
        )
    return used, x[used], y[used], z[used], v[used]


def _method_options(method, options):
    if method not in METHODS:
        raise ValueError(f"unknown gridding method {method!r}; choose one of {', '.join(METHODS)}")
    unknown = set(options) - set(_OPTIONS[method])
    if unknown:
        raise ValueError(
            f"unknown option(s) {sorted(unknown)} for method {method!r}; "
            f"known: {sorted(_OPTIONS[method])}"
        )
    return {**_OPTIONS[method], **options}


def fit_field(x, y, z, v, method: str = "spline", *, label: str = "", trend: str = "full",
              **options) -> FittedField:
    """Fit the elevation-aware gridding of one date's station values.

    Parameters
    ----------
    x, y : array_like
        Station coordinates in the grid CRS, one per station [m].
    z : array_like
        Station elevations [m].
    v : array_like
        Station values of one variable on one date; NaN = missing (that
        station is left out of this fit only) [unit of v].
    method : str
        Residual interpolation: "spline", "idw" or "kriging" (see the module
        docstring).
    label : str
        Date and variable, e.g. ``"2023-07-14 air_temperature"``; starts every
        error message.
    trend : str
        Trend requested: "full" (elevation, x, y; default), "elevation",
        "xy" or "none" (constant).  Falls back to simpler trends when the
        stations cannot support it (see the module docstring).
    **options
        Method options: ``smoothing`` (spline, [1]); ``power`` (idw, [1]);
        ``variogram_model`` and ``nlags`` (kriging).

    Returns
    -------
    FittedField
        Picklable; call ``.predict(X, Y, Z)`` on any chunk of pixels.

    Raises
    ------
    InputError
        If fewer stations with values remain than the method needs, a station
        with a value lacks coordinates or elevation, two stations share a
        location, or (spline) all stations lie on one line.
    ValueError
        If the arrays differ in length, or the method, trend or an option is
        unknown.
    """
    opts = _method_options(method, options)
    if trend not in TRENDS:
        raise ValueError(f"unknown trend {trend!r}; choose one of {', '.join(TRENDS)}")
    used, xs, ys, zs, vs = _stations(x, y, z, v, label)
    need = MIN_STATIONS[method]
    if used.size < need:
        raise InputError(
            f"{_where(label)}only {used.size} station(s) have a value; "
            f"the {method} method needs at least {need}; add stations or grid this date "
            "with a method that needs fewer"
        )
    fitted_trend = _fit_trend(xs, ys, zs, vs, TRENDS[trend])
    resid = vs - fitted_trend(xs, ys, zs)
    pts = np.column_stack([xs - fitted_trend.x0, ys - fitted_trend.y0]) / _KM
    if np.ptp(resid) <= 1e-12 * (1.0 + np.max(np.abs(vs))):
        residual_field = _Constant(resid.mean())
    elif method == "spline":
        from scipy.interpolate import RBFInterpolator

        try:
            residual_field = RBFInterpolator(pts, resid, kernel="thin_plate_spline",
                                             smoothing=opts["smoothing"])
        except np.linalg.LinAlgError:
            raise InputError(
                f"{_where(label)}the {used.size} stations with values lie on one line; "
                "the spline method needs stations spread in two directions"
            ) from None
    elif method == "idw":
        residual_field = _IDW(pts, resid, opts["power"])
    else:
        residual_field = _Kriging(pts, resid, opts["variogram_model"], opts["nlags"])
    return FittedField(method, label, fitted_trend, xs, ys, zs, vs, used, opts, residual_field)


@dataclass(frozen=True)
class CrossValidation:
    """Leave-one-out cross-validation of one date's gridding.

    Attributes
    ----------
    observed : numpy.ndarray
        Station values as given (NaN where missing) [unit of v].
    predicted : numpy.ndarray
        Value at each station from a fit without that station (NaN where
        the station had no value) [unit of v].
    residuals : numpy.ndarray
        ``predicted - observed`` [unit of v].
    n : int
        Stations cross-validated [1].
    bias : float
        Mean of the residuals [unit of v].
    rmse : float
        Root-mean-square of the residuals [unit of v].
    """

    observed: np.ndarray
    predicted: np.ndarray
    residuals: np.ndarray
    n: int
    bias: float
    rmse: float


def leave_one_out(x, y, z, v, method: str = "spline", *, label: str = "", trend: str = "full",
                  **options) -> CrossValidation:
    """Leave-one-out cross-validation: refit without each station, predict it.

    Parameters are those of :func:`fit_field`.  Every station with a value is
    left out in turn; the field fitted to the others (same method, trend and
    options, with the same trend fall-back) is evaluated at its location and
    elevation.

    Returns
    -------
    CrossValidation
        Per-station predictions and residuals (in the order given), with
        their bias and RMSE.

    Raises
    ------
    InputError
        If fewer than ``MIN_STATIONS[method] + 1`` stations have a value, or
        as :func:`fit_field`.
    """
    _method_options(method, options)
    used, xs, ys, zs, vs = _stations(x, y, z, v, label)
    need = MIN_STATIONS[method] + 1
    if used.size < need:
        raise InputError(
            f"{_where(label)}only {used.size} station(s) have a value; leave-one-out "
            f"with the {method} method needs at least {need}"
        )
    observed = np.asarray(v, dtype=float).ravel().copy()
    predicted = np.full(observed.shape, np.nan)
    for k, station in enumerate(used):
        keep = np.arange(used.size) != k
        fitted = fit_field(xs[keep], ys[keep], zs[keep], vs[keep], method, label=label,
                           trend=trend, **options)
        predicted[station] = fitted.predict(xs[k], ys[k], zs[k])
    stats = agreement(observed, predicted)
    return CrossValidation(observed, predicted, predicted - observed, stats.n, stats.bias,
                           stats.rmse)
