"""Known-answer scene for the temperature-albedo edges method, run forward then inverted.

Forward: choose per pixel an albedo, an available energy Rn - G and a prescribed evaporative
fraction; place the pixel's Ts between two chosen edges as Roerink, Su & Menenti (2000) eq. 9
implies, Ts = T_H - EF (T_H - T_LE). The scene also holds fully dry (EF = 0) and fully wet
(EF = 1) pixels at every albedo, which is the method's own premise. Inverse: the package's pass-1
histogram, edge fit and per-pixel EF, then H = (1 - EF)(Rn - G) and LE = EF (Rn - G).

Tolerance: the edge points are percentiles read from 0.1 K bins of a 2-D histogram, so an edge
may sit up to ~0.1 K off; over an edge spread of at least 30 K that is <= 0.004 in EF, which at
Rn - G <= 650 W m-2 is <= 3 W m-2 in LE; the Theil-Sen fit through bin points adds about as
much again. We allow 0.01 in EF, hence 0.01 x 650 = 6.5 W m-2 in LE and H.
"""

from __future__ import annotations

import numpy as np

from rasterbudget.methods import edges
from rasterbudget.physics import partition

DRY = (350.0, -90.0)  # T_H(albedo) [K]: brighter dry surfaces absorb less and run cooler
WET = (292.0, 8.0)  # T_LE(albedo) [K]


def forward_scene(seed: int = 5):
    rng = np.random.default_rng(seed)
    n = 40000
    albedo = rng.uniform(0.12, 0.32, n)
    ef = rng.uniform(0.0, 1.0, n)
    ef[:2000], ef[2000:4000] = 0.0, 1.0  # the dry and wet extremes at every albedo
    available = rng.uniform(250.0, 650.0, n)
    t_dry, t_wet = DRY[0] + DRY[1] * albedo, WET[0] + WET[1] * albedo
    ts = t_dry - ef * (t_dry - t_wet)
    return albedo, ts, available, ef


def test_prescribed_fluxes_are_recovered():
    albedo, ts, available, ef = forward_scene()
    state = {
        "albedo": albedo,
        "datum_surface_temperature": ts,
        "edge_candidate": np.ones(albedo.size, dtype=bool),
    }
    blocks = [
        edges.scatter_histogram_block({k: v[s] for k, v in state.items()})
        for s in (slice(0, 15000), slice(15000, None))
    ]
    fitted = edges.fit_edges(
        edges.combine_histograms(*blocks),
        dry_percentile=99.9,
        wet_percentile=0.1,
        wet_edge="fitted",
    )
    recovered = np.clip(edges.evaporative_fraction_block(albedo, ts, fitted), 0.0, 1.0)
    np.testing.assert_allclose(recovered, ef, atol=0.01)
    le = partition.clip_latent_heat(recovered * available, available)
    h = available - le
    np.testing.assert_allclose(le, ef * available, atol=6.5)
    np.testing.assert_allclose(h, (1.0 - ef) * available, atol=6.5)
