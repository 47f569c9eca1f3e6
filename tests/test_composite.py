"""Date-window composites checked against direct NumPy nan-reductions over the same stack."""

from __future__ import annotations

import warnings
from datetime import date

import dask
import numpy as np
import pytest
from dask.callbacks import Callback

from helpers_rasters import utm_grid, write_raster
from radledger.config.seasons import season_window
from radledger.io.lazy import read_product
from radledger.model.products import COMPOSITE_STATISTICS
from radledger.outputs.composites import LEAF_DATES, composite
from radledger.errors import InputError

N_DATES = 2 * LEAF_DATES + 3  # uneven leaves and an odd number of merges
MIN_COUNT = 3
WINDOW_DAYS = 92


@pytest.fixture(scope="module")
def window(tmp_path_factory):
    """N_DATES products with gaps: random NaN pixels, one all-NaN date, pixels with 0, 1, 2 valid dates."""
    tmp = tmp_path_factory.mktemp("composite")
    grid = utm_grid(40, 30, chunk=16)  # chunks 16+14 by 16+16+8: ragged on purpose
    rng = np.random.default_rng(42)
    stack = rng.normal(12.0, 4.0, (N_DATES,) + grid.shape).astype(np.float32)
    stack[rng.random(stack.shape) < 0.3] = np.nan
    stack[4] = np.nan                      # a date with no valid pixel
    stack[:, 0, 0] = np.nan                # never valid
    stack[:, 1, 1] = np.nan
    stack[[2, 7], 1, 1] = [5.0, 9.0]       # 2 valid dates < MIN_COUNT
    stack[:, 2, 2] = np.nan
    stack[[0, 5, 9], 2, 2] = [1.0, 2.0, 10.0]  # exactly MIN_COUNT
    paths = [write_raster(tmp / f"net_radiation_{i:02d}.tif", grid, stack[i]) for i in range(N_DATES)]
    return grid, stack, paths


