"""Pixel-centre coordinates: the interpolated lattice against pyproj on every pixel."""

from __future__ import annotations

import numpy as np
import pytest
from pyproj import Transformer
from rasterio.crs import CRS
from rasterio.transform import from_origin

from rasterbudget.io.grid import Grid
from rasterbudget.scene.geometry import pixel_lonlat


@pytest.mark.parametrize(
    ("crs", "origin", "size", "tolerance_deg"),
    [
        ("EPSG:32613", (480000.0, 4430000.0), 30.0, 1e-7),  # UTM, the demo
        # polar stereographic near 75 S, meridians converge fast: 1e-4 deg = 0.024 s of solar time
        ("EPSG:3031", (-1.2e6, 1.5e6), 250.0, 1e-4),
        ("EPSG:4326", (-105.3, 40.1), 0.0003, 1e-12),  # geographic: linear, exact
    ],
)
def test_interpolated_lonlat_matches_direct_projection(crs, origin, size, tolerance_deg):
    grid = Grid(CRS.from_string(crs), from_origin(*origin, size, size), 203, 157)
    rows, cols = slice(5, 150), slice(17, 203)
    lon, lat = pixel_lonlat(grid, rows, cols)
    x = origin[0] + (np.arange(cols.start, cols.stop) + 0.5) * size
    y = origin[1] - (np.arange(rows.start, rows.stop) + 0.5) * size
    xx, yy = np.meshgrid(x, y)
    lon_ref, lat_ref = Transformer.from_crs(crs, "EPSG:4326", always_xy=True).transform(xx, yy)
    np.testing.assert_allclose(lon, lon_ref, rtol=0, atol=tolerance_deg)
    np.testing.assert_allclose(np.degrees(lat), lat_ref, rtol=0, atol=tolerance_deg)


def test_lonlat_does_not_depend_on_the_window():
    grid = Grid(CRS.from_epsg(32613), from_origin(480000.0, 4430000.0, 30.0, 30.0), 100, 100)
    whole_lon, whole_lat = pixel_lonlat(grid, slice(0, 100), slice(0, 100))
    part_lon, part_lat = pixel_lonlat(grid, slice(37, 71), slice(13, 90))
    np.testing.assert_array_equal(part_lon, whole_lon[37:71, 13:90])
    np.testing.assert_array_equal(part_lat, whole_lat[37:71, 13:90])


def test_sun_direction_on_the_lattice_equals_the_per_pixel_formula():
    # pixel_geometry interpolates the sun vector between lattice nodes; the error must be tiny
    import dataclasses

    from rasterbudget.physics.solar import local_hour_angle, sun_direction
    from rasterbudget.scene.geometry import pixel_geometry

    grid = Grid(CRS.from_epsg(32613), from_origin(480000.0, 4430000.0, 30.0, 30.0), 500, 400)
    constants = dataclasses.make_dataclass("C", ["greenwich_hour_angle", "declination"])(
        1.52, 0.406
    )
    lon, lat, sun = pixel_geometry(grid, slice(37, 301), slice(5, 490), constants)
    expected = sun_direction(lat, 0.406, local_hour_angle(1.52, lon))
    for got, want in zip(sun, expected, strict=True):
        np.testing.assert_allclose(got, want, atol=1e-9)


@pytest.mark.parametrize(
    ("crs", "origin", "size", "day"),
    [
        ("EPSG:32613", (480000.0, 4430000.0), 30.0, 165),  # UTM, mid-latitudes, June
        ("EPSG:3031", (-1.2e6, 1.5e6), 250.0, 20),  # near 75 S in January: 24 h of daylight
        ("EPSG:32633", (500000.0, 7400000.0), 30.0, 172),  # 66.7 N near midsummer (polar day)
    ],
)
def test_daily_sun_on_the_lattice_equals_the_per_pixel_formulas(crs, origin, size, day):
    # FAO-56 eqs. 21 and 34 (Allen et al. 1998) at every pixel's own latitude, against their
    # interpolation from the lattice nodes
    from rasterbudget.physics.solar import daylight_hours, extraterrestrial_radiation_daily
    from rasterbudget.scene.geometry import daily_sun

    grid = Grid(CRS.from_string(crs), from_origin(*origin, size, size), 500, 400)
    rows, cols = slice(37, 301), slice(5, 490)
    _, lat = pixel_lonlat(grid, rows, cols)
    got = daily_sun(grid, rows, cols, day)
    ra = extraterrestrial_radiation_daily(lat, day)
    np.testing.assert_allclose(got.extraterrestrial_radiation, ra, rtol=1e-9)
    np.testing.assert_allclose(got.daylight_hours, daylight_hours(lat, day), rtol=1e-9)
