"""Quicklook PNGs: size from figsize x dpi, decimated reads, colours where they should be."""

from __future__ import annotations

import json

import numpy as np
import pytest
import rasterio
from matplotlib import colormaps
from matplotlib.colors import to_rgb
from PIL import Image
from pyproj import Transformer

from helpers_rasters import utm_grid, write_raster
from radledger.errors import InputError, OutputError
from radledger.grid import TargetGrid
from radledger.model.products import SCENE_QUALITY_BITS as QUALITY_BITS
from radledger.outputs.quicklooks import DPI, FIGSIZE, NAN_COLOUR, NO_FLAGS_COLOUR, write_quicklook
from radledger.io.vectors import read_zones

EXPECTED_SIZE = (round(FIGSIZE[0] * DPI), round(FIGSIZE[1] * DPI))  # PNG pixels = inches x dots per inch


@pytest.fixture(scope="module")
def scene(tmp_path_factory):
    """A signed field (like net radiation at dusk) with a NaN block, two zones, and a quality raster."""
    tmp = tmp_path_factory.mktemp("ql")
    grid = utm_grid(300, 240, chunk=128)
    rows, cols = np.mgrid[0:240, 0:300]
    rn = (400 * np.sin(cols / 40) * np.cos(rows / 50) + 150).astype(np.float32)
    rn[100:130, 50:90] = np.nan
    tif = write_raster(tmp / "net_radiation_20260714T1810.tif", grid, rn, overviews=(2, 4))
    to_ll = Transformer.from_crs(grid.crs, "EPSG:4326", always_xy=True)
    x0, y0, x1, y1 = grid.bounds

    def ring(a, b, c, d):
        return [list(to_ll.transform(x, y)) for x, y in [(a, b), (c, b), (c, d), (a, d), (a, b)]]

    features = [{"type": "Feature", "properties": {"basin_id": name},
                 "geometry": {"type": "Polygon", "coordinates": [r]}}
                for name, r in [("upper", ring(x0 + 300, y0 + 800, x0 + 4000, y0 + 6000)),
                                ("edge", ring(x1 - 1500, y1 - 2000, x1 + 1500, y1 + 500))]]
    (tmp / "basins.geojson").write_text(json.dumps({"type": "FeatureCollection", "features": features}))
    zones = read_zones(tmp / "basins.geojson", "basin_id", grid)
    q = np.zeros(grid.shape, np.uint8)
    q[:50] = QUALITY_BITS["input_missing"]
    q[50:80, :100] = QUALITY_BITS["input_missing"] | QUALITY_BITS["sun_down"]
    q[200:] = QUALITY_BITS["modelled_shortwave"]
    q[:, 280:] = 255
    qtif = write_raster(tmp / "quality_20260714T1810.tif", grid, q, nodata=255, overviews=(2, 4))
    return grid, tif, qtif, zones, tmp


def _rgb(path):
    image = Image.open(path)
    assert image.format == "PNG"
    return image.size, np.asarray(image.convert("RGB"))


def _has_colour(pixels, colour, tol=2):
    target = np.array(to_rgb(colour)) * 255
    return bool((np.abs(pixels.astype(int) - target).max(axis=-1) <= tol).any())


def test_diverging_with_zones(scene):
    _, tif, _, zones, tmp = scene
    png = write_quicklook(tif, tmp / "net_radiation_20260714T1810.png", title="net radiation 2026-07-14 18:10 UTC",
                          units="W m-2", diverging=True, zones=zones)
    size, pixels = _rgb(png)
    assert size == EXPECTED_SIZE
    assert _has_colour(pixels, NAN_COLOUR)           # the NaN block is drawn grey
    red = (pixels[..., 0] > 150) & (pixels[..., 2] < 80)
    blue = (pixels[..., 2] > 150) & (pixels[..., 0] < 80)
    assert red.sum() > 1000 and blue.sum() > 1000    # both signs on a diverging map
    assert sorted(p.name for p in tmp.glob("*.png*")) == [png.name]  # atomic: no temporary left


