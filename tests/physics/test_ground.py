"""Ground heat flux against computed values of the published relation (CHECKS.md)."""

import numpy as np
import pytest

from rasterbudget.physics import ground

INPUT_KINDS = ["scalar", "ndarray"]


def as_type(value, kind):
    return np.full(3, value) if kind == "ndarray" else value


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_ground_heat_ratio_ndvi_computed_value(kind):
    # Bastiaanssen (2000): Ts 303.15 K, albedo 0.2, NDVI 0.5 -> 0.148698 (computed, CHECKS.md)
    ratio = ground.ground_heat_ratio_ndvi(as_type(303.15, kind), 0.2, as_type(0.5, kind))
    np.testing.assert_allclose(ratio, 0.148698, rtol=0, atol=5e-7)


def test_ground_heat_ratio_ndvi_matches_published_form():
    # the implementation divides through by albedo; compare with the form as printed
    rng = np.random.default_rng(11)
    ts = rng.uniform(280.0, 330.0, 500)
    albedo = rng.uniform(0.05, 0.4, 500)
    ndvi = rng.uniform(-0.2, 0.9, 500)
    printed = (ts - 273.15) / albedo * (0.0038 * albedo + 0.0074 * albedo**2) * (1 - 0.98 * ndvi**4)
    np.testing.assert_allclose(
        ground.ground_heat_ratio_ndvi(ts, albedo, ndvi), printed, rtol=1e-12, atol=1e-15
    )


def test_ground_heat_ratio_ndvi_limits():
    # zero at 0 °C; dense vegetation (NDVI 1) keeps only 2 % of the bare-soil ratio
    assert ground.ground_heat_ratio_ndvi(273.15, 0.2, 0.3) == pytest.approx(0.0, abs=1e-15)
    bare = ground.ground_heat_ratio_ndvi(310.0, 0.2, 0.0)
    dense = ground.ground_heat_ratio_ndvi(310.0, 0.2, 1.0)
    assert dense == pytest.approx(0.02 * bare, rel=1e-12)
    assert np.isfinite(ground.ground_heat_ratio_ndvi(300.0, 0.0, 0.2))


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_ground_heat_flux(kind):
    g = ground.ground_heat_flux(as_type(600.0, kind), 0.148698)
    np.testing.assert_allclose(g, 89.2188, rtol=1e-12)
