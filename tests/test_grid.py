"""TargetGrid: windows, transforms, coordinates and areas against pyproj."""

from __future__ import annotations

import numpy as np
import pytest
from pyproj import Geod, Transformer

from radledger.errors import GridError
from radledger.grid import TargetGrid


def test_windows_tile_the_grid_exactly():
    g = TargetGrid.from_bounds("EPSG:32611", 30, (300000, 4200000, 330030, 4215000), chunk=256)
    assert g.shape == (500, 1001)
    wins = list(g.windows())
    assert sum(w.width * w.height for w in wins) == 500 * 1001
    assert g.chunks == ((256, 244), (256, 256, 256, 233))


def test_lattice_lonlat_matches_pyproj_per_pixel():
    g = TargetGrid.from_bounds("EPSG:32611", 30, (300000, 4200000, 330720, 4230720), chunk=1024)
    win = next(g.windows())
    lon, lat = g.lonlat(win)
    x, y = g.pixel_centres(win)
    lon_e, lat_e = Transformer.from_crs("EPSG:32611", "EPSG:4326", always_xy=True).transform(x, y)  # pyproj, exact
    assert np.max(np.abs(lon - lon_e)) < 1e-7 and np.max(np.abs(lat - lat_e)) < 1e-7


def test_geographic_pixel_area_against_geodesic():
    g = TargetGrid.from_bounds("EPSG:4326", 0.25, (10, 44, 12, 46), chunk=64)
    area = g.pixel_area(next(g.windows()))
    lon0, lat0 = 10.0, 46.0 - 0.25
    geodesic = abs(Geod(ellps="WGS84").polygon_area_perimeter(
        [lon0, lon0 + 0.25, lon0 + 0.25, lon0], [lat0, lat0, lat0 + 0.25, lat0 + 0.25])[0])   # pyproj geodesic
    assert area[0, 0] == pytest.approx(geodesic, rel=1e-6)


@pytest.mark.parametrize("kw,needle", [
    (dict(resolution=0, bounds=(0, 0, 10, 10)), "resolution"),
    (dict(resolution=1, bounds=(10, 0, 0, 10)), "bounds"),
])
def test_bad_grid_definitions(kw, needle):
    with pytest.raises(GridError, match=needle):
        TargetGrid.from_bounds("EPSG:32611", **kw)
