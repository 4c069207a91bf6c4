"""Known-answer validation of sensible heat by hot/cold anchor calibration.

What is validated
-----------------
1. *A scene built forward, inverted by the package.* For a few hundred pixels we prescribe the
   available energy AE = Rn - G, the sensible heat flux H (so LE = AE - H), the momentum roughness
   length and the air density, and take dT = a + b Ts from ``anchors.calibrate``. The forward
   problem at fixed H is well posed (in unstable air uniquely; in stable air the iteration from
   neutral picks the same root as the package's inversion over the mildly stable range used
   here, H >= -30 W m-2): iterating 1/L -> u* -> rah -> dT = H rah / (rho cp) to its fixed point
   gives the dT, hence Ts = (dT - a) / b, that produces exactly that H
   (``_synthetic.forward_surface_temperature``, written from the published forms: Monin-Obukhov
   length, Paulson 1970 / Webb 1970 stability functions, log wind profile, the two-height
   resistance of Bastiaanssen et al. 1998). The Ts are fed to ``anchors.sensible_heat_block``,
   which must give back the prescribed H, in stable (H < 0: advection, LE > AE), neutral and
   strongly unstable air, over smooth soil (z0m 0.005 m), crops (0.1 m) and forest or town (1 m),
   in light, moderate and strong wind.
2. *The calibration's own fixed point.* The dT and rah ``calibrate`` reports at each anchor equal
   the forward model's at the anchor's H and Ts.
3. *End to end on a block.* ``surface.surface_block`` on a flat 40 x 50 block (built-in class
   table, no NDVI, demo-like weather), anchors given explicitly with ``anchors.anchor_from_pixel``,
   ``calibrate``, ``sensible_heat_block``, then the residual and clipping of the pipeline's pass 2:
   the anchor conditions H = (1 - EF)(Rn - G) hold at both anchors and Rn = G + H + LE holds after
   clipping everywhere.

Tolerances
----------
- 0.5 W m-2 on H and LE with the pipeline's iteration settings. ``sensible_heat_block`` stops a
  pixel once H changes by less than 0.1 W m-2 between iterations; the iteration contracts, so the
  value left is within a few tenths of that step of the fixed point (measured: below 0.05 W m-2).
  ``calibrate`` stops when dT changes by less than 0.001 K, which is at most rho cp / rah * 0.001 K
  ~ 0.1 W m-2 at the anchors (rah >= 8.7 s m-1 here). 0.5 W m-2 covers both with margin and is far
  below what matters for ET (0.5 W m-2 is 0.0007 mm h-1).
- 1e-6 W m-2 when the iteration is run to 1e-9 W m-2: then only floating-point rounding remains.
- 0.005 K on the calibrated anchor dT (0.001 K stopping step, as above).
- 1e-9 W m-2 on energy closure: after clipping H is defined as AE - LE, so closure is exact up to
  rounding of sums of numbers below 1000 W m-2 (~1e-13).
"""

from __future__ import annotations

import numpy as np
import pytest

from rasterbudget import surface
from rasterbudget.methods import anchors
from rasterbudget.physics import partition, turbulence
from rasterbudget.physics.constants import SPECIFIC_HEAT_AIR
from tests.validation import _synthetic as syn

WINDS = (1.5, 3.4, 8.0)  # station wind at 2 m [m s-1]: light, the demo's, strong

H_TOLERANCE = 0.5  # [W m-2], see module docstring
TIGHT_TOLERANCE = 1e-6  # [W m-2]
CLOSURE_TOLERANCE = 1e-9  # [W m-2]


def scene_calibration(station_wind: float) -> anchors.Calibration:
    """dT = a + b Ts from a well-watered crop (EF = 1) and a dry bare soil (EF = 0) anchor."""
    cold = syn.make_anchor("cold", 296.0, 600.0, 0.1, 0.95)
    hot = syn.make_anchor("hot", 325.0, 450.0, 0.005, 0.9)
    return anchors.calibrate(
        cold,
        hot,
        syn.blending_wind(station_wind),
        syn.BLENDING_HEIGHT,
        cold_evaporative_fraction=1.0,
        hot_evaporative_fraction=0.0,
        max_iterations=syn.MAX_ITERATIONS,
        tolerance=syn.CALIBRATION_TOLERANCE_K,
    )


