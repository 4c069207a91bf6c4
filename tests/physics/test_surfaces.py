"""Surfaces recognised without a land-cover map, and the Level-1 cloud and shadow screen
(common-practice rules of catalog.surfaces): each rule on the pixels it is written for."""

from __future__ import annotations

import numpy as np

from rasterbudget.catalog.classes import load_class_table
from rasterbudget.catalog.surfaces import (
    CLOUD_BIT,
    SHADOW_BIT,
    SURFACE_CODES,
    cloud_and_shadow,
    surface_classes,
)

#: (NDVI, albedo, SWIR1) of typical surfaces (common-practice values) and their class.
CASES = {
    "open_water": (-0.3, 0.06, 0.01),
    "built_up": (-0.05, 0.12, 0.15),  # asphalt: NDVI just below 0, bright at 1.6 um
    "snow_ice": (0.02, 0.70, 0.05),
    "bare_soil": (0.12, 0.25, 0.35),
    "vegetation_sparse": (0.35, 0.18, 0.22),
    "vegetation_dense": (0.82, 0.16, 0.15),
}


def test_each_surface_is_recognised():
    ndvi, albedo, swir1 = (np.array(v) for v in zip(*CASES.values(), strict=True))
    got = surface_classes(ndvi, albedo, swir1)
    assert list(got) == [SURFACE_CODES[name] for name in CASES]


def test_without_swir1_dark_negative_ndvi_is_water_and_nothing_is_built_up():
    got = surface_classes(np.array([-0.05, -0.3]), np.array([0.12, 0.06]))
    assert list(got) == [SURFACE_CODES["open_water"]] * 2


def test_missing_inputs_give_no_class():
    assert np.isnan(surface_classes(np.array([np.nan]), np.array([0.2]))).all()


def test_recognised_codes_are_classes_of_the_builtin_table_with_the_right_roles():
    table = load_class_table()
    for name, code in SURFACE_CODES.items():
        assert table.by_code(code).name == name
    assert table.by_code(SURFACE_CODES["vegetation_dense"]).cold_anchor
    assert table.by_code(SURFACE_CODES["bare_soil"]).hot_anchor
    for unreliable in ("open_water", "built_up", "snow_ice"):
        assert not table.by_code(SURFACE_CODES[unreliable]).residual_reliable


def test_cloud_and_shadow_screen():
    air = 300.0
    # cloud, lit vegetation, shadowed vegetation, water, bright hot soil, snow (dark at 1.6 um)
    blue = np.array([0.45, 0.03, 0.02, 0.04, 0.22, 0.80])
    nir = np.array([0.50, 0.35, 0.06, 0.02, 0.30, 0.70])
    swir1 = np.array([0.40, 0.15, 0.04, 0.01, 0.40, 0.05])
    ndvi = np.array([0.02, 0.80, 0.60, -0.40, 0.10, 0.01])
    ts = np.array([280.0, 297.0, 293.0, 296.0, 318.0, 270.0])
    mask = cloud_and_shadow(blue, nir, swir1, ndvi, ts, air).astype(int)
    assert list(mask) == [1 << CLOUD_BIT, 0, 1 << SHADOW_BIT, 0, 0, 0]


def test_buffer_grows_around_clouds_but_not_around_single_dark_pixels():
    from rasterbudget.catalog.surfaces import BUFFER_BIT, buffered_mask

    mask = np.zeros((20, 20))
    mask[5:8, 5:8] = 1 << CLOUD_BIT  # a 3 x 3 cloud
    mask[15, 15] = 1 << SHADOW_BIT  # one dark pixel
    got = buffered_mask(mask).astype(int)
    assert (got[5:8, 5:8] == 1 << CLOUD_BIT).all() and got[15, 15] == 1 << SHADOW_BIT
    buffered = got == 1 << BUFFER_BIT
    assert buffered[2:11, 2:11].sum() == 81 - 9  # three pixels around the cloud
    assert not buffered[11:, :].any() and not buffered[:, 11:].any()
