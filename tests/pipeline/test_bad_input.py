"""Bad input through the command line: one clear line, non-zero exit, nothing under a final name."""

from __future__ import annotations

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner

from rasterbudget.catalog.classes import load_class_table
from rasterbudget.cli import main
from rasterbudget.errors import OutputError
from rasterbudget.recipe import parse_recipe
from rasterbudget.scene import blocks
from rasterbudget.scene import run as pipeline
from tests.conftest import demo_recipe_dict, write_toml

SCENE = "kessendry_20260614"


def _one_scene(tmp_path, edit=None):
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    data["run"]["out"] = str(tmp_path / "out")
    if edit:
        edit(data)
    return write_toml(data, tmp_path / "recipe.toml")


def _run_fails(tmp_path, recipe, *words):
    result = CliRunner().invoke(main, ["run", str(recipe), "--quiet"])
    assert result.exit_code == 2, result.output
    lines = result.output.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("rasterbudget: error: "), result.output
    assert "Traceback" not in result.output
    for word in words:
        assert word in lines[0], lines[0]
    scene_dir = tmp_path / "out" / SCENE
    left = sorted(p.name for p in scene_dir.iterdir()) if scene_dir.exists() else []
    assert left == [], f"files left behind: {left}"
    return lines[0]


def _inputs(data):
    return data["scene"][0]["inputs"]


def test_missing_file_is_named(tmp_path):
    missing = tmp_path / "nowhere" / "albedo.tif"
    recipe = _one_scene(tmp_path, lambda d: _inputs(d).update(albedo=str(missing)))
    _run_fails(tmp_path, recipe, str(missing), "does not exist", "inputs.albedo")


def test_unreadable_raster(tmp_path):
    bogus = tmp_path / "land_cover.tif"
    bogus.write_text("this is not a raster\n")
    recipe = _one_scene(tmp_path, lambda d: _inputs(d).update(land_cover=str(bogus)))
    _run_fails(tmp_path, recipe, str(bogus), "cannot be read as a raster")


def test_raster_without_crs(tmp_path, tiny_copy):
    path = tiny_copy / "no_crs.tif"
    with rasterio.open(tiny_copy / "albedo_20260614.tif") as src:
        profile = src.profile | {"crs": None}
        data = src.read()
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(data)
    recipe = _one_scene(tmp_path, lambda d: _inputs(d).update(albedo=str(path)))
    _run_fails(tmp_path, recipe, str(path), "has no CRS", "assign one")


def test_grids_that_do_not_overlap(tmp_path, tiny_copy):
    path = tiny_copy / "far_away.tif"
    with rasterio.open(tiny_copy / "surface_temperature_20260614.tif") as src:
        t = src.transform
        profile = src.profile | {"transform": rasterio.Affine(t.a, 0, t.c + 5e5, 0, t.e, t.f)}
        data = src.read()
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(data)
    recipe = _one_scene(tmp_path, lambda d: _inputs(d).update(surface_temperature=str(path)))
    _run_fails(tmp_path, recipe, str(path), "does not overlap")


