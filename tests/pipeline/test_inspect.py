"""``rasterbudget inspect``: what a user needs before a run, and the run's own errors."""

from __future__ import annotations

from click.testing import CliRunner

from rasterbudget.cli import main
from tests.conftest import ROOT, demo_recipe_dict, write_toml


def test_inspect_describes_every_input_and_the_anchor_candidates():
    result = CliRunner().invoke(main, ["inspect", str(ROOT / "workflows" / "demo.toml")])
    assert result.exit_code == 0, result.output
    text = result.output
    for word in (
        "target grid",
        "EPSG:32613",
        "albedo",
        "surface_temperature",
        "land_cover",
        "covers 100% of the target grid",
        "sun elevation",
        "cold-anchor candidates",
        "hot-anchor candidates",
        "estimate on 2 cores",
        "grassland",
    ):
        assert word in text, word
    # the planted out-of-range grassland albedos show up in the per-class table
    grass = next(line for line in text.splitlines() if line.strip().startswith("grassland"))
    assert "0.1%" in grass


def test_inspect_fails_like_the_run_would(tmp_path):
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    data["scene"][0]["anchors"] = {"cold_min_ndvi": 0.99}
    recipe = write_toml(data, tmp_path / "recipe.toml")
    result = CliRunner().invoke(main, ["inspect", str(recipe)])
    assert result.exit_code == 2
    assert "cold-anchor candidate" in result.output

    data["scene"][0].pop("anchors")
    data["scene"][0]["inputs"]["albedo"] = str(tmp_path / "missing.tif")
    recipe = write_toml(data, tmp_path / "recipe.toml")
    result = CliRunner().invoke(main, ["inspect", str(recipe)])
    assert result.exit_code == 2 and "does not exist" in result.output


def test_inspect_prints_its_tables_and_every_problem_of_every_scene(tmp_path):
    """Two scenes, three problems: the first scene lacks both anchors (its NDVI limits leave no
    candidate), the second is at night. All are reported, after the tables."""
    data = demo_recipe_dict()
    first, second = data["scene"][:2]
    first["anchors"] = {"cold_min_ndvi": 0.99, "hot_max_ndvi": -0.99}
    second["acquired_utc"] = "2026-08-23T06:00:00Z"  # local midnight
    recipe = write_toml(data, tmp_path / "recipe.toml")
    result = CliRunner().invoke(main, ["inspect", str(recipe)])
    assert result.exit_code == 2, result.output
    out = result.output
    # the first scene's tables come before its problem
    assert out.index("per class (sampled)") < out.index("PROBLEM: scene kessendry_20260614")
    problem = next(line for line in out.splitlines() if "PROBLEM: scene kessendry_20260614" in line)
    assert "cold-anchor candidate" in problem and "hot-anchor candidate" in problem
    assert problem.count("the 'vegetation' screen") == 2
    assert "anchors.cold_min_ndvi" in problem
    assert "PROBLEM:" in out.split("scene kessendry_20260823")[1]  # the second scene too
    last = out.strip().splitlines()[-1]
    assert "2 of 2 scenes would fail (kessendry_20260614, kessendry_20260823)" in last
