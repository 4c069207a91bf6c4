"""Ensemble members: Latin hypercube sampling and the one-pass ensemble against the central run."""

from __future__ import annotations

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner

from rasterbudget.cli import main
from rasterbudget.methods.ensemble import sample_members
from rasterbudget.recipe import UncertaintySettings
from tests.conftest import demo_recipe_dict, write_toml


def test_members_are_a_latin_hypercube_over_the_ranges():
    settings = UncertaintySettings(members=8)
    members = sample_members(settings)
    assert len(members) == 8
    values = np.array(
        [
            [
                m.cold_percentile,
                m.hot_percentile,
                m.cold_anchor_factor,
                m.air_temperature_offset,
                m.wind_factor,
                m.surface_temperature_offset,
                m.albedo_offset,
                m.reference_et_factor,
            ]
            for m in members
        ]
    )
    ranges = np.array(
        [
            settings.cold_percentile_range,
            settings.hot_percentile_range,
            settings.cold_anchor_factor_range,
            settings.air_temperature_offset_range_c,
            settings.wind_factor_range,
            settings.surface_temperature_offset_range_k,
            settings.albedo_offset_range,
            settings.reference_et_factor_range,
        ]
    )
    unit = (values - ranges[:, 0]) / (ranges[:, 1] - ranges[:, 0])
    assert np.all((unit >= 0) & (unit < 1))
    # one member in each eighth of every range: the Latin hypercube property
    for column in unit.T:
        assert sorted(np.floor(column * 8).astype(int)) == list(range(8))
    assert sample_members(settings) == members  # seeded: the same members every run
    assert sample_members(UncertaintySettings(members=0)) == []


def test_an_ensemble_without_perturbation_reproduces_the_central_run(tmp_path):
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    data["scene"][0]["uncertainty"] = {
        "members": 3,
        "cold_percentile_range": [5.0, 5.0],
        "hot_percentile_range": [95.0, 95.0],
        "cold_anchor_factor_range": [1.0, 1.0],
        "air_temperature_offset_range_c": [0.0, 0.0],
        "wind_factor_range": [1.0, 1.0],
        "surface_temperature_offset_range_k": [0.0, 0.0],
        "albedo_offset_range": [0.0, 0.0],
        "reference_et_factor_range": [1.0, 1.0],
    }
    recipe = write_toml(data, tmp_path / "recipe.toml")
    out = tmp_path / "out"
    result = CliRunner().invoke(
        main, ["run", str(recipe), "--out", str(out), "--quiet", "--no-quicklook"]
    )
    assert result.exit_code == 0, result.output
    folder = out / "kessendry_20260614"
    central = rasterio.open(folder / "et_daily.tif").read(1)
    for name in ("et_daily_p10", "et_daily_p90"):
        member = rasterio.open(folder / f"{name}.tif").read(1)
        np.testing.assert_array_equal(np.isnan(member), np.isnan(central))
        # members restart from the central run's stability and stop within 0.1 W m-2 of H,
        # i.e. about 0.0015 mm d-1 of daily ET
        np.testing.assert_allclose(member, central, atol=0.003, equal_nan=True)


def test_ensemble_spread_is_ordered_and_summarised(tmp_path):
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    data["scene"][0]["uncertainty"] = {"members": 8}
    recipe = write_toml(data, tmp_path / "recipe.toml")
    out = tmp_path / "out"
    result = CliRunner().invoke(
        main,
        ["run", str(recipe), "--out", str(out), "--quiet", "--no-quicklook", "--tile-size", "100"],
    )
    assert result.exit_code == 0, result.output
    folder = out / "kessendry_20260614"
    low = rasterio.open(folder / "et_daily_p10.tif").read(1)
    high = rasterio.open(folder / "et_daily_p90.tif").read(1)
    ok = np.isfinite(low) & np.isfinite(high)
    assert ok.mean() > 0.98
    assert np.all(low[ok] <= high[ok])
    assert np.median(high[ok] - low[ok]) > 0.05  # the perturbations matter
    header = (folder / "tiles.csv").read_text().splitlines()[0]
    assert "et_daily_p10_mean" in header and "et_daily_p90_p50" in header
    assert "et_daily_p90_mean" in (folder / "classes.csv").read_text().splitlines()[0]


def test_input_errors_move_available_energy_as_the_radiation_budget_says():
    """A brighter surface (albedo + 0.02) loses 0.02 Rs_in of net radiation; a warmer one
    (Ts + 1 K) emits eps sigma ((Ts + 1)^4 - Ts^4) more; G/Rn is kept."""
    from scipy.constants import Stefan_Boltzmann

    from rasterbudget.surface import perturbed_air
    from tests.validation import _synthetic as syn

    state = {
        "air_temperature": np.array([300.0]),
        "vapour_pressure": np.array([1.2]),
        "longwave_in": np.array([380.0]),
        "net_radiation": np.array([600.0]),
        "surface_emissivity": np.array([0.97]),
        "ground_heat_ratio": np.array([0.1]),
        "air_pressure": np.array([85.0]),
        "shortwave_in": np.array([900.0]),
        "surface_temperature": np.array([310.0]),
    }
    c = syn.demo_constants()
    base, _ = perturbed_air(c, state, 0.0)
    brighter, _ = perturbed_air(c, state, 0.0, albedo_offset=0.02)
    warmer, _ = perturbed_air(c, state, 0.0, surface_temperature_offset=1.0)
    assert base[0] - brighter[0] == pytest.approx(0.9 * 0.02 * 900.0)
    emitted = 0.97 * Stefan_Boltzmann * (311.0**4 - 310.0**4)  # scipy.constants' sigma
    assert base[0] - warmer[0] == pytest.approx(0.9 * emitted, rel=1e-6)