def test_truncated_geotiff(tmp_path, tiny_copy):
    path = tiny_copy / "surface_temperature_20260614.tif"
    payload = path.read_bytes()
    path.write_bytes(payload[: len(payload) // 2])
    recipe = _one_scene(tmp_path, lambda d: _inputs(d).update(surface_temperature=str(path)))
    line = _run_fails(tmp_path, recipe)
    assert "surface_temperature" in line or "complete GeoTIFF" in line


def test_unknown_recipe_key_names_its_path(tmp_path):
    def typo(data):
        overpass = data["scene"][0]["overpass"]
        overpass["wind_sped_m_s"] = overpass.pop("wind_speed_m_s")

    recipe = _one_scene(tmp_path, typo)
    _run_fails(tmp_path, recipe, "scene[0]", "overpass.wind_sped_m_s", "unknown key")


def test_wrong_type_names_key_and_value(tmp_path):
    recipe = _one_scene(tmp_path, lambda d: d["scene"][0]["overpass"].update(wind_height_m="high"))
    _run_fails(tmp_path, recipe, "overpass.wind_height_m", "'high'")


def test_weather_given_as_a_missing_raster_names_its_key(tmp_path):
    # a text where a number belongs is read as the path of a weather raster (gridded weather)
    recipe = _one_scene(
        tmp_path, lambda d: d["scene"][0]["overpass"].update(air_temperature_c="warm")
    )
    _run_fails(tmp_path, recipe, "warm", "does not exist", "overpass.air_temperature_c")


@pytest.mark.parametrize(
    ("key", "value", "words"),
    [
        ("wind_speed_m_s", -1.0, ["wind_speed_m_s", "greater than 0"]),
        ("wind_speed_m_s", 0.0, ["wind_speed_m_s", "greater than 0"]),
        ("relative_humidity_pct", 130.0, ["relative_humidity_pct", "less than or equal to 100"]),
    ],
)
def test_impossible_weather(tmp_path, key, value, words):
    recipe = _one_scene(tmp_path, lambda d: d["scene"][0]["overpass"].update({key: value}))
    _run_fails(tmp_path, recipe, *words)


def test_sun_below_horizon(tmp_path):
    import datetime as dt

    night = dt.datetime(2026, 6, 14, 5, 0, tzinfo=dt.UTC)  # 23:00 local solar time
    recipe = _one_scene(tmp_path, lambda d: d["scene"][0].update(acquired_utc=night))
    _run_fails(tmp_path, recipe, "below the horizon", "acquired_utc")


def test_no_anchor_candidates_says_which_threshold(tmp_path):
    recipe = _one_scene(
        tmp_path, lambda d: d["scene"][0].setdefault("anchors", {}).update(cold_min_ndvi=0.99)
    )
    _run_fails(tmp_path, recipe, "cold-anchor candidate", "cold_min_ndvi")


def test_class_table_missing_property(tmp_path):
    from importlib import resources

    text = resources.files("rasterbudget").joinpath("data/classes.toml").read_text()
    broken = tmp_path / "classes.toml"
    lines = text.splitlines()
    first = next(i for i, line in enumerate(lines) if line.startswith("roughness_length"))
    broken.write_text("\n".join(lines[:first] + lines[first + 1 :]))
    recipe = _one_scene(tmp_path, lambda d: d["run"].update(class_table=str(broken)))
    _run_fails(tmp_path, recipe, "roughness_length", "lacks")


def test_crash_while_writing_leaves_no_final_outputs(tmp_path, monkeypatch):
    """A failure in the middle of pass 2 must leave neither outputs nor temporary files."""
    original = blocks.pass2_block
    calls = {"n": 0}

    def failing(*args):
        calls["n"] += 1
        if calls["n"] == 3:
            raise OSError("disk full (simulated)")
        return original(*args)

    monkeypatch.setattr(blocks, "pass2_block", failing)
    data = demo_recipe_dict()
    recipe = parse_recipe(data)
    settings = pipeline.RunOptions(out_dir=tmp_path / "out", chunk_size=64, tile_size=64)
    with pytest.raises(OutputError, match="disk full"):
        pipeline.run_scene(recipe, recipe.scene[0], load_class_table(), settings)
    assert calls["n"] >= 3
    left = sorted(p.name for p in (tmp_path / "out" / SCENE).iterdir())
    assert left == []


def test_rerun_replaces_previous_outputs_atomically(tmp_path):
    recipe = _one_scene(tmp_path)
    for _ in range(2):
        result = CliRunner().invoke(main, ["run", str(recipe), "--quiet", "--no-quicklook"])
        assert result.exit_code == 0, result.output
    names = sorted(p.name for p in (tmp_path / "out" / SCENE).iterdir())
    assert not [n for n in names if n.endswith(".partial")]
    assert np.isfinite(rasterio.open(tmp_path / "out" / SCENE / "et_daily.tif").read(1)).any()


def test_anchor_elevation_limit_is_named_when_it_leaves_no_candidates(tmp_path):
    recipe = _one_scene(
        tmp_path,
        lambda d: d["scene"][0].setdefault("anchors", {}).update(max_elevation_difference_m=0.001),
    )
    _run_fails(tmp_path, recipe, "candidate", "max_elevation_difference_m")