def test_quality_legend(scene):
    _, _, qtif, zones, tmp = scene
    png = write_quicklook(qtif, tmp / "quality_20260714T1810.png", title="quality 2026-07-14 18:10 UTC",
                          units="1", diverging=False, zones=zones, categorical_bits=QUALITY_BITS)
    size, pixels = _rgb(png)
    assert size == EXPECTED_SIZE
    assert _has_colour(pixels, NO_FLAGS_COLOUR) and _has_colour(pixels, NAN_COLOUR)  # clean pixels, nodata


def test_sequential_and_decimated_read(scene, monkeypatch):
    _, tif, _, _, tmp = scene
    shapes = []
    real_read = rasterio.io.DatasetReader.read

    def spy(self, *args, **kwargs):
        shapes.append(kwargs.get("out_shape"))
        return real_read(self, *args, **kwargs)

    monkeypatch.setattr(rasterio.io.DatasetReader, "read", spy)
    png = write_quicklook(tif, tmp / "seq.png", title="net shortwave", units="W m-2", diverging=False,
                          max_pixels=100)
    assert shapes == [(80, 100)]  # 300 x 240 px read at 1/3: ceil(300/100) = 3
    assert _rgb(png)[0] == EXPECTED_SIZE


def test_all_nan_and_geographic(tmp_path):
    grid = TargetGrid.from_bounds("EPSG:4326", 0.01, (10.0, 45.0, 10.4, 45.3), chunk=16)
    tif = write_raster(tmp_path / "empty.tif", grid, np.full(grid.shape, np.nan, np.float32))
    png = write_quicklook(tif, tmp_path / "empty.png", title="nothing valid", units="W m-2", diverging=True)
    size, pixels = _rgb(png)
    assert size == EXPECTED_SIZE and _has_colour(pixels, NAN_COLOUR)


def test_missing_raster_names_file(tmp_path):
    with pytest.raises(InputError, match=r"gone\.tif: cannot open for a quicklook"):
        write_quicklook(tmp_path / "gone.tif", tmp_path / "x.png", title="t", units="W m-2", diverging=False)


def test_unwritable_folder(scene, tmp_path):
    _, tif, _, _, _ = scene
    with pytest.raises(OutputError, match=r"nope[/\\]x\.png: cannot write there"):
        write_quicklook(tif, tmp_path / "nope" / "x.png", title="t", units="W m-2", diverging=False)


# --- reading the colours -----------------------------------------------------------------------
def _field(grid, left, right):
    """Left 70 % of the columns at ``left``, the rest at ``right``, with a gentle ramp (fixture)."""
    rows, cols = np.mgrid[0:grid.height, 0:grid.width]
    v = np.where(cols < 0.7 * grid.width, left, right) + 0.05 * np.abs(left - right) * rows / grid.height
    return v.astype(np.float32)


def _reds_and_blues(pixels):
    r, g, b = (pixels[..., i].astype(int) for i in range(3))
    red = (r > g + 60) & (r > b + 60)      # RdBu's reds; viridis has none
    blue = (b > r + 60) & (b > g + 20)     # RdBu's blues
    return int(red.sum()), int(blue.sum())


def test_one_signed_values_get_a_sequential_scale(tmp_path):
    grid = utm_grid(120, 90, chunk=64)
    tif = write_raster(tmp_path / "rn.tif", grid, _field(grid, 450.0, 600.0))
    png = write_quicklook(tif, tmp_path / "rn.png", title="net radiation", units="W m-2", diverging=True,
                          positive="gain")
    _, pixels = _rgb(png)
    # viridis' two ends (matplotlib's colour table) are both drawn; no red/blue of a diverging scale
    assert _has_colour(pixels, colormaps["viridis"](0.0), tol=3) and _has_colour(pixels, colormaps["viridis"](1.0), tol=3)
    assert _reds_and_blues(pixels)[0] < 50