def _expected(stack: np.ndarray) -> dict[str, np.ndarray]:
    """Reference: NumPy's own nan-reductions along time (float64), masked by MIN_COUNT."""
    x = stack.astype(np.float64)
    count = (~np.isnan(x)).sum(axis=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN pixels in the reference itself
        ref = {"mean": np.nanmean(x, 0), "median": np.nanmedian(x, 0), "min": np.nanmin(x, 0),
               "max": np.nanmax(x, 0), "sum": np.nansum(x, 0), "std": np.nanstd(x, 0, ddof=0)}
    ref["total"] = ref["mean"] * WINDOW_DAYS
    ref = {k: np.where(count >= MIN_COUNT, v, np.nan) for k, v in ref.items()}
    ref["count"] = count.astype(np.float64)
    return ref


def test_every_statistic_matches_numpy(window):
    grid, stack, paths = window
    lazy = composite(paths, grid, statistics=COMPOSITE_STATISTICS, min_count=MIN_COUNT, window_days=WINDOW_DAYS)
    assert list(lazy) == list(COMPOSITE_STATISTICS)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # the kernels must not emit all-NaN RuntimeWarnings
        (got,) = dask.compute(lazy, scheduler="threads")
    ref = _expected(stack)
    for name in COMPOSITE_STATISTICS:
        assert lazy[name].dtype == np.float32 and got[name].dtype == np.float32, name
        assert lazy[name].chunks == grid.chunks, name
        np.testing.assert_allclose(got[name], ref[name], rtol=2e-6, atol=1e-5, equal_nan=True, err_msg=name)


def test_min_count_gaps_and_count(window):
    grid, stack, paths = window
    got = dask.compute(composite(paths, grid, statistics=["count", "mean", "median", "sum", "min"],
                                 min_count=MIN_COUNT), scheduler="sync")[0]
    assert got["count"][0, 0] == 0 and np.isnan(got["mean"][0, 0])       # never valid: count 0, not NaN
    assert got["count"][1, 1] == 2 and np.isnan(got["sum"][1, 1])         # below min_count
    assert np.isnan(got["median"][1, 1]) and np.isnan(got["min"][1, 1])
    assert got["count"][2, 2] == 3                                        # exactly min_count
    assert got["mean"][2, 2] == pytest.approx((1 + 2 + 10) / 3)          # hand arithmetic
    assert got["median"][2, 2] == 2.0 and got["sum"][2, 2] == 13.0 and got["min"][2, 2] == 1.0


def test_min_count_one_keeps_single_dates(window):
    grid, stack, paths = window
    got = composite(paths[:3], grid, statistics=["std", "mean", "count"])  # default min_count=1
    std, mean, count = dask.compute(got["std"], got["mean"], got["count"], scheduler="sync")
    single = count == 1
    assert single.any()
    assert (std[single] == 0).all()                   # population std of one value is 0 (ddof=0)
    x = stack[:3]
    only = np.nansum(np.where(np.isnan(x), 0, x), axis=0)  # the one valid value, by NumPy
    np.testing.assert_allclose(mean[single], only[single], rtol=1e-6)


def test_median_even_and_odd_counts(tmp_path):
    grid = utm_grid(20, 20, chunk=8)
    values = [[4.0, 1.0, np.nan, 3.0], [7.0, np.nan, 2.0, np.nan]]  # 3 valid -> 3; 2 valid -> 4.5
    stack = np.full((4,) + grid.shape, np.nan, np.float32)
    stack[:, 5, 5] = values[0]
    stack[:, 6, 6] = values[1]
    paths = [write_raster(tmp_path / f"d{i}.tif", grid, stack[i]) for i in range(4)]
    med = composite(paths, grid, statistics=["median"])["median"].compute(scheduler="sync")
    assert med[5, 5] == np.nanmedian(values[0]) == 3.0   # NumPy's nanmedian
    assert med[6, 6] == np.nanmedian(values[1]) == 4.5
    assert np.isnan(med[0, 0])


def test_building_computes_nothing(window):
    grid, _, paths = window
    ran = []

    def refuse(*args, **kwargs):
        raise AssertionError("composite() computed something while building the graph")

    with dask.config.set(scheduler=refuse), Callback(pretask=lambda key, dsk, state: ran.append(key)):
        out = composite(paths, grid, statistics=COMPOSITE_STATISTICS, window_days=WINDOW_DAYS)
    assert ran == []
    assert all(hasattr(v, "dask") for v in out.values())


def test_statistics_share_one_read_per_chunk(window):
    grid, _, paths = window
    out = composite(paths, grid, statistics=["mean", "median", "count"])
    graph = {}
    for array in out.values():
        graph.update(dict(array.__dask_graph__()))
    reads = [k for k in graph if isinstance(k, tuple) and str(k[0]).startswith("read-")]
    n_chunks = len(grid.chunks[0]) * len(grid.chunks[1])
    assert len(reads) == len(paths) * n_chunks


def test_nodata_value_becomes_nan(tmp_path):
    grid = utm_grid(20, 20, chunk=8)
    a = np.full(grid.shape, 5.0, np.float32)
    a[3, 4] = -9999.0
    path = write_raster(tmp_path / "a.tif", grid, a, nodata=-9999.0)
    got = read_product(path, grid).compute(scheduler="sync")
    assert np.isnan(got[3, 4]) and np.nansum(got) == 5.0 * (a.size - 1)  # hand arithmetic: one pixel dropped


@pytest.mark.parametrize("season, year, expected", [
    ("DJF", 2024, (date(2023, 12, 1), date(2024, 2, 29))),   # 2024 is a leap year (Gregorian rule)
    ("djf", 2026, (date(2025, 12, 1), date(2026, 2, 28))),
    ("MAM", 2026, (date(2026, 3, 1), date(2026, 5, 31))),
    ("JJA", 2026, (date(2026, 6, 1), date(2026, 8, 31))),
    ("SON", 2026, (date(2026, 9, 1), date(2026, 11, 30))),
])
def test_season_window(season, year, expected):
    assert season_window(season, year) == expected


# --- errors ----------------------------------------------------------------------------------
def test_unknown_statistic_lists_valid(window):
    grid, _, paths = window
    with pytest.raises(ValueError, match=r"unknown statistic 'average'; valid: mean, median, min, max, sum, std, "
                                         r"count, total"):
        composite(paths, grid, statistics=["mean", "average"])


def test_total_needs_window_days(window):
    grid, _, paths = window
    with pytest.raises(ValueError, match="statistic 'total' needs window_days"):
        composite(paths, grid, statistics=["total"])


@pytest.mark.parametrize("bad", [0, -1, 1.5])
def test_min_count_must_be_positive_whole(window, bad):
    grid, _, paths = window
    with pytest.raises(ValueError, match="min_count must be a whole number >= 1"):
        composite(paths, grid, statistics=["mean"], min_count=bad)


def test_unknown_season():
    with pytest.raises(ValueError, match="unknown season 'summer'; valid: DJF, MAM, JJA, SON"):
        season_window("summer", 2026)


def test_empty_window_names_the_composite(window):
    grid, _, _ = window
    with pytest.raises(InputError, match="composite 'summer-2026': no products fall in its window"):
        composite([], grid, statistics=["mean"], name="summer-2026")


def test_product_off_grid_names_file(window, tmp_path):
    grid, stack, paths = window
    other = utm_grid(40, 30, chunk=16, x0=510_000.0)
    wrong = write_raster(tmp_path / "shifted.tif", other, stack[0])
    with pytest.raises(InputError, match=r"shifted\.tif: is not on the run's grid .*re-create it"):
        composite([paths[0], wrong], grid, statistics=["mean"])


def test_missing_product_names_file(window, tmp_path):
    grid, _, paths = window
    with pytest.raises(InputError, match=r"gone\.tif: cannot open .*check that the product exists"):
        composite([paths[0], tmp_path / "gone.tif"], grid, statistics=["mean"])