def prescribed_pixels() -> dict[str, np.ndarray]:
    """522 pixels: every combination of an H, an AE, a z0m and an air density.

    H = (1 - EF) AE for EF from 0 to 1 (unstable to neutral; EF = 1 is H = 0), plus small
    negative H (stable air over an advectively cooled surface) and small positive H (near neutral).
    """
    ef = np.linspace(0.0, 1.0, 21)
    stable = np.array([-30.0, -20.0, -10.0, -5.0, -2.0, -0.5])
    near_neutral = np.array([0.5, 2.0])
    available = np.array([250.0, 450.0, 650.0])  # [W m-2]
    z0m = np.array([0.005, 0.1, 1.0])  # smooth bare soil, crop, forest/town [m]
    rho = np.array([0.9, 1.1])  # [kg m-3]
    rows = []
    for ae in available:
        for h in np.concatenate([(1.0 - ef) * ae, stable, near_neutral]):
            for z in z0m:
                for r in rho:
                    rows.append((ae, h, z, r))
    ae, h, z, r = (np.array(col) for col in zip(*rows, strict=True))
    ground_ratio = 0.15  # G / Rn, any value in [0, 1) would do: only AE = Rn - G enters
    rn = ae / (1.0 - ground_ratio)
    return {
        "available_energy": ae,
        "sensible_heat": h,
        "roughness_length": z,
        "air_density": r,
        "net_radiation": rn,
        "ground_heat_flux": rn - ae,
    }


# --------------------------------------------------------------------------- the forward model


def test_forward_model_uses_the_published_stability_functions():
    # CHECKS.md, values computed from Paulson (1970); printed to 6 decimals -> half a unit: 5e-7.
    np.testing.assert_allclose(syn.psi_momentum([-0.1, -1.0]), [0.283614, 1.116232], atol=5e-7)
    np.testing.assert_allclose(syn.psi_heat([-0.1, -1.0]), [0.534284, 1.881227], atol=5e-7)
    # Webb (1970) stable form
    assert syn.psi_momentum(0.2) == pytest.approx(-1.0)
    # ... and the package evaluates the same relations, including its stable-side cap of z/L at
    # 1 (exact same closed forms: agreement to rounding, 1e-12).
    z_over_l = np.concatenate([-np.logspace(-4, 3, 50), [0.0], np.logspace(-4, 2, 50)])
    np.testing.assert_allclose(
        turbulence.stability_correction_momentum(z_over_l),
        syn.psi_momentum(z_over_l),
        atol=1e-12,
    )
    np.testing.assert_allclose(
        turbulence.stability_correction_heat(z_over_l), syn.psi_heat(z_over_l), atol=1e-12
    )


@pytest.mark.parametrize("wind", WINDS)
def test_calibration_is_the_forward_fixed_point_at_both_anchors(wind):
    cal = scene_calibration(wind)
    assert cal.converged
    assert cal.b > 0.0  # hotter means larger dT
    # Anchor conditions, Bastiaanssen et al. (1998): H = (1 - EF)(Rn - G)
    assert cal.cold_sensible_heat == pytest.approx(0.0, abs=1e-12)
    assert cal.hot_sensible_heat == pytest.approx(450.0, abs=1e-12)
    forward = syn.forward_surface_temperature(
        sensible_heat=[0.0, 450.0],
        roughness_length=[0.1, 0.005],
        air_density=[0.95, 0.9],
        blending_wind_speed=cal.blending_wind_speed,
        a=np.nan,
        b=np.nan,
        surface_temperature=[296.0, 325.0],
    )
    # 0.005 K: calibrate stops when dT changes by < 0.001 K (module docstring)
    np.testing.assert_allclose(
        [cal.cold_temperature_difference, cal.hot_temperature_difference],
        forward.temperature_difference,
        atol=0.005,
    )
    # rah to 0.1 %: same stopping rule, dT and rah are proportional at fixed H
    np.testing.assert_allclose(
        [cal.cold_resistance, cal.hot_resistance], forward.resistance, rtol=1e-3
    )
    # and the line passes through both anchors
    assert cal.a + cal.b * 296.0 == pytest.approx(cal.cold_temperature_difference, abs=1e-9)
    assert cal.a + cal.b * 325.0 == pytest.approx(cal.hot_temperature_difference, abs=1e-9)


