"""Cell areas on the ground for any projection, against pyproj.Geod polygon areas of the cells'
outlines (densified edges) on UTM, Web Mercator, geographic and polar stereographic grids."""

from __future__ import annotations

import numpy as np
import pytest
from pyproj import CRS, Geod, Transformer
from rasterio.crs import CRS as RasterioCRS
from rasterio.transform import from_origin

from rasterbudget.io.areas import cell_areas
from rasterbudget.io.grid import Grid

GEOD = Geod(ellps="WGS84")


def _geodesic_cell(grid: Grid, row: int, col: int, steps: int = 16) -> float:
    """The cell's outline, each edge cut into ``steps`` pieces, mapped to lon/lat: its area."""
    t = grid.transform
    x0, y0 = t.c + col * t.a, t.f + row * t.e
    x1, y1 = x0 + t.a, y0 + t.e
    s = np.linspace(0.0, 1.0, steps, endpoint=False)
    xs = np.concatenate(
        [x0 + (x1 - x0) * s, np.full(steps, x1), x1 - (x1 - x0) * s, np.full(steps, x0)]
    )
    ys = np.concatenate(
        [np.full(steps, y0), y0 + (y1 - y0) * s, np.full(steps, y1), y1 - (y1 - y0) * s]
    )
    crs = CRS.from_user_input(grid.crs.to_wkt())
    lon, lat = Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True).transform(xs, ys)
    area, _ = GEOD.polygon_area_perimeter(lon, lat)
    return abs(area)


GRIDS = {
    # UTM 13N, 30 m, near 40 N
    "utm": ("EPSG:32613", from_origin(480000.0, 4430000.0, 30.0, 30.0)),
    # Web Mercator, 1 km cells near 60 N: map areas are 4x the ground's
    "web_mercator": ("EPSG:3857", from_origin(1_000_000.0, 8_400_000.0, 1000.0, 1000.0)),
    # geographic, 0.01 degree cells near 45 S
    "geographic": ("EPSG:4326", from_origin(170.0, -45.0, 0.01, 0.01)),
    # polar stereographic north (Greenland), 500 m cells
    "polar": ("EPSG:3413", from_origin(-200_000.0, -2_000_000.0, 500.0, 500.0)),
}


@pytest.mark.parametrize("name", sorted(GRIDS))
def test_cell_areas_equal_geodesic_polygon_areas(name):
    crs, transform = GRIDS[name]
    grid = Grid(RasterioCRS.from_user_input(crs), transform, 400, 300)
    rows = np.array([0, 10, 150, 299])
    cols = np.array([0, 200, 399, 5])
    got = cell_areas(grid, rows, cols)
    expected = np.array([_geodesic_cell(grid, r, c) for r, c in zip(rows, cols, strict=True)])
    np.testing.assert_allclose(got, expected, rtol=1e-5)


def test_web_mercator_cells_are_a_quarter_of_their_map_area_at_60_north():
    crs, _ = GRIDS["web_mercator"]
    y60 = Transformer.from_crs("EPSG:4326", crs, always_xy=True).transform(10.0, 60.0)[1]
    grid = Grid(
        RasterioCRS.from_user_input(crs), from_origin(1e6, y60 + 500.0, 1000.0, 1000.0), 2, 2
    )
    # a quarter on the sphere Web Mercator projects from; the WGS84 ellipsoid's ground is 0.34 %
    # larger there (measured), which the geodesic test above confirms to 1e-5
    area = cell_areas(grid, np.array([0]), np.array([0]))[0]
    assert area == pytest.approx(0.25e6, rel=5e-3)
    assert area > 0.25e6
