"""Anchor method: histogram order statistics, calibration conditions, per-pixel independence."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from rasterbudget.methods import anchors
from rasterbudget.physics import turbulence
from rasterbudget.physics.constants import SPECIFIC_HEAT_AIR


def _anchor(role, ts, available, z0m, rho=1.0):
    return anchors.Anchor(
        role=role,
        surface_temperature=ts,
        available_energy=available,
        net_radiation=available,
        ground_heat_flux=0.0,
        roughness_length=z0m,
        air_density=rho,
        pixel_count=1.0,
        candidates=1,
        percentile=None,
        percentile_temperature=None,
        ts_range=None,
        row=0,
        col=0,
    )


def block_state(ts, role="cold"):
    n = ts.size
    return {
        "datum_surface_temperature": ts,
        "surface_temperature": ts,
        "available_energy": np.full(n, 500.0),
        "roughness_length": np.full(n, 0.1),
        "air_density": np.full(n, 1.0),
        "net_radiation": np.full(n, 600.0),
        "ground_heat_flux": np.full(n, 100.0),
        "cold_candidate": np.full(n, role == "cold"),
        "hot_candidate": np.full(n, role == "hot"),
    }


def test_histogram_percentile_matches_numpy_to_the_bin_width():
    rng = np.random.default_rng(7)
    ts = rng.normal(300.0, 4.0, 20000)
    hist = anchors.anchor_histograms_block(block_state(ts), np.arange(ts.size, dtype=float))
    assert hist[1] is None  # no hot candidates
    dense = anchors.dense_histogram(hist[0])
    anchor = anchors.select_anchor(dense, "cold", 5.0, 1.0, 20, width=1000)
    assert anchor.percentile_temperature == pytest.approx(np.percentile(ts, 5), abs=anchors.TS_STEP)
    lo, hi = np.percentile(ts, [4, 6])
    population = ts[(ts >= lo) & (ts <= hi)]
    assert anchor.surface_temperature == pytest.approx(population.mean(), abs=anchors.TS_STEP)
    assert anchor.pixel_count == pytest.approx(0.02 * ts.size)
    # the representative pixel lies in the bin holding the percentile
    pixel_ts = ts[anchor.row * 1000 + anchor.col]
    assert abs(pixel_ts - anchor.percentile_temperature) <= anchors.TS_STEP


def test_histograms_of_split_blocks_combine_to_the_whole():
    rng = np.random.default_rng(3)
    ts = rng.normal(310.0, 6.0, 5000)
    flat = np.arange(ts.size, dtype=float)
    whole = anchors.anchor_histograms_block(block_state(ts, "hot"), flat)
    parts = [
        anchors.anchor_histograms_block(block_state(ts[s], "hot"), flat[s])
        for s in (slice(0, 1234), slice(1234, 4000), slice(4000, None))
    ]
    combined = parts[0]
    for p in parts[1:]:
        combined = anchors.combine_histograms(combined, p)
    assert combined[0] is None and whole[0] is None
    np.testing.assert_allclose(
        anchors.dense_histogram(combined[1]), anchors.dense_histogram(whole[1]), rtol=1e-12
    )


def test_too_few_candidates_is_a_clear_error():
    hist = anchors.anchor_histograms_block(block_state(np.array([300.0, 301.0])), np.arange(2.0))
    with pytest.raises(anchors.AnchorError, match="only 2 cold-anchor candidate"):
        anchors.select_anchor(anchors.dense_histogram(hist[0]), "cold", 5.0, 1.0, 20, width=10)


@pytest.mark.parametrize("wind", [1.5, 4.0, 8.0])
def test_calibration_reproduces_the_anchor_conditions(wind):
    """H at each anchor, recomputed per pixel, is (1 - EF)(Rn - G) (Bastiaanssen et al. 1998)."""
    cold = _anchor("cold", 296.0, 600.0, 0.1)
    hot = _anchor("hot", 325.0, 350.0, 0.005)
    u_blend = turbulence.wind_speed_at_blending_height(wind, 2.0, 0.0148, 200.0)
    cal = anchors.calibrate(cold, hot, u_blend, 200.0, 0.95, 0.0, max_iterations=50, tolerance=1e-6)
    assert cal.converged
    ts = np.array([296.0, 325.0])
    h, converged = anchors.sensible_heat_block(
        ts,
        np.array([0.1, 0.005]),
        np.array([1.0, 1.0]),
        cal,
        200.0,
        max_iterations=50,
        tolerance=1e-6,
    )
    assert converged.all()
    np.testing.assert_allclose(h, [0.05 * 600.0, 350.0], rtol=1e-4)
    # unstable air lowers the resistance below its neutral value at the hot anchor
    neutral_u_star = turbulence.friction_velocity(u_blend, 200.0, 0.005)
    neutral_rah = turbulence.aerodynamic_resistance(neutral_u_star, 0.1, 2.0)
    assert cal.hot_resistance < neutral_rah
    assert cal.hot_temperature_difference == pytest.approx(
        350.0 * cal.hot_resistance / (1.0 * SPECIFIC_HEAT_AIR)
    )


def test_wind_at_blending_height_is_a_log_profile():
    # at the measurement height itself the wind is unchanged
    assert turbulence.wind_speed_at_blending_height(3.0, 2.0, 0.0148, 2.0) == pytest.approx(3.0)
    assert turbulence.wind_speed_at_blending_height(3.0, 2.0, 0.0148, 200.0) == pytest.approx(
        3.0 * np.log(200 / 0.0148) / np.log(2 / 0.0148)
    )


CAL = anchors.calibrate(
    _anchor("cold", 296.0, 600.0, 0.1), _anchor("hot", 325.0, 350.0, 0.005), 6.0, 200.0, 1.0, 0.0
)


@settings(max_examples=40, deadline=None)
@given(arrays(np.float64, st.integers(1, 60), elements=st.floats(285.0, 335.0)), st.integers(0, 59))
def test_each_pixel_is_independent_of_its_block(ts, split):
    """The value of a pixel must not depend on which other pixels share its chunk."""
    z0m = np.where(ts > 310, 0.005, 0.1)
    rho = np.full_like(ts, 0.98)
    whole, conv_whole = anchors.sensible_heat_block(ts, z0m, rho, CAL, 200.0)
    split = min(split, ts.size)
    a, conv_a = anchors.sensible_heat_block(ts[:split], z0m[:split], rho[:split], CAL, 200.0)
    b, conv_b = anchors.sensible_heat_block(ts[split:], z0m[split:], rho[split:], CAL, 200.0)
    np.testing.assert_array_equal(np.concatenate([a, b]), whole)
    np.testing.assert_array_equal(np.concatenate([conv_a, conv_b]), conv_whole)


def test_stability_start_reaches_the_same_h_in_fewer_rounds(monkeypatch):
    """Starting each pixel at the tabulated converged 1/L moves H by less than the iteration's
    tolerance and needs fewer rounds than starting neutral."""
    rng = np.random.default_rng(7)
    ts = rng.uniform(288.0, 332.0, 5000)
    z0m = rng.choice([0.0002, 0.005, 0.03, 0.1, 0.8], ts.size)
    rho = rng.uniform(0.95, 1.05, ts.size)  # the table is made at one air density
    start = anchors.stability_start(
        CAL, np.array([0.0002, 0.005, 0.03, 0.1, 0.8, np.nan]), 1.0, 200.0
    )

    pixel_rounds = []
    original = anchors._resistance

    def counting(u_blend, height, roughness, inverse_length):
        pixel_rounds.append(np.size(inverse_length))
        return original(u_blend, height, roughness, inverse_length)

    monkeypatch.setattr(anchors, "_resistance", counting)
    neutral, conv_neutral = anchors.sensible_heat_block(ts, z0m, rho, CAL, 200.0)
    neutral_rounds = sum(pixel_rounds) + ts.size  # the neutral first round skips _resistance
    pixel_rounds.clear()
    warm, conv_warm = anchors.sensible_heat_block(ts, z0m, rho, CAL, 200.0, start=start)
    warm_rounds = sum(pixel_rounds)

    assert conv_neutral.all() and conv_warm.all()
    # Each run stops once a round moves H by < 0.1 W m-2, which leaves it within about
    # 0.1 c / (1 - c) of the fixed point for a contraction factor c of the iteration: 0.3 W m-2 at
    # c = 0.75, for the few slow pixels near neutral.
    np.testing.assert_allclose(warm, neutral, atol=0.5, rtol=0)
    assert np.median(np.abs(warm - neutral)) < 0.01
    assert warm_rounds < 0.6 * neutral_rounds


def test_stability_start_lookup_returns_the_table_at_its_nodes():
    start = anchors.stability_start(CAL, np.array([0.005, 0.1]), 1.0, 200.0, points=11)
    dt = start.first_temperature_difference + start.temperature_difference_step * np.arange(11)
    for row, z0m in enumerate(start.roughness_lengths):
        got = start.lookup(np.full(11, z0m), dt)
        np.testing.assert_allclose(got, start.inverse_length[row], rtol=1e-5, atol=1e-12)
    # beyond the table's ends the end values hold
    ends = start.lookup(np.array([0.005, 0.005]), dt[[0, -1]] + np.array([-50.0, 50.0]))
    np.testing.assert_allclose(ends, start.inverse_length[0, [0, -1]], rtol=1e-5)
    # hot pixels are unstable (1/L < 0), the coldest stable or neutral
    assert start.inverse_length[0, -1] < 0 <= start.inverse_length[0, 0] + 1e-12


def test_no_stability_start_when_dt_does_not_rise_with_ts():
    flat = anchors.Calibration(1.0, 0.0, 1, True, 0, 0, 0, 0, 0, 0, 5.0)
    assert anchors.stability_start(flat, np.array([0.1]), 1.0, 200.0) is None