# --------------------------------------------------------------------------- inversion


@pytest.mark.parametrize("wind", WINDS)
def test_sensible_heat_block_recovers_the_prescribed_flux(wind):
    cal = scene_calibration(wind)
    px = prescribed_pixels()
    forward = syn.forward_surface_temperature(
        px["sensible_heat"],
        px["roughness_length"],
        px["air_density"],
        cal.blending_wind_speed,
        cal.a,
        cal.b,
    )
    ts = forward.surface_temperature
    # The scene spans stable, neutral and strongly unstable air (z/L at the blending height):
    z_over_l = syn.BLENDING_HEIGHT * forward.inverse_length
    assert (z_over_l > 0.05).any() and (z_over_l == 0.0).any() and (z_over_l < -1.0).any()
    assert 250.0 < ts.min() and ts.max() < 345.0  # plausible surface temperatures

    h, converged = anchors.sensible_heat_block(
        ts,
        px["roughness_length"],
        px["air_density"],
        cal,
        syn.BLENDING_HEIGHT,
        max_iterations=syn.MAX_ITERATIONS,
        tolerance=syn.PIXEL_TOLERANCE_W,
        datum_surface_temperature=None,
    )
    assert converged.all()
    np.testing.assert_allclose(h, px["sensible_heat"], atol=H_TOLERANCE, rtol=0)

    # Latent heat as the residual (unclipped), LE = Rn - G - H, against the prescribed AE - H
    le = partition.latent_heat_residual(px["net_radiation"], px["ground_heat_flux"], h)
    np.testing.assert_allclose(
        le, px["available_energy"] - px["sensible_heat"], atol=H_TOLERANCE, rtol=0
    )
    # ... and clipped to [0, AE]: the stable pixels (H < 0) have LE = AE exactly, EF = 1.
    clipped = partition.clip_latent_heat(le, px["available_energy"])
    stable = px["sensible_heat"] < 0.0
    np.testing.assert_array_equal(clipped[stable], px["available_energy"][stable])
    ef = partition.evaporative_fraction(clipped, px["available_energy"])
    np.testing.assert_allclose(
        ef,
        np.clip(1.0 - px["sensible_heat"] / px["available_energy"], 0.0, 1.0),
        atol=H_TOLERANCE / px["available_energy"].min(),
        rtol=0,
    )


@pytest.mark.parametrize("wind", WINDS)
def test_sensible_heat_block_is_exact_when_iterated_to_convergence(wind):
    cal = scene_calibration(wind)
    px = prescribed_pixels()
    forward = syn.forward_surface_temperature(
        px["sensible_heat"],
        px["roughness_length"],
        px["air_density"],
        cal.blending_wind_speed,
        cal.a,
        cal.b,
    )
    h, converged = anchors.sensible_heat_block(
        forward.surface_temperature,
        px["roughness_length"],
        px["air_density"],
        cal,
        syn.BLENDING_HEIGHT,
        max_iterations=300,
        tolerance=1e-9,
    )
    assert converged.all()
    np.testing.assert_allclose(h, px["sensible_heat"], atol=TIGHT_TOLERANCE, rtol=0)
    # the package's dT is the forward model's: H = rho cp dT / rah with the same rah
    dt = cal.a + cal.b * forward.surface_temperature
    np.testing.assert_allclose(dt, forward.temperature_difference, atol=1e-9, rtol=0)
    np.testing.assert_allclose(
        h,
        px["air_density"] * SPECIFIC_HEAT_AIR * dt / forward.resistance,
        atol=TIGHT_TOLERANCE,
        rtol=0,
    )


