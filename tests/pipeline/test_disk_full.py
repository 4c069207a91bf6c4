"""A full disk at each stage of a scene's writing: one line naming the folder, no ``*.partial``
and nothing of the run under a final name (the disk is simulated: writes of the chosen file
fail with ENOSPC after writing half their text)."""

from __future__ import annotations

import errno
import json
import pathlib

import pytest
from click.testing import CliRunner

from rasterbudget.cli import main

from ..conftest import demo_recipe_dict, write_toml

SCENE = "kessendry_20260614"
_write_text = pathlib.Path.write_text


def _full_disk_at(monkeypatch, name: str) -> None:
    def write_text(self, data, *args, **kwargs):
        if self.name == name + ".partial":
            _write_text(self, data[: len(data) // 2], *args, **kwargs)
            raise OSError(errno.ENOSPC, "No space left on device", str(self))
        return _write_text(self, data, *args, **kwargs)

    monkeypatch.setattr(pathlib.Path, "write_text", write_text)


def _run(tmp_path):
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    recipe = write_toml(data, tmp_path / "recipe.toml")
    return CliRunner().invoke(main, ["run", str(recipe), "--out", str(tmp_path / "out")])


@pytest.mark.parametrize("name", ["tiles.csv", "classes.csv", "manifest.json"])
def test_a_full_disk_after_the_rasters_leaves_nothing_behind(tmp_path, monkeypatch, name):
    _full_disk_at(monkeypatch, name)
    result = _run(tmp_path)
    assert result.exit_code == 2, result.output
    lines = result.output.strip().splitlines()
    assert len(lines) == 1 and "No space left on device" in lines[0], result.output
    assert str(tmp_path / "out" / SCENE) in lines[0]
    left = sorted(p.name for p in (tmp_path / "out").rglob("*") if p.is_file())
    assert not [n for n in left if n.endswith((".partial", ".tif"))], left
    assert "manifest.json" not in left  # no run before: nothing to mark failed
    assert ".rasterbudget.lock" not in left


def test_a_full_disk_over_older_outputs_marks_the_scene_failed(tmp_path, monkeypatch):
    assert _run(tmp_path).exit_code == 0
    _full_disk_at(monkeypatch, "tiles.csv")
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    data["scene"][0]["overpass"]["air_temperature_c"] = 25.0  # a changed scene: it reruns
    recipe = write_toml(data, tmp_path / "recipe.toml")
    result = CliRunner().invoke(main, ["run", str(recipe), "--out", str(tmp_path / "out")])
    assert result.exit_code == 2, result.output
    folder = tmp_path / "out" / SCENE
    manifest = json.loads(folder.joinpath("manifest.json").read_text())
    assert manifest["status"] == "failed" and "No space left" in manifest["error"]
    assert not list(folder.glob("*.tif")) and not list(folder.glob("*.partial"))


def test_a_full_disk_at_the_report_names_it(tmp_path, monkeypatch):
    _full_disk_at(monkeypatch, "report.html")
    result = _run(tmp_path)
    assert result.exit_code == 2, result.output
    line = result.output.strip().splitlines()[-1]
    assert "writing the report" in line and "No space left" in line
    assert not list((tmp_path / "out").glob("*.partial"))
