"""Where each pixel is: longitude, latitude and the direction of the sun on a global lattice."""

from __future__ import annotations

import threading

import numpy as np

from ..io.grid import (
    Grid,
)
from ..physics.solar import (
    local_hour_angle,
    sun_direction,
)
from ..surface import (
    SceneConstants,
)

_local = threading.local()


def _transformer(crs_wkt: str):
    from pyproj import Transformer

    cache = getattr(_local, "transformers", None)
    if cache is None:
        cache = _local.transformers = {}
    if crs_wkt not in cache:
        cache[crs_wkt] = Transformer.from_crs(crs_wkt, "EPSG:4326", always_xy=True)
    return cache[crs_wkt]


#: Pixel-centre coordinates are projected exactly (pyproj) on a lattice of every LONLAT_STEP-th
#: pixel of the whole grid and interpolated bilinearly in between, at 1/256 of the projection cost.
#: Measured error: 4e-8 degrees on a 30 m UTM grid, 3e-5 degrees on a 250 m polar stereographic grid
#: near 75 S (tested) - 0.01 s of solar time, far below what the radiation terms resolve. The
#: lattice is global, so values do not depend on chunk boundaries.
LONLAT_STEP = 16


def _lattice_weights(start: int, stop: int, first_node: int) -> tuple[np.ndarray, np.ndarray]:
    index = np.arange(start, stop) - first_node
    return index // LONLAT_STEP, (index % LONLAT_STEP) / LONLAT_STEP


def pixel_lonlat(grid: Grid, rows: slice, cols: slice) -> tuple[np.ndarray, np.ndarray]:
    """Longitude [deg E] and latitude [rad] of the pixel centres of a window (pyproj)."""
    lon, lat, _ = pixel_geometry(grid, rows, cols)
    return lon, lat


def pixel_geometry(
    grid: Grid, rows: slice, cols: slice, constants: SceneConstants | None = None
) -> tuple[np.ndarray, np.ndarray, tuple[np.ndarray, ...] | None]:
    """Longitude [deg E], latitude [rad] and, given the scene constants, the unit vector towards
    the sun (east, north, up) of the pixel centres of a window.

    All are computed on a lattice of every ``LONLAT_STEP``-th pixel anchored at the grid origin
    (so blocks agree on shared nodes, whatever the chunking) and interpolated bilinearly. The
    sun's direction changes by about 1e-4 rad per km, so the interpolation error is far below
    1e-9; it saves the per-pixel trigonometry of the sun's position (profiled at a quarter of
    the surface-state time).
    """
    t = grid.transform
    step = LONLAT_STEP
    r_first, c_first = (rows.start // step) * step, (cols.start // step) * step
    r_nodes = np.arange(r_first, rows.stop + step, step)
    c_nodes = np.arange(c_first, cols.stop + step, step)
    xx, yy = np.meshgrid(t.c + (c_nodes + 0.5) * t.a, t.f + (r_nodes + 0.5) * t.e)
    lon_nodes, lat_nodes = _transformer(grid.crs.to_wkt()).transform(xx, yy)
    rk, rw = _lattice_weights(rows.start, rows.stop, r_first)
    ck, cw = _lattice_weights(cols.start, cols.stop, c_first)

    def interpolate(nodes: np.ndarray) -> np.ndarray:
        along_rows = nodes[rk] * (1 - rw)[:, None] + nodes[rk + 1] * rw[:, None]
        return along_rows[:, ck] * (1 - cw) + along_rows[:, ck + 1] * cw

    lon_nodes, lat_nodes = np.asarray(lon_nodes), np.asarray(lat_nodes)
    sun = None
    if constants is not None:
        omega = local_hour_angle(constants.greenwich_hour_angle, lon_nodes)
        sun_nodes = sun_direction(np.radians(lat_nodes), constants.declination, omega)
        sun = tuple(interpolate(component) for component in sun_nodes)
    return interpolate(lon_nodes), np.radians(interpolate(lat_nodes)), sun