# --------------------------------------------------------------------------- end to end on a block

SHAPE = (40, 50)
COLD_PIXEL = (6, 9)
HOT_PIXEL = (31, 42)


def synthetic_block(seed: int = 20260614):
    """A flat block of every built-in class, albedo inside each class's range, Ts 269-327 K.

    Wetter, rougher classes are cooler; the cold anchor pixel (irrigated crop, 289 K) is the
    coolest pixel apart from snow and the hot anchor pixel (bare soil, 329 K) the hottest.
    """
    table = syn.builtin_table()
    rng = np.random.default_rng(seed)
    codes = np.array(table.codes)
    land_cover = codes[rng.integers(0, codes.size, SHAPE)].astype(float)
    base_ts = {1: 295.0, 2: 303.0, 3: 306.0, 4: 312.0, 5: 318.0, 6: 294.0, 7: 314.0, 8: 297.0}
    base_ts[9] = 273.0  # snow
    albedo = np.empty(SHAPE)
    ts = np.empty(SHAPE)
    for code in codes:
        where = land_cover == code
        c = table.by_code(int(code))
        albedo[where] = rng.uniform(c.albedo_min, c.albedo_max, where.sum())
        ts[where] = base_ts.get(int(code), 300.0) + rng.uniform(-4.0, 9.0, where.sum())
    # A few bright snow pixels at an unphysically warm 305 K: Rn < 0, to exercise the clipping of
    # LE when Rn - G < 0 (LE = 0, EF undefined).
    land_cover[0, :5], albedo[0, :5], ts[0, :5] = 9.0, 0.93, 305.0
    land_cover[COLD_PIXEL], albedo[COLD_PIXEL], ts[COLD_PIXEL] = 1.0, 0.21, 289.0
    land_cover[HOT_PIXEL], albedo[HOT_PIXEL], ts[HOT_PIXEL] = 5.0, 0.30, 329.0
    return albedo, ts, land_cover


def pass2_like(state, cal, blending_height=syn.BLENDING_HEIGHT):
    """H, residual LE, clipping and EF as ``pipeline.pass2_block`` combines them."""
    h, converged = anchors.sensible_heat_block(
        np.where(state["valid"], state["surface_temperature"], np.nan),
        state["roughness_length"],
        state["air_density"],
        cal,
        blending_height,
        syn.MAX_ITERATIONS,
        datum_surface_temperature=state["datum_surface_temperature"],
    )
    rn, g, ae = state["net_radiation"], state["ground_heat_flux"], state["available_energy"]
    le_raw = partition.latent_heat_residual(rn, g, h)
    le = partition.clip_latent_heat(le_raw, ae)
    return {
        "h_raw": h,
        "converged": converged,
        "le": le,
        "h": ae - le,  # closure after clipping
        "ef": partition.evaporative_fraction(le, ae),
    }


