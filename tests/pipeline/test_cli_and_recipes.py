"""Command-line help, the demo generator command, the shipped recipes, explicit anchors, warping."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner
from rasterio.warp import Resampling, calculate_default_transform, reproject

from rasterbudget.cli import main
from rasterbudget.errors import RecipeError
from rasterbudget.recipe import load_compare_recipe, load_recipe
from tests.conftest import ROOT, TINY, demo_recipe_dict, write_toml


@pytest.mark.parametrize("recipe", sorted((ROOT / "workflows").glob("*.toml")))
def test_shipped_recipes_are_valid(recipe):
    if "[[comparison]]" in recipe.read_text():
        parsed = load_compare_recipe(recipe)
        assert (recipe.parent / parsed.compare.zones.path).exists()
        with pytest.raises(RecipeError, match="comparison recipe"):
            load_recipe(recipe)
        return
    parsed = load_recipe(recipe)
    for scene in parsed.scene:
        for value in scene.inputs.model_dump().values():
            if value is not None:
                path = value["path"] if isinstance(value, dict) else value
                assert (recipe.parent / path).exists(), path


def test_help_is_fast_and_explains_the_options():
    result = subprocess.run(
        [sys.executable, "-X", "importtime", "-m", "rasterbudget.cli", "run", "--help"],
        capture_output=True,
        text=True,
        check=True,
    )
    for word in ("--chunk-size", "--tile-size", "--out", "Examples"):
        assert word in result.stdout
    # heavy libraries are imported lazily, inside the commands
    imported = {line.split("|")[-1].strip() for line in result.stderr.splitlines()}
    assert not {"dask", "xarray", "rioxarray", "matplotlib"} & imported


def test_demo_command_regenerates_the_shipped_rasters(tmp_path):
    result = CliRunner().invoke(main, ["demo", "--out", str(tmp_path)])
    assert result.exit_code == 0, result.output
    shipped = sorted(str(p.relative_to(TINY)) for p in TINY.rglob("*.tif"))
    assert sorted(str(p.relative_to(tmp_path)) for p in tmp_path.rglob("*.tif")) == shipped
    for name in shipped:
        with rasterio.open(TINY / name) as a, rasterio.open(tmp_path / name) as b:
            np.testing.assert_allclose(a.read(), b.read(), atol=1e-3, equal_nan=True)
    tables = [*sorted(p.name for p in TINY.glob("*.csv")), "zones.geojson"]
    for name in tables:  # the invented station weather of every year, and the zones
        assert (tmp_path / name).read_text() == (TINY / name).read_text(), name


def test_explicit_anchors_are_used_and_recorded(tmp_path, demo_run):
    auto = json.loads((demo_run / "kessendry_20260614" / "manifest.json").read_text())
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    cold, hot = auto["anchors"]["cold"], auto["anchors"]["hot"]
    data["scene"][0]["anchors"] = {
        "cold_xy": [cold["x"], cold["y"]],
        "hot_xy": [hot["x"], hot["y"]],
    }
    recipe = write_toml(data, tmp_path / "recipe.toml")
    out = tmp_path / "out"
    result = CliRunner().invoke(
        main, ["run", str(recipe), "--out", str(out), "--quiet", "--no-quicklook"]
    )
    assert result.exit_code == 0, result.output
    manifest = json.loads((out / "kessendry_20260614" / "manifest.json").read_text())
    for role, auto_anchor in (("cold", cold), ("hot", hot)):
        given = manifest["anchors"][role]
        assert given["percentile"] is None and given["pixel_count"] == 1
        assert (given["row"], given["col"]) == (auto_anchor["row"], auto_anchor["col"])
        # a single pixel at the percentile lies within the population's Ts range
        low, high = auto_anchor["ts_range"]
        assert low <= given["surface_temperature"] <= high
    qa = rasterio.open(out / "kessendry_20260614" / "qa_flags.tif").read(1)
    assert ((qa & 128) > 0).sum() == 1 and ((qa & 256) > 0).sum() == 1


def test_inputs_on_another_grid_are_warped_to_the_albedo_grid(tmp_path, demo_run):
    """Surface temperature reprojected to geographic coordinates gives nearly the same fluxes."""
    src_path = TINY / "surface_temperature_20260614.tif"
    geo_path = tmp_path / "ts_geographic.tif"
    with rasterio.open(src_path) as src:
        transform, width, height = calculate_default_transform(
            src.crs, "EPSG:4326", src.width, src.height, *src.bounds
        )
        profile = src.profile | {
            "crs": "EPSG:4326",
            "transform": transform,
            "width": width,
            "height": height,
        }
        with rasterio.open(geo_path, "w", **profile) as dst:
            reproject(rasterio.band(src, 1), rasterio.band(dst, 1), resampling=Resampling.nearest)
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    data["scene"][0]["inputs"]["surface_temperature"] = str(geo_path)
    recipe = write_toml(data, tmp_path / "recipe.toml")
    out = tmp_path / "out"
    result = CliRunner().invoke(
        main, ["run", str(recipe), "--out", str(out), "--quiet", "--no-quicklook"]
    )
    assert result.exit_code == 0, result.output
    with (
        rasterio.open(out / "kessendry_20260614" / "net_radiation.tif") as warped,
        rasterio.open(demo_run / "kessendry_20260614" / "net_radiation.tif") as direct,
    ):
        assert warped.crs == direct.crs and warped.transform == direct.transform
        a, b = warped.read(1), direct.read(1)
    both = np.isfinite(a) & np.isfinite(b)
    assert both.mean() > 0.97
    # two resamplings blur field edges; the bulk of pixels agree to a few W m-2
    assert np.median(np.abs(a[both] - b[both])) < 3.0
    manifest = json.loads((out / "kessendry_20260614" / "manifest.json").read_text())
    assert manifest["inputs"]["surface_temperature"]["same_grid"] is False


def test_paths_in_recipe_are_relative_to_the_recipe(tmp_path):
    recipe = load_recipe(ROOT / "workflows" / "demo.toml")
    from rasterbudget.recipe import resolve_path

    assert (
        resolve_path(recipe, recipe.scene[0].inputs.albedo)
        == (TINY / "albedo_20260614.tif").resolve()
    )
    assert Path(resolve_path(recipe, "/abs/x.tif")) == Path("/abs/x.tif")
