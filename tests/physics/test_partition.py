"""Energy partition: closure, clipping, evaporative fraction and ET depth."""

import warnings

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from rasterbudget.physics import partition

INPUT_KINDS = ["scalar", "ndarray"]
flux = st.floats(-500.0, 1200.0, allow_nan=False)


def as_type(value, kind):
    return np.full(3, value) if kind == "ndarray" else value


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_available_energy_and_residual(kind):
    rn, g, h = as_type(600.0, kind), 90.0, 210.0
    np.testing.assert_allclose(partition.available_energy(rn, g), 510.0, rtol=1e-12)
    np.testing.assert_allclose(partition.latent_heat_residual(rn, g, h), 300.0, rtol=1e-12)


@given(rn=flux, g=st.floats(-100.0, 300.0), h=flux)
def test_residual_closes_the_balance(rn, g, h):
    le = partition.latent_heat_residual(rn, g, h)
    assert le + g + h == pytest.approx(rn, abs=1e-9)
    assert partition.available_energy(rn, g) - h == pytest.approx(le, abs=1e-9)


@given(le=flux, available=flux)
def test_clip_latent_heat_bounds(le, available):
    clipped = partition.clip_latent_heat(le, available)
    assert 0.0 <= clipped <= max(available, 0.0)
    if 0.0 <= le <= available:
        assert clipped == le


def test_clip_latent_heat_array():
    le = np.array([-20.0, 150.0, 700.0, 50.0, np.nan])
    available = np.array([400.0, 400.0, 400.0, -30.0, 400.0])
    clipped = partition.clip_latent_heat(le, available)
    np.testing.assert_array_equal(clipped[:4], [0.0, 150.0, 400.0, 0.0])
    assert np.isnan(clipped[4])


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_evaporative_fraction(kind):
    ef = partition.evaporative_fraction(as_type(300.0, kind), as_type(400.0, kind))
    np.testing.assert_allclose(ef, 0.75, rtol=1e-12)
    assert np.shape(ef) == np.shape(as_type(0.0, kind))


def test_evaporative_fraction_nan_below_minimum_without_warnings():
    le = np.array([10.0, 0.0, 5.0, 100.0, 1.0, 20.0])
    available = np.array([0.0, 0.0, -40.0, 200.0, 0.5, np.nan])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        ef = partition.evaporative_fraction(le, available)
        ef_strict = partition.evaporative_fraction(le, available, min_available=250.0)
    np.testing.assert_allclose(ef[3], 0.5, rtol=1e-12)
    assert np.isnan(ef[[0, 1, 2, 4, 5]]).all()
    assert np.isnan(ef_strict).all()


def test_evaporative_fraction_keeps_float32():
    le = np.array([100.0, 200.0], dtype=np.float32)
    ef = partition.evaporative_fraction(le, np.float32(400.0))
    assert ef.dtype == np.float32


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_et_depth_one_hour(kind):
    # 680 W m-2 for 3600 s at lambda = 2.45 MJ kg-1 (FAO-56's value at 20 °C)
    et = partition.et_depth(as_type(680.0, kind), 2.45e6, 3600.0)
    np.testing.assert_allclose(et, 0.999, rtol=0, atol=0.0005)
    np.testing.assert_allclose(et, 680.0 * 3600.0 / 2.45e6, rtol=1e-12)


def test_et_depth_one_day_equivalence():
    # FAO-56 ch. 1: 1 mm d-1 of water = 2.45 MJ m-2 d-1 at lambda = 2.45 MJ kg-1
    mean_flux = 2.45e6 / 86400.0  # W m-2
    np.testing.assert_allclose(partition.et_depth(mean_flux, 2.45e6, 86400.0), 1.0, rtol=1e-12)


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_et_daily_from_evaporative_fraction(kind):
    # EF 0.6 of FAO-56 Example 18's Rn 13.28 MJ m-2 d-1 at lambda 2.45 MJ kg-1
    et = partition.et_daily_from_evaporative_fraction(as_type(0.6, kind), 13.28, 2.45e6)
    np.testing.assert_allclose(et, 0.6 * 13.28 / 2.45, rtol=1e-12)
    np.testing.assert_allclose(et, 3.252, rtol=0, atol=0.0005)