@pytest.mark.parametrize(
    ("wind", "ef_cold", "ef_hot"),
    [(3.4, 1.0, 0.0), (1.5, 0.95, 0.05), (8.0, 0.85, 0.1)],
)
def test_block_reproduces_the_anchor_conditions_and_closes_the_balance(wind, ef_cold, ef_hot):
    albedo, ts, land_cover = synthetic_block()
    lat, lon = syn.latlon(SHAPE)
    state = surface.surface_block(
        syn.demo_constants(), syn.builtin_lookups(), albedo, ts, land_cover, lat, lon
    )
    assert state["valid"].all()
    # the given pixels are legitimate anchors of the built-in table
    assert state["cold_candidate"][COLD_PIXEL] and state["hot_candidate"][HOT_PIXEL]
    cold = anchors.anchor_from_pixel(state, "cold", *COLD_PIXEL, COLD_PIXEL)
    hot = anchors.anchor_from_pixel(state, "hot", *HOT_PIXEL, HOT_PIXEL)
    assert cold.available_energy == state["available_energy"][COLD_PIXEL]
    cal = anchors.calibrate(
        cold,
        hot,
        syn.blending_wind(wind),
        syn.BLENDING_HEIGHT,
        ef_cold,
        ef_hot,
        syn.MAX_ITERATIONS,
        syn.CALIBRATION_TOLERANCE_K,
    )
    assert cal.converged and cal.b > 0.0
    out = pass2_like(state, cal)
    assert out["converged"].all()

    # Anchor conditions (Bastiaanssen et al. 1998): H = (1 - EF)(Rn - G), 0.5 W m-2.
    for pixel, ef in ((COLD_PIXEL, ef_cold), (HOT_PIXEL, ef_hot)):
        expected = (1.0 - ef) * state["available_energy"][pixel]
        assert out["h_raw"][pixel] == pytest.approx(expected, abs=H_TOLERANCE)
        assert out["h"][pixel] == pytest.approx(expected, abs=H_TOLERANCE)
        assert out["ef"][pixel] == pytest.approx(
            ef, abs=H_TOLERANCE / state["available_energy"][pixel]
        )

    # Energy closure after clipping, Rn = G + H + LE, to rounding (1e-9 W m-2).
    rn, g = state["net_radiation"], state["ground_heat_flux"]
    np.testing.assert_allclose(rn, g + out["h"] + out["le"], atol=CLOSURE_TOLERANCE, rtol=0)
    # Clipping kept LE in [0, max(Rn - G, 0)] and EF in [0, 1] (NaN where Rn - G < 1 W m-2).
    ae = state["available_energy"]
    assert (ae[0, :5] < 0.0).all()  # the bright warm snow pixels
    assert (out["le"] >= 0.0).all() and (out["le"] <= np.maximum(ae, 0.0)).all()
    np.testing.assert_array_equal(out["le"][ae <= 0.0], 0.0)
    assert np.isnan(out["ef"][ae < 1.0]).all()
    assert (out["ef"][ae >= 1.0] >= 0.0).all() and (out["ef"][ae >= 1.0] <= 1.0).all()
    # Where nothing was clipped, H is the method's own H.
    unclipped = (out["le"] > 0.0) & (out["le"] < ae)
    assert unclipped.mean() > 0.5
    np.testing.assert_allclose(out["h"][unclipped], out["h_raw"][unclipped], atol=1e-9)


def test_anchor_conditions_hold_with_terrain_and_a_surface_lapse_rate():
    albedo, ts, land_cover = synthetic_block()
    lat, lon = syn.latlon(SHAPE)
    elevation = np.full(SHAPE, syn.STATION_ELEVATION)
    elevation[HOT_PIXEL] += 400.0  # within the default 500 m anchor elevation range
    state = surface.surface_block(
        syn.demo_constants(surface_lapse_rate=0.0065),  # the recipe default, 6.5 K km-1
        syn.builtin_lookups(),
        albedo,
        ts,
        land_cover,
        lat,
        lon,
        elevation=elevation,
    )
    assert state["hot_candidate"][HOT_PIXEL]
    cold = anchors.anchor_from_pixel(state, "cold", *COLD_PIXEL, COLD_PIXEL)
    hot = anchors.anchor_from_pixel(state, "hot", *HOT_PIXEL, HOT_PIXEL)
    cal = anchors.calibrate(
        cold,
        hot,
        syn.blending_wind(1.5),
        syn.BLENDING_HEIGHT,
        1.0,
        0.0,
        syn.MAX_ITERATIONS,
        syn.CALIBRATION_TOLERANCE_K,
    )
    out = pass2_like(state, cal)
    assert out["h_raw"][HOT_PIXEL] == pytest.approx(
        state["available_energy"][HOT_PIXEL], abs=H_TOLERANCE
    )
