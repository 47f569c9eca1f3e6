"""COG layout (checked against GDAL's own IMAGE_STRUCTURE report), tags, atomic writes, laziness."""

from __future__ import annotations

import dask
import numpy as np
import pytest
import rasterio
from dask.callbacks import Callback

from radledger.config import load_config
from radledger.execution.graph import job_graph
from radledger.planning.plan import make_plan
from radledger.runner import run_config

from scenario import make_scenario

STAMP = "20260714T1810"


@pytest.fixture(scope="module")
def big_run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("cog")
    scn = make_scenario(folder, shape=(1100, 1060), chunk=512)
    scn.write_config(**{"output.products": ["net_radiation", "quality"]})
    run_config(load_config(scn.config))
    return folder / "out" / "scenes"


@pytest.mark.parametrize("product", ["net_radiation", "quality"])
def test_products_are_cloud_optimised_geotiffs(big_run, product):
    with rasterio.open(big_run / f"{product}_{STAMP}.tif") as ds:
        struct = ds.tags(ns="IMAGE_STRUCTURE")
        assert struct.get("LAYOUT") == "COG"                 # GDAL's own COG report
        assert struct.get("COMPRESSION") == "ZSTD"
        assert ds.block_shapes[0] == (512, 512)
        assert ds.overviews(1) == [2, 4]                     # down to < 512 px
        if product == "quality":
            assert ds.dtypes[0] == "uint8" and ds.nodata == 255
        else:
            assert ds.dtypes[0] == "float32" and np.isnan(ds.nodata)
            assert struct.get("PREDICTOR") == "3"


def test_tags_carry_provenance(big_run):
    with rasterio.open(big_run / f"net_radiation_{STAMP}.tif") as ds:
        tags = ds.tags()
    for key in ("quantity", "units", "standard_name", "method", "time", "inputs", "software", "settings_hash"):
        assert tags.get(key), key
    assert tags["units"] == "W m-2"
    # CF standard name table: surface_net_downward_radiative_flux, canonical units W m-2 (CF table v84)
    assert tags["standard_name"] == "surface_net_downward_radiative_flux"
    assert tags["time"] == "2026-07-14T18:10:00Z"
    assert tags["software"].startswith("radledger ")


def test_building_the_graph_computes_nothing(tmp_path):
    scn = make_scenario(tmp_path)
    plan = make_plan(load_config(scn.config))
    executed = []

    class Count(Callback):
        def _posttask(self, key, result, dsk, state, worker_id):
            executed.append(key)

    def refuse(*args, **kwargs):
        raise AssertionError("something was computed while building the graph")

    with Count(), dask.config.set(scheduler=refuse):
        job = plan.jobs[0]
        dsk, keys = job_graph(job, plan.grid, tuple(job.outputs), sinks={})
        assert len(keys) == len(list(plan.grid.windows())) == 9     # one task per chunk (3 x 3)
    assert executed == []
    assert not (tmp_path / "out").exists()


def test_failed_run_leaves_nothing_at_final_paths(tmp_path, monkeypatch):
    scn = make_scenario(tmp_path)
    import radledger.execution.graph as pl
    calls = {"n": 0}
    real = pl.scene_kernel

    def flaky(*a, **k):
        calls["n"] += 1
        if calls["n"] == 3:
            raise RuntimeError("disk on fire")
        return real(*a, **k)

    monkeypatch.setattr(pl, "scene_kernel", flaky)
    with pytest.raises(RuntimeError, match="disk on fire"):
        run_config(load_config(scn.config))
    out = tmp_path / "out"
    leftovers = [p for p in out.rglob("*") if p.is_file()]
    assert leftovers == []


def test_overviews_average_the_full_resolution_ignoring_nan(big_run):
    path = big_run / f"net_radiation_{STAMP}.tif"
    with rasterio.open(path) as ds:
        full = ds.read(1).astype(float)
    with rasterio.open(path, overview_level=0) as ov:      # GDAL's view of the first overview
        level2 = ov.read(1)
    h, w = full.shape
    pad = np.full((-(-h // 2) * 2, -(-w // 2) * 2), np.nan)
    pad[:h, :w] = full
    blocks = pad.reshape(pad.shape[0] // 2, 2, pad.shape[1] // 2, 2)
    with np.errstate(invalid="ignore"):
        import warnings
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            expected = np.nanmean(blocks, axis=(1, 3))          # NumPy's NaN-ignoring mean (= GDAL AVERAGE)
    assert level2.shape == expected.shape
    np.testing.assert_allclose(level2, expected, rtol=1e-6, equal_nan=True)


def test_quality_overviews_take_a_pixel_not_an_average(big_run):
    with rasterio.open(big_run / f"quality_{STAMP}.tif", overview_level=0) as ov:
        values = set(np.unique(ov.read(1)).tolist())
    with rasterio.open(big_run / f"quality_{STAMP}.tif") as ds:
        full = set(np.unique(ds.read(1)).tolist())
    assert values <= full
