"""The hot anchor's own evaporation from the FAO-56 soil-surface balance (anchors.hot_soil):
the EF the calibration imposes, the manifest's basis, and refusals in one line."""

from __future__ import annotations

import datetime as dt
import json

import pytest
from click.testing import CliRunner

from rasterbudget.cli import main
from rasterbudget.errors import RecipeError
from rasterbudget.physics.soil_evaporation import surface_evaporation_series
from rasterbudget.recipe import load_recipe

from ..conftest import demo_recipe_dict, write_toml

SCENE = "kessendry_20260614"
DAY = dt.date(2026, 6, 14)


def _table(path, rain: dict[int, float], eto: float = 6.0, days: int = 40):
    """Daily rain (by days before the scene) and a constant grass reference ET."""
    lines = ["date,precipitation_mm,reference_et_mm"]
    for i in range(days):
        lines.append(f"{DAY - dt.timedelta(days=i)},{rain.get(i, 0.0)},{eto}")
    path.write_text("\n".join(lines) + "\n")
    return path


def _recipe(tmp_path, hot_soil: dict, **overpass):
    data = demo_recipe_dict()
    scene = data["scene"][0]
    data["scene"] = [scene]
    scene.setdefault("anchors", {})["hot_soil"] = hot_soil
    scene["overpass"].update(overpass)
    scene["overpass"] = {k: v for k, v in scene["overpass"].items() if v is not None}
    return write_toml(data, tmp_path / "recipe.toml")


def _run(recipe, out):
    return CliRunner().invoke(main, ["run", str(recipe), "--out", str(out), "--quiet"])


def test_rain_gives_the_hot_anchor_evaporation_that_the_balance_predicts(tmp_path):
    table = _table(tmp_path / "rain.csv", {3: 12.0})  # 12 mm three days before the scene
    result = _run(_recipe(tmp_path, {"table": "rain.csv"}), tmp_path / "out")
    assert result.exit_code == 0, result.output
    calibration = json.loads((tmp_path / "out" / SCENE / "manifest.json").read_text())[
        "calibration"
    ]
    # the balance by hand (FAO-56 ch. 7 defaults: TEW 19, REW 9 mm, Kc_max 1.2, Kcb 0.15)
    balance = surface_evaporation_series([0.0] * 26 + [12.0, 0.0, 0.0, 0.0], [6.0] * 30, 19.0, 9.0)
    ke = float(balance.ke[-1])
    assert 0.0 < ke < 1.05
    assert f"Ke {ke:.3f}" in calibration["hot_anchor_basis"]
    assert "12.0 mm of rain" in calibration["hot_anchor_basis"]
    assert 0.05 < calibration["hot_evaporative_fraction"] < 0.8
    assert str(table) in calibration["hot_anchor_basis"]  # the path made absolute


def test_a_dry_month_leaves_the_hot_anchor_dry(tmp_path):
    _table(tmp_path / "rain.csv", {})
    result = _run(_recipe(tmp_path, {"table": "rain.csv"}), tmp_path / "out")
    assert result.exit_code == 0, result.output
    calibration = json.loads((tmp_path / "out" / SCENE / "manifest.json").read_text())[
        "calibration"
    ]
    assert calibration["hot_evaporative_fraction"] == 0.0


def test_without_hot_soil_the_basis_says_the_fixed_value():
    from rasterbudget.methods.anchors import AnchorSettings, hot_anchor_basis

    fraction, basis = hot_anchor_basis(None, AnchorSettings(), None, None)
    assert fraction == 0.0 and "no anchors.hot_soil" in basis


def test_a_missing_day_is_named_in_one_line(tmp_path):
    _table(tmp_path / "rain.csv", {}, days=10)  # the balance needs 30
    result = _run(_recipe(tmp_path, {"table": "rain.csv"}), tmp_path / "out")
    assert result.exit_code != 0
    lines = result.output.strip().splitlines()
    assert len(lines) == 1 and "has no row for 2026-05-16" in lines[0], result.output
    assert not list((tmp_path / "out").rglob("*.tif"))


def test_hot_soil_needs_the_overpass_weather_for_the_hourly_reference(tmp_path):
    _table(tmp_path / "rain.csv", {})
    recipe = _recipe(tmp_path, {"table": "rain.csv"}, relative_humidity_pct=None)
    needs = r"anchors\.hot_soil needs overpass\.relative_humidity_pct"
    with pytest.raises(RecipeError, match=needs):
        load_recipe(recipe)


def test_readily_evaporable_above_total_is_refused(tmp_path):
    _table(tmp_path / "rain.csv", {})
    recipe = _recipe(
        tmp_path, {"table": "rain.csv", "readily_evaporable_mm": 12.0, "total_evaporable_mm": 10.0}
    )
    with pytest.raises(RecipeError, match="readily_evaporable_mm must not exceed"):
        load_recipe(recipe)
