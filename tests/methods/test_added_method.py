"""A third sensible-heat method added through the registry alone, run end to end by the CLI.

The toy method takes the evaporative fraction as one number for the whole scene (its own settings
table ``[scene.fixed_fraction]``), so H = (1 - EF)(Rn - G) everywhere. Nothing of the package is
edited: the test defines the method, registers it, and runs a recipe that names it.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner
from pydantic import Field

from rasterbudget.catalog.qa import QA
from rasterbudget.cli import main
from rasterbudget.methods import METHODS, register
from rasterbudget.methods.base import Calibrated, SensibleHeatMethod, StrictSettings

from ..conftest import demo_recipe_dict, write_toml


class FixedFractionSettings(StrictSettings):
    evaporative_fraction: float = Field(0.6, ge=0.0, le=1.0)


class FixedFraction(SensibleHeatMethod):
    name = "fixed_fraction"
    settings_key = "fixed_fraction"
    settings_model = FixedFractionSettings

    def calibrate(self, reduced, ctx):
        ef = ctx.settings.evaporative_fraction
        return Calibrated(params=ef, facts={"fixed_fraction": {"evaporative_fraction": ef}})

    def sensible_heat_block(self, state, params, constants, inverse_length_out):
        h = np.where(state["valid"], (1.0 - params) * state["available_energy"], np.nan)
        return h, np.ones(h.shape, dtype=bool)

    def summary(self, facts):
        return f"EF {facts['fixed_fraction']['evaporative_fraction']:.2f} everywhere"


@pytest.fixture
def fixed_fraction():
    method = register(FixedFraction())
    yield method
    METHODS.pop(method.name)


def test_a_method_added_through_the_registry_runs_end_to_end(tmp_path, fixed_fraction):
    data = demo_recipe_dict()
    scene = data["scene"][0]
    data["scene"] = [scene]
    scene["sensible_heat"] = "fixed_fraction"
    scene["fixed_fraction"] = {"evaporative_fraction": 0.55}
    del scene["overpass"]["wind_speed_m_s"]  # the toy needs no wind
    recipe = write_toml(data, tmp_path / "recipe.toml")
    out = tmp_path / "out"
    result = CliRunner().invoke(main, ["run", str(recipe), "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert "EF 0.55 everywhere" in result.output
    folder = out / scene["id"]
    with rasterio.open(folder / "evaporative_fraction.tif") as src:
        ef = src.read(1)
    with rasterio.open(folder / "qa_flags.tif") as src:
        qa = src.read(1)
    valid = np.isfinite(ef)
    assert valid.sum() > 1000
    # LE clipped at 0 and at Rn - G leaves EF untouched where 0 <= EF <= 1
    np.testing.assert_allclose(ef[valid], 0.55, rtol=1e-6)
    manifest = json.loads((folder / "manifest.json").read_text())
    assert manifest["sensible_heat_method"] == "fixed_fraction"
    assert manifest["fixed_fraction"] == {"evaporative_fraction": 0.55}
    assert manifest["parameters"]["method_tables"] == {
        "fixed_fraction": {"evaporative_fraction": 0.55}
    }
    anchor_bits = QA.COLD_ANCHOR | QA.HOT_ANCHOR
    assert not (qa & anchor_bits).any()  # no anchor bits from a method without anchors
    batch = (out / "batch.csv").read_text().splitlines()
    assert batch[1].split(",")[4] == "fixed_fraction"


def test_an_added_method_s_settings_are_checked_when_the_recipe_is_read(tmp_path, fixed_fraction):
    data = demo_recipe_dict()
    data["scene"][0]["sensible_heat"] = "fixed_fraction"
    data["scene"][0]["fixed_fraction"] = {"evaporative_fraction": 1.7}
    recipe = write_toml(data, tmp_path / "recipe.toml")
    result = CliRunner().invoke(main, ["inspect", str(recipe)])
    assert result.exit_code == 2
    assert "evaporative_fraction" in result.output and "1.7" in result.output


def test_an_unknown_method_is_refused_with_the_known_ones(tmp_path):
    data = demo_recipe_dict()
    data["scene"][0]["sensible_heat"] = "guess"
    recipe = write_toml(data, tmp_path / "recipe.toml")
    result = CliRunner().invoke(main, ["inspect", str(recipe)])
    assert result.exit_code == 2
    assert "'guess' is not a known method" in result.output
    assert "['anchors', 'edges']" in result.output


def test_inspect_and_run_refuse_the_same_recipe_before_reading_pixels(tmp_path):
    # anchors without wind, an ensemble with a method that has none, choices that need weather
    # the recipe lacks: all refused when the recipe is read
    for change in (
        lambda s: s["overpass"].pop("wind_speed_m_s"),
        lambda s: s.update(sensible_heat="edges", uncertainty={"members": 4}),
        lambda s: (
            s["overpass"].pop("relative_humidity_pct"),
            s.update(radiation={"longwave_in": "brutsaert"}),
        ),
        lambda s: (
            s["daily"].pop("wind_speed_m_s"),
            s.update(daily_scaling="reference_et_fraction"),
        ),
        lambda s: (
            s["overpass"].pop("relative_humidity_pct"),
            s.update(reference_et={"cold_anchor_fraction": 1.05}),
        ),
    ):
        data = demo_recipe_dict()
        change(data["scene"][0])
        recipe = write_toml(data, tmp_path / "recipe.toml")
        for command in ("inspect", "run"):
            result = CliRunner().invoke(
                main,
                [
                    command,
                    str(recipe),
                    *(["--out", str(tmp_path / "o")] if command == "run" else []),
                ],
            )
            assert result.exit_code == 2, result.output
            assert "scene[0]" in result.output
        assert not (tmp_path / "o").exists()