@pytest.mark.parametrize("positive,more", [("gain", "red"), ("loss", "blue")])
def test_mixed_signs_read_red_for_gain_and_blue_for_loss(tmp_path, positive, more):
    grid = utm_grid(120, 90, chunk=64)
    tif = write_raster(tmp_path / "f.tif", grid, _field(grid, 150.0, -60.0))   # 70 % of the map positive
    png = write_quicklook(tif, tmp_path / "f.png", title="t", units="W m-2", diverging=True, positive=positive)
    red, blue = _reds_and_blues(_rgb(png)[1])
    assert (red > 2 * blue) if more == "red" else (blue > 2 * red)


def test_counts_are_whole_numbers_one_colour_each(tmp_path):
    grid = utm_grid(120, 90, chunk=64)
    rows, cols = np.mgrid[0:grid.height, 0:grid.width]
    count = (cols // 20).astype(np.float32)   # 0..5 in vertical bands
    tif = write_raster(tmp_path / "c.tif", grid, count)
    png = write_quicklook(tif, tmp_path / "c.png", title="valid dates", units="valid dates", diverging=False,
                          counts=5)
    _, pixels = _rgb(png)
    steps = colormaps["viridis"].resampled(6)   # six colours, one per count 0..5 (matplotlib)
    assert all(_has_colour(pixels, steps(k), tol=2) for k in range(6))
    assert not _has_colour(pixels, colormaps["viridis"](0.1), tol=1)   # no shade between two counts


def test_stage_titles_and_labels_from_the_product_tags(tmp_path):
    from radledger.stages.quicklooks import _quicklook_args

    grid = utm_grid(20, 16, chunk=16)
    lw = write_raster(tmp_path / "net_longwave_20260714T1810.tif", grid, np.ones(grid.shape, np.float32), tags={
        "quantity": "net_longwave", "units": "W m-2", "positive": "upward (loss by the surface)",
        "time": "2026-07-14T18:10:00Z", "time_kind": "scenes", "inputs": "shortwave_down=rs.tif"})
    args = _quicklook_args(lw)
    assert args["title"].startswith("net longwave loss (positive = loss)")
    assert args["label"] == "net longwave loss (positive = loss)" and args["positive"] == "loss"
    count = write_raster(tmp_path / "summer_count.tif", grid, np.ones(grid.shape, np.float32), tags={
        "quantity": "net_radiation count", "statistic": "count", "members": "8", "units": "1",
        "time": "2026-06-01/2026-08-31", "time_kind": "composites"})
    args = _quicklook_args(count)
    assert args["counts"] == 8 and args["units"] == "valid dates" and not args["label"]
    assert "valid dates" in args["title"] and "2026-06-01 to 2026-08-31" in args["title"]


def test_many_quicklooks_drawn_by_worker_processes_equal_those_drawn_here(tmp_path):
    """A season's PNGs go to worker processes; each must be the same image as one drawn in this
    process (the comparison is pixel by pixel, decoded by PIL)."""
    from radledger.config import load_config
    from radledger.runner import run_config
    from radledger.stages.quicklooks import PARALLEL_FROM, _draw_all
    from scenario import make_scenario

    scn = make_scenario(tmp_path / "scene", shape=(48, 64), chunk=32)
    products = run_config(load_config(scn.config)).written
    tifs = [str(p) for p in products] * (PARALLEL_FROM // len(products) + 1)
    here, there = tmp_path / "here", tmp_path / "there"
    here.mkdir(), there.mkdir()
    _draw_all([(t, str(here / f"{k}.png")) for k, t in enumerate(tifs[:len(products)])], None)   # in here
    _draw_all([(t, str(there / f"{k}.png")) for k, t in enumerate(tifs)], None)
    assert len(list(there.glob("*.png"))) == len(tifs) >= PARALLEL_FROM
    for k in range(len(products)):
        a = np.asarray(Image.open(here / f"{k}.png"))
        b = np.asarray(Image.open(there / f"{k}.png"))
        np.testing.assert_array_equal(a, b)
