"""Batches: a failed scene does not stop the others; complete scenes are skipped; changes redone."""

from __future__ import annotations

import csv
import os
import shutil

from click.testing import CliRunner

from rasterbudget.cli import main
from tests.conftest import demo_recipe_dict, write_toml


def _batch(out):
    return {r["scene_id"]: r for r in csv.DictReader((out / "batch.csv").open())}


def test_failed_scene_is_reported_and_the_others_run(tmp_path):
    data = demo_recipe_dict()
    broken = dict(data["scene"][1])
    broken["id"] = "kessendry_broken"
    broken["inputs"] = dict(broken["inputs"], albedo=str(tmp_path / "missing.tif"))
    data["scene"] = [data["scene"][0], broken, data["scene"][1]]
    recipe = write_toml(data, tmp_path / "recipe.toml")
    out = tmp_path / "out"
    result = CliRunner().invoke(main, ["run", str(recipe), "--out", str(out), "--no-quicklook"])
    assert result.exit_code == 1
    assert "kessendry_broken: FAILED" in result.output and "1 of 3 scenes failed" in result.output
    rows = _batch(out)
    assert [rows[k]["status"] for k in rows] == ["done", "failed", "done"]
    assert "does not exist" in rows["kessendry_broken"]["message"]
    assert float(rows["kessendry_20260614"]["et_daily_mean"]) > 0
    assert (out / "kessendry_20260823" / "manifest.json").is_file()


def test_second_run_skips_complete_scenes_and_redoes_changed_ones(tmp_path):
    data = demo_recipe_dict()
    # a private copy of one input, so the test can change it
    albedo = tmp_path / "albedo_20260823.tif"
    shutil.copy(data["scene"][1]["inputs"]["albedo"], albedo)
    data["scene"][1]["inputs"]["albedo"] = str(albedo)
    recipe = write_toml(data, tmp_path / "recipe.toml")
    out = tmp_path / "out"
    args = ["run", str(recipe), "--out", str(out), "--quiet", "--no-quicklook"]
    assert CliRunner().invoke(main, args).exit_code == 0
    first = {k: r["status"] for k, r in _batch(out).items()}
    assert set(first.values()) == {"done"}
    stamp = (out / "kessendry_20260614" / "et_daily.tif").stat().st_mtime_ns

    assert CliRunner().invoke(main, args).exit_code == 0
    assert {r["status"] for r in _batch(out).values()} == {"skipped"}
    assert (out / "kessendry_20260614" / "et_daily.tif").stat().st_mtime_ns == stamp

    # a changed input: only its scene is redone
    os.utime(albedo, ns=(albedo.stat().st_atime_ns, albedo.stat().st_mtime_ns + 10**9))
    assert CliRunner().invoke(main, args).exit_code == 0
    statuses = {k: r["status"] for k, r in _batch(out).items()}
    assert statuses == {"kessendry_20260614": "skipped", "kessendry_20260823": "done"}

    # a changed parameter: redone too
    data["scene"][0]["anchors"] = {"hot_percentile": 96.0}
    write_toml(data, recipe)
    assert CliRunner().invoke(main, args).exit_code == 0
    assert _batch(out)["kessendry_20260614"]["status"] == "done"


def test_incomplete_scene_folder_is_redone(tmp_path):
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    recipe = write_toml(data, tmp_path / "recipe.toml")
    out = tmp_path / "out"
    args = ["run", str(recipe), "--out", str(out), "--quiet", "--no-quicklook"]
    assert CliRunner().invoke(main, args).exit_code == 0
    (out / "kessendry_20260614" / "et_daily.tif").unlink()  # an output lost
    assert CliRunner().invoke(main, args).exit_code == 0
    assert _batch(out)["kessendry_20260614"]["status"] == "done"
    assert (out / "kessendry_20260614" / "et_daily.tif").is_file()
