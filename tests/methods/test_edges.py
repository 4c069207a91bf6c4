"""Temperature-albedo edges: a synthetic scatter with known edges is recovered."""

from __future__ import annotations

import numpy as np
import pytest

from rasterbudget.errors import AnchorError
from rasterbudget.methods import edges

DRY = (345.0, -80.0)  # T_H = 345 - 80 albedo [K]
WET = (290.0, 10.0)  # T_LE = 290 + 10 albedo [K]


def _scene(n=60000, seed=11):
    """Pixels uniformly spread between two known edges (EF uniform in [0, 1])."""
    rng = np.random.default_rng(seed)
    albedo = rng.uniform(0.10, 0.30, n)
    ef = rng.uniform(0.0, 1.0, n)
    t_dry = DRY[0] + DRY[1] * albedo
    t_wet = WET[0] + WET[1] * albedo
    ts = t_dry - ef * (t_dry - t_wet)  # Roerink, Su & Menenti (2000), eq. 9 solved for Ts
    state = {
        "albedo": albedo,
        "datum_surface_temperature": ts,
        "edge_candidate": np.ones(n, dtype=bool),
    }
    return state, ef


def test_known_edges_and_evaporative_fraction_are_recovered():
    state, ef = _scene()
    # two blocks merged, as pass 1 does
    half = {k: v[:30000] for k, v in state.items()}
    rest = {k: v[30000:] for k, v in state.items()}
    hist = edges.combine_histograms(
        edges.scatter_histogram_block(half), edges.scatter_histogram_block(rest)
    )
    fitted = edges.fit_edges(hist, dry_percentile=99.9, wet_percentile=0.1, wet_edge="fitted")
    # the scatter fills the triangle-free band, so there is no turning point: both edges are
    # fitted over all bins; per-bin extreme percentiles sit within ~0.1 K of the true edges
    albedo = np.linspace(0.1, 0.3, 5)
    np.testing.assert_allclose(fitted.dry(albedo), DRY[0] + DRY[1] * albedo, atol=0.3)
    np.testing.assert_allclose(fitted.wet(albedo), WET[0] + WET[1] * albedo, atol=0.3)
    recovered = edges.evaporative_fraction_block(
        state["albedo"], state["datum_surface_temperature"], fitted
    )
    # 0.3 K on an edge spread of 30-55 K is at most 0.01 in EF, plus the 0.1 K Ts bins
    np.testing.assert_allclose(recovered, ef, atol=0.02)


def test_flat_wet_edge_sits_at_the_scene_low_percentile():
    state, _ = _scene()
    hist = edges.scatter_histogram_block(state)
    fitted = edges.fit_edges(hist, wet_percentile=1.0, wet_edge="flat")
    assert fitted.wet_slope == 0.0
    assert fitted.wet_intercept == pytest.approx(
        np.percentile(state["datum_surface_temperature"], 1.0), abs=edges.TS_STEP
    )


def test_too_narrow_albedo_range_is_a_clear_error():
    state, _ = _scene(n=2000)
    state["albedo"] = np.full(2000, 0.2)
    with pytest.raises(AnchorError, match="albedo bins"):
        edges.fit_edges(edges.scatter_histogram_block(state))
