"""True ground area of grid cells, on any projection.

A projected cell is mapped to longitude and latitude of its CRS's ellipsoid at the midpoints of
its four sides; the differences give the cell's extent in longitude and latitude along each grid
axis (a central-difference Jacobian), and the ellipsoid's area element M N cos(lat) turns it
into ground area (M, N: the meridian and prime-vertical radii of curvature). This holds for any
projection, conformal or not, including Web Mercator, which projects the ellipsoid's
coordinates as if from a sphere (its own scale factors, taken on the sphere, are 0.3 % off the
ellipsoid's areas at 60° N). The error is second order in the cell size; the tests measure it
against geodesic polygon areas. Cells of a geographic grid take the geodesic area of their
latitude band (``pyproj.Geod``), exact on the ellipsoid.
"""

from __future__ import annotations

import numpy as np


def cell_areas(grid, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
    """Ground area of the cells at ``rows``, ``cols`` (equal-shaped integer arrays) [m2]."""
    rows = np.asarray(rows)
    cols = np.asarray(cols)
    t = grid.transform
    if grid.crs.is_geographic:
        unique, inverse = np.unique(rows, return_inverse=True)
        return band_areas(grid, unique)[inverse].reshape(rows.shape)
    from pyproj import CRS, Transformer

    crs = CRS.from_user_input(grid.crs.to_wkt())
    geodetic = crs.geodetic_crs
    to_lonlat = Transformer.from_crs(crs, geodetic, always_xy=True)
    x = t.c + (cols + 0.5) * t.a
    y = t.f + (rows + 0.5) * t.e
    # the midpoints of the cell's sides, along each grid axis
    lon_e, lat_e = to_lonlat.transform(x + 0.5 * t.a, y)
    lon_w, lat_w = to_lonlat.transform(x - 0.5 * t.a, y)
    lon_n, lat_n = to_lonlat.transform(x, y - 0.5 * t.e)
    lon_s, lat_s = to_lonlat.transform(x, y + 0.5 * t.e)
    d_lon_x, d_lat_x = np.radians(_wrap(lon_e - lon_w)), np.radians(lat_e - lat_w)
    d_lon_y, d_lat_y = np.radians(_wrap(lon_n - lon_s)), np.radians(lat_n - lat_s)
    _, lat = to_lonlat.transform(x, y)
    ellipsoid = geodetic.ellipsoid
    a = ellipsoid.semi_major_metre
    e2 = 1.0 - (ellipsoid.semi_minor_metre / a) ** 2
    sin2 = np.sin(np.radians(lat)) ** 2
    meridian = a * (1.0 - e2) / (1.0 - e2 * sin2) ** 1.5
    prime = a / np.sqrt(1.0 - e2 * sin2)
    jacobian = np.abs(d_lon_x * d_lat_y - d_lon_y * d_lat_x)
    areas = meridian * prime * np.cos(np.radians(lat)) * jacobian
    return np.asarray(areas, dtype=np.float64).reshape(rows.shape)


def _wrap(degrees: np.ndarray) -> np.ndarray:
    """Longitude differences into -180..180 (a cell across the antimeridian)."""
    return (np.asarray(degrees) + 180.0) % 360.0 - 180.0


def band_areas(grid, rows: np.ndarray) -> np.ndarray:
    """Geodesic area of one cell of each given row of a geographic grid [m2]."""
    from pyproj import Geod

    geod = Geod(ellps="WGS84")
    t = grid.transform
    out = np.empty(len(rows))
    for k, r in enumerate(rows):
        top, bottom = t.f + r * t.e, t.f + (r + 1) * t.e
        lons = [t.c, t.c + t.a, t.c + t.a, t.c]
        lats = [top, top, bottom, bottom]
        area, _ = geod.polygon_area_perimeter(lons, lats)
        out[k] = abs(area)
    return out
