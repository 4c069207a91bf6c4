"""A delivered Level-2 product as a scene's inputs (the invented product of tiny_rasters/).

The product's bands are made from the demo's own albedo, NDVI and surface temperature
(``demo.make_level2_product``), so a run from the product must reproduce the run from the ready
rasters up to the 16-bit quantisation, except where its pixel QA band marks a cloud or shadow.
"""

from __future__ import annotations

import json
import shutil

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner

from rasterbudget.catalog.qa import QA
from rasterbudget.cli import main
from rasterbudget.demo import _PRODUCT_CLOUD, _PRODUCT_SHADOW, PRODUCT_FOLDER, PRODUCT_STEM

from ..conftest import DEMO_RECIPE, TINY, demo_recipe_dict, write_toml

SCENE = "kessendry_20260614"
PRODUCT = TINY / PRODUCT_FOLDER
METADATA = PRODUCT / f"{PRODUCT_STEM}_MTL.txt"


def _product_recipe(tmp_path, product: dict, inputs: dict | None = None):
    tmp_path.mkdir(parents=True, exist_ok=True)
    data = demo_recipe_dict()
    scene = data["scene"][0]
    data["scene"] = [scene]
    del scene["inputs"]["albedo"], scene["inputs"]["surface_temperature"], scene["inputs"]["ndvi"]
    scene["inputs"].update(inputs or {})
    scene["product"] = product
    return write_toml(data, tmp_path / "recipe.toml")


def _run(recipe, out):
    result = CliRunner().invoke(main, ["run", str(recipe), "--out", str(out), "--quiet"])
    return result


def _read(folder, name):
    with rasterio.open(folder / f"{name}.tif") as src:
        return src.read(1)


def test_a_level2_product_reproduces_the_ready_raster_run_outside_its_clouds(tmp_path, demo_run):
    out = tmp_path / "out"
    result = _run(_product_recipe(tmp_path, {"metadata": str(METADATA)}), out)
    assert result.exit_code == 0, result.output
    folder, ready = out / SCENE, demo_run / SCENE
    qa = _read(folder, "qa_flags")
    flagged = np.zeros(qa.shape, dtype=bool)
    flagged[_PRODUCT_CLOUD] = flagged[_PRODUCT_SHADOW] = True
    assert (qa[flagged] & QA.MASKED).all()
    assert not (qa[~flagged] & QA.MASKED).any()
    et, et_ready = _read(folder, "et_daily"), _read(ready, "et_daily")
    assert np.isnan(et[flagged]).all()
    both = ~flagged & np.isfinite(et) & np.isfinite(et_ready)
    assert both.sum() > 0.9 * (~flagged).sum()
    difference = np.abs(et[both] - et_ready[both])
    # measured: median 0.011, 99th percentile 0.026, largest 0.032 mm/d. The 16-bit
    # quantisation alone gave 0.0016 at most; since the anchor screens, it also moves a few
    # pixels across the homogeneity thresholds and the clouds take their own candidates
    # (cold population 6,871 against 6,883 pixels), so the anchors differ by 0.003 K (cold)
    # and 0.07 K (hot)
    assert np.median(difference) < 0.02
    assert difference.max() < 0.05
    facts = json.loads((folder / "manifest.json").read_text())["scene_facts"]["product"]
    assert facts["sensor"] == "ETM"
    assert facts["albedo"] == "Liang (2001) TM/ETM+ weights"
    assert facts["red_scaling"]["source"].startswith("metadata ")
    assert facts["cloud_mask_bits"] == [0, 1, 2, 3, 4]
    # the product states SPA's sun at 17:50 at the grid centre; the recipe says 17:52
    sun = json.loads((folder / "manifest.json").read_text())["scene_facts"]["sun"]
    assert sun["product_elevation_deg"] == pytest.approx(67.57101212)
    assert 0.0 < sun["elevation_minus_product_deg"] < 1.0


def test_given_inputs_win_over_the_products(tmp_path):
    albedo = TINY / "albedo_20260614.tif"
    recipe = _product_recipe(tmp_path, {"metadata": str(METADATA)}, {"albedo": str(albedo)})
    result = _run(recipe, tmp_path / "out")
    assert result.exit_code == 0, result.output
    manifest = json.loads((tmp_path / "out" / SCENE / "manifest.json").read_text())
    assert manifest["inputs"]["albedo"]["path"] == str(albedo)
    assert "ndvi" not in manifest["inputs"]  # derived from the product's bands
    assert manifest["inputs"]["red"]["path"].endswith("_SR_B3.TIF")


def test_a_product_without_metadata_takes_its_sensor_bands_and_the_published_scaling(tmp_path):
    bands = {
        name: str(PRODUCT / f"{PRODUCT_STEM}_{suffix}.TIF")
        for name, suffix in (
            ("blue", "SR_B1"),
            ("red", "SR_B3"),
            ("nir", "SR_B4"),
            ("swir1", "SR_B5"),
            ("swir2", "SR_B7"),
            ("thermal", "ST_B6"),
        )
    }
    recipe = _product_recipe(tmp_path, {"sensor": "ETM", "bands": bands})
    result = _run(recipe, tmp_path / "out")
    assert result.exit_code == 0, result.output
    facts = json.loads((tmp_path / "out" / SCENE / "manifest.json").read_text())
    product = facts["scene_facts"]["product"]
    assert product["thermal_scaling"]["source"].startswith("Collection 2 Level-2 default")
    assert "cloud_mask_bits" not in product  # no pixel QA band given


