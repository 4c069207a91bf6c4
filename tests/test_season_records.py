"""What a season and a comparison record about themselves (versions, the checksums of what they
were made from, their parameters), the fraction rule, and comparisons of failed runs refused."""

from __future__ import annotations

import hashlib
import json

import pytest
from click.testing import CliRunner

from rasterbudget.cli import main
from rasterbudget.errors import RecipeError
from rasterbudget.recipe import parse_recipe
from tests.conftest import ROOT

SEASON = "kessendry_summer_2026"


@pytest.fixture(scope="module")
def season_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("season") / "out"
    args = ["run", str(ROOT / "workflows" / "demo_season.toml"), "--out", str(out), "--quiet"]
    result = CliRunner().invoke(main, [*args, "--no-quicklook"])
    assert result.exit_code == 0, result.output
    return out


def test_the_season_manifest_records_versions_inputs_and_parameters(season_run):
    manifest = json.loads((season_run / SEASON / "manifest.json").read_text())
    assert manifest["versions"]["rasterbudget"]
    assert manifest["parameters"]["fraction"] == "reference_et_fraction"
    for entry in manifest["inputs"]["scenes"]:
        raster = entry["raster"]
        with open(raster, "rb") as f:
            assert entry["sha256"] == hashlib.sha256(f.read()).hexdigest()
        scene = json.loads((season_run / entry["scene_id"] / "manifest.json").read_text())
        assert entry["scene_fingerprint"] == scene["fingerprint"]
    assert len(manifest["inputs"]["weather"]["sha256"]) == 64


def test_a_season_of_evaporative_fraction_is_refused_with_the_reason():
    import tomllib

    data = tomllib.loads((ROOT / "workflows" / "demo_season.toml").read_text())
    data["season"][0]["fraction"] = "evaporative_fraction"
    with pytest.raises(RecipeError, match="must be a fraction of reference ET"):
        parse_recipe(data, path=ROOT / "workflows" / "demo_season.toml")


def test_a_comparison_records_its_inputs_and_refuses_a_failed_run(season_run, tmp_path):
    current = season_run / SEASON / "et_season.tif"
    previous = season_run / SEASON / "mean_fraction.tif"
    out = tmp_path / "cmp"
    args = ["compare", str(current), "--previous", str(previous), "--out", str(out)]
    result = CliRunner().invoke(main, args)
    assert result.exit_code == 0, result.output
    summary = json.loads(next(out.rglob("compare.json")).read_text())
    assert summary["inputs"][str(current)]["state"] == "complete"
    assert summary["versions"]["rasterbudget"]
    # the season's run marked failed: its rasters are not compared
    manifest = season_run / SEASON / "manifest.json"
    saved = manifest.read_text()
    manifest.write_text(json.dumps({"status": "failed", "error": "disk full"}))
    try:
        result = CliRunner().invoke(main, [*args[:-1], str(tmp_path / "cmp2")])
    finally:
        manifest.write_text(saved)
    assert result.exit_code == 2, result.output
    assert "not complete (failed: disk full)" in result.output
