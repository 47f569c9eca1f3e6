"""Agreement statistics, checked against scipy.stats and numpy.

The observed/modelled pairs are invented fixtures (net radiation-like values
in W m-2); the expected values come from scipy.stats.linregress,
scipy.stats.pearsonr and numpy, or are worked by hand where stated.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest

from radledger.stations import agreement

stats = pytest.importorskip("scipy.stats")

REL = 1e-12  # relative tolerance against the reference libraries (test design choice)


def _pairs(n=60, seed=3):
    rng = np.random.default_rng(seed)
    observed = rng.uniform(50.0, 650.0, n)  # invented
    modelled = 0.92 * observed + 18.0 + rng.normal(0.0, 25.0, n)  # invented
    return observed, modelled


def test_matches_scipy_and_numpy():
    observed, modelled = _pairs()
    got = agreement(observed, modelled)
    fit = stats.linregress(observed, modelled)
    r, _p = stats.pearsonr(observed, modelled)
    diff = modelled - observed
    assert got.n == observed.size
    assert got.bias == pytest.approx(np.mean(diff), rel=REL)
    assert got.mae == pytest.approx(np.mean(np.abs(diff)), rel=REL)
    assert got.rmse == pytest.approx(np.sqrt(np.mean(diff**2)), rel=REL)
    assert got.slope == pytest.approx(fit.slope, rel=REL)
    assert got.intercept == pytest.approx(fit.intercept, rel=REL)
    assert got.r2 == pytest.approx(fit.rvalue**2, rel=REL)
    assert got.r2 == pytest.approx(r**2, rel=REL)
    # numpy's least-squares polynomial fit gives the same line
    slope, intercept = np.polyfit(observed, modelled, 1)
    assert got.slope == pytest.approx(slope, rel=1e-10)
    assert got.intercept == pytest.approx(intercept, rel=1e-10)


def test_worked_example_by_hand():
    # observed 1, 2, 3, 4; modelled 2, 2, 4, 5 (invented).  By hand:
    # differences 1, 0, 1, 1 -> bias 0.75, MAE 0.75, RMSE sqrt(0.75);
    # Sxx = 5, Sxy = 5.5, Syy = 6.75 -> slope 1.1, intercept 3.25 - 1.1 * 2.5 = 0.5,
    # r2 = 5.5**2 / (5 * 6.75) = 30.25 / 33.75.
    got = agreement([1.0, 2.0, 3.0, 4.0], [2.0, 2.0, 4.0, 5.0])
    assert got.n == 4
    assert got.bias == pytest.approx(0.75, rel=REL)
    assert got.mae == pytest.approx(0.75, rel=REL)
    assert got.rmse == pytest.approx(math.sqrt(0.75), rel=REL)
    assert got.slope == pytest.approx(1.1, rel=REL)
    assert got.intercept == pytest.approx(0.5, rel=REL)
    assert got.r2 == pytest.approx(30.25 / 33.75, rel=REL)


def test_nan_pairs_are_dropped():
    observed, modelled = _pairs(40)
    obs, mod = observed.copy(), modelled.copy()
    obs[[3, 17]] = np.nan
    mod[[5, 17, 30]] = np.nan
    keep = ~(np.isnan(obs) | np.isnan(mod))
    got = agreement(obs.reshape(8, 5), mod.reshape(8, 5))  # any shape
    fit = stats.linregress(obs[keep], mod[keep])
    assert got.n == 36
    assert got.bias == pytest.approx(np.mean(mod[keep] - obs[keep]), rel=REL)
    assert got.rmse == pytest.approx(np.sqrt(np.mean((mod[keep] - obs[keep]) ** 2)), rel=REL)
    assert got.slope == pytest.approx(fit.slope, rel=REL)
    assert got.intercept == pytest.approx(fit.intercept, rel=REL)
    assert got.r2 == pytest.approx(fit.rvalue**2, rel=REL)


def test_perfect_agreement():
    # identical series: closed form bias 0, RMSE 0, r2 1, slope 1, intercept 0
    observed, _ = _pairs(20)
    got = agreement(observed, observed)
    assert (got.bias, got.mae, got.rmse) == (0.0, 0.0, 0.0)
    assert got.r2 == pytest.approx(1.0, rel=REL)
    assert got.slope == pytest.approx(1.0, rel=REL)
    assert got.intercept == pytest.approx(0.0, abs=1e-10)


def test_no_pairs_gives_all_nan():
    got = agreement([np.nan, 1.0], [2.0, np.nan])
    assert got.n == 0
    assert all(math.isnan(v) for k, v in got.as_dict().items() if k != "n")


def test_one_pair_gives_differences_but_no_line():
    got = agreement([np.nan, 100.0], [90.0, 104.0])
    assert got.n == 1
    assert (got.bias, got.mae, got.rmse) == (4.0, 4.0, 4.0)  # closed form
    assert math.isnan(got.r2) and math.isnan(got.slope) and math.isnan(got.intercept)


def test_constant_observed_gives_nan_line_and_r2():
    got = agreement([200.0, 200.0, 200.0], [190.0, 205.0, 230.0])
    assert got.bias == pytest.approx(np.mean([-10.0, 5.0, 30.0]), rel=REL)
    assert math.isnan(got.slope) and math.isnan(got.intercept) and math.isnan(got.r2)


def test_constant_modelled_gives_flat_line_and_nan_r2():
    observed = np.array([150.0, 240.0, 310.0, 420.0])
    modelled = np.full(4, 275.0)
    got = agreement(observed, modelled)
    fit = stats.linregress(observed, modelled)
    assert got.slope == pytest.approx(fit.slope, abs=1e-12)  # 0
    assert got.intercept == pytest.approx(fit.intercept, rel=REL)  # 275
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # scipy warns that the input is constant
        r, _p = stats.pearsonr(observed, modelled)
    assert math.isnan(r) and math.isnan(got.r2)


def test_shape_mismatch_is_an_error():
    with pytest.raises(ValueError, match="same shape"):
        agreement([1.0, 2.0], [1.0, 2.0, 3.0])