def test_a_product_missing_a_band_is_refused_in_one_line(tmp_path):
    folder = tmp_path / "product"
    shutil.copytree(PRODUCT, folder)
    (folder / f"{PRODUCT_STEM}_SR_B4.TIF").unlink()
    out = tmp_path / "out"
    result = _run(_product_recipe(tmp_path, {"metadata": str(folder / METADATA.name)}), out)
    assert result.exit_code == 2
    lines = result.output.strip().splitlines()
    assert len(lines) == 1 and "nir band" in lines[0] and "SR_B4.TIF does not exist" in lines[0]
    assert not (out / SCENE).exists()


def test_a_product_needs_its_metadata_or_its_sensor(tmp_path):
    result = _run(_product_recipe(tmp_path, {"bands": {"red": "x.tif"}}), tmp_path / "out")
    assert result.exit_code == 2
    assert "give metadata" in result.output and "scene[0]" in result.output


def test_the_shipped_product_recipe_runs(tmp_path):
    recipe = DEMO_RECIPE.parent / "demo_product.toml"
    result = _run(recipe, tmp_path / "out")
    assert result.exit_code == 0, result.output
    assert (tmp_path / "out" / "kessendry_20260614_product" / "et_daily.tif").is_file()


def test_a_stac_item_of_the_product_gives_the_same_run_as_its_metadata(tmp_path):
    item = PRODUCT / f"{PRODUCT_STEM}_stac.json"
    by_item = _run(_product_recipe(tmp_path / "a", {"stac_item": str(item)}), tmp_path / "item")
    assert by_item.exit_code == 0, by_item.output
    by_mtl = _run(_product_recipe(tmp_path / "b", {"metadata": str(METADATA)}), tmp_path / "mtl")
    assert by_mtl.exit_code == 0, by_mtl.output
    for name in ("et_daily", "qa_flags", "net_radiation"):
        np.testing.assert_array_equal(
            _read(tmp_path / "item" / SCENE, name), _read(tmp_path / "mtl" / SCENE, name)
        )
    facts = json.loads((tmp_path / "item" / SCENE / "manifest.json").read_text())
    product = facts["scene_facts"]["product"]
    assert product["stac_item"] == str(item) and product["sensor"] == "ETM"
    assert product["nir_scaling"]["source"] == f"STAC item {item}"


def test_a_stac_item_without_a_needed_band_is_refused_in_one_line(tmp_path):
    item = json.loads((PRODUCT / f"{PRODUCT_STEM}_stac.json").read_text())
    del item["assets"]["swir16"]
    for asset in item["assets"].values():
        asset["href"] = str(PRODUCT / asset["href"])
    path = tmp_path / "item.json"
    path.write_text(json.dumps(item))
    out = tmp_path / "out"
    result = _run(_product_recipe(tmp_path, {"stac_item": str(path)}), out)
    assert result.exit_code == 2
    lines = result.output.strip().splitlines()
    assert len(lines) == 1 and str(path) in lines[0] and "['swir1']" in lines[0]
    assert not (out / SCENE).exists()


def _refused(tmp_path, product: dict, acquired=None):
    data_dir = tmp_path / "recipe"
    recipe = _product_recipe(data_dir, product)
    if acquired is not None:
        text = recipe.read_text().replace("2026-06-14T17:52:00Z", acquired)
        recipe.write_text(text)
    out = tmp_path / "out"
    result = _run(recipe, out)
    assert result.exit_code == 2, result.output
    lines = result.output.strip().splitlines()
    assert len(lines) == 1, result.output
    # refused before any output: nothing under the scene's folder (made before pass 1)
    assert not (out / SCENE).exists() or not any((out / SCENE).iterdir())
    return lines[0]


def test_metadata_of_another_day_is_refused(tmp_path):
    line = _refused(tmp_path, {"metadata": str(METADATA)}, acquired="2026-08-23T17:52:00Z")
    assert "is of 2026-06-14" in line and "acquired 2026-08-23" in line


def test_metadata_of_another_sensor_than_the_recipe_s_is_refused(tmp_path):
    line = _refused(tmp_path, {"metadata": str(METADATA), "sensor": "OLI_TIRS"})
    assert "sensor ETM" in line and "product.sensor = 'OLI_TIRS'" in line


def test_scaled_integers_read_as_reflectance_are_refused(tmp_path):
    unscaled = {"reflectance_scale": 1.0, "reflectance_offset": 0.0}
    line = _refused(tmp_path, {"metadata": str(METADATA), **unscaled})
    assert "not reflectances" in line and "product.reflectance_scale" in line


def test_scaled_integers_read_as_temperature_are_refused(tmp_path):
    unscaled = {"temperature_scale": 1.0, "temperature_offset": 0.0}
    line = _refused(tmp_path, {"metadata": str(METADATA), **unscaled})
    assert "scaled integers" in line and "product.temperature_scale/offset" in line


def test_a_changed_product_band_changes_the_scene_fingerprint(tmp_path):
    import os

    from rasterbudget.catalog.classes import load_class_table
    from rasterbudget.recipe import load_recipe
    from rasterbudget.scene.run import RunOptions
    from rasterbudget.workflow import scene_fingerprint

    folder = tmp_path / "product"
    shutil.copytree(PRODUCT, folder)
    recipe = load_recipe(_product_recipe(tmp_path, {"metadata": str(folder / METADATA.name)}))
    options = RunOptions(out_dir=tmp_path / "out", chunk_size=256, tile_size=100)

    def fingerprint() -> str:
        return scene_fingerprint(recipe, recipe.scene[0], load_class_table(), options)

    before = fingerprint()
    band = folder / f"{PRODUCT_STEM}_SR_B4.TIF"
    os.utime(band, ns=(band.stat().st_atime_ns, band.stat().st_mtime_ns + 10**9))
    assert fingerprint() != before  # the rerun is not skipped as "complete, up to date"
