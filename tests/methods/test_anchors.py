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


def _iterated(ts, z0m, rho, dt, wind, tolerance, max_iterations=200):
    """H and 1/L iterated from neutral for a given dT (calibration a = 0, b = 1, dT as Ts_datum)."""
    identity = anchors.Calibration(0.0, 1.0, 0, True, 0, 0, 0, 0, 0, 0, 5.0)
    inverse_length = np.zeros(np.shape(ts))
    h, converged = anchors.sensible_heat_block(
        ts,
        z0m,
        rho,
        identity,
        200.0,
        max_iterations,
        tolerance,
        datum_surface_temperature=dt,
        inverse_length_out=inverse_length,
        blending_wind_speed=wind,
    )
    return h, converged, inverse_length


def test_converged_stability_depends_on_dt_over_ts_u2_alone():
    # Monin-Obukhov similarity: air density, Ts and wind enter 1/L only through dT / (Ts u^2)
    ts = np.array([280.0, 300.0, 330.0])
    wind = np.array([3.0, 5.0, 11.0])
    for beta in (-2e-4, 1e-4, 3e-3):
        _, converged, inverse_length = _iterated(
            ts, np.full(3, 0.1), np.array([0.9, 1.0, 1.2]), beta * ts * wind**2, wind, 1e-10
        )
        assert converged.all()
        np.testing.assert_allclose(inverse_length, inverse_length[0], rtol=1e-9)


def _random_pixels(n, seed=7):
    rng = np.random.default_rng(seed)
    return (
        rng.uniform(280.0, 335.0, n),  # Ts [K]
        rng.choice([0.0002, 0.005, 0.03, 0.1, 0.8], n),  # z0m of the class table [m]
        rng.uniform(0.9, 1.2, n),  # air density [kg m-3]
        rng.uniform(-6.0, 25.0, n),  # dT [K]
        rng.uniform(2.0, 15.0, n),  # wind at 200 m [m s-1]
    )


def test_stability_table_gives_unstable_pixels_their_fixed_point():
    ts, z0m, rho, dt, wind = _random_pixels(20000)
    table = anchors.stability_table(np.array([0.0002, 0.005, 0.03, 0.1, 0.8, np.nan]), 200.0)
    identity = anchors.Calibration(0.0, 1.0, 0, True, 0, 0, 0, 0, 0, 0, 5.0)
    from_table, converged = anchors.sensible_heat_block(
        ts,
        z0m,
        rho,
        identity,
        200.0,
        datum_surface_temperature=dt,
        blending_wind_speed=wind,
        table=table,
    )
    exact, exact_converged, _ = _iterated(ts, z0m, rho, dt, wind, 1e-9)
    today, today_converged, _ = _iterated(ts, z0m, rho, dt, wind, 0.1, 30)
    _, direct = table.lookup(z0m, dt, ts, wind)
    assert direct.mean() > 0.7  # dT > 0: unstable, read from the table
    ok = converged & exact_converged & today_converged
    # read from the table: within 0.005 W m-2 of the fixed point up to 800 W m-2 (measured:
    # 0.003), and 1e-5 relative beyond (the random mix reaches 7,000 W m-2 at 2 m s-1)
    error = np.abs(from_table - exact)
    assert error[ok & direct & (exact <= 800.0)].max() < 0.005
    assert (error <= 1e-5 * np.abs(exact))[ok & direct & (exact > 800.0)].all()
    # the iteration to 0.1 W m-2 stops within about 0.1 c / (1 - c) of it (c its contraction)
    assert np.abs(today - exact)[ok & direct].max() > np.abs(from_table - exact)[ok & direct].max()
    # the stable pixels still iterate to the same stopping rule, from the table's start: as far
    # from their fixed point at worst (0.78 against 0.75 W m-2 for slowly converging pixels),
    # nearer as a rule
    stable = ok & ~direct
    assert error[stable].max() < 1.0
    assert np.median(error[stable]) < 0.1 * np.median(np.abs(today - exact)[stable])
    assert np.median(np.abs(from_table - today)[ok]) < 0.01


def test_stability_table_lookup_returns_the_table_at_its_nodes():
    table = anchors.stability_table(np.array([0.005, 0.1]), 200.0, points=11)
    beta = anchors.BETA_SCALE * np.sinh(table.first_node + table.node_step * np.arange(11))
    ts, wind = np.full(11, 300.0), np.full(11, 5.0)
    for row, z0m in enumerate(table.roughness_lengths):
        got, exact = table.lookup(np.full(11, z0m), beta * ts * wind**2, ts, wind)
        np.testing.assert_allclose(got, table.inverse_length[row], rtol=1e-6, atol=1e-12)
        # read directly only where unstable and converged
        assert not (exact & ~((beta > 0) & table.converged[row])).any()
        assert exact.any()
    # beyond the table's ends the end values hold, and the pixel iterates
    dt = np.array([-1e6, 1e6])
    ends, exact = table.lookup(np.array([0.005, 0.005]), dt, ts[:2], wind[:2])
    np.testing.assert_allclose(ends, table.inverse_length[0, [0, -1]], rtol=1e-6)
    assert not exact.any()
    # an untabulated roughness length (from NDVI) iterates too
    _, exact = table.lookup(np.array([0.05]), np.array([5.0]), np.array([300.0]), np.array([5.0]))
    assert not exact.any()
    # the strongest instability has 1/L < 0, the strongest stability 1/L > 0
    assert table.inverse_length[0, -1] < 0 < table.inverse_length[0, 0]
