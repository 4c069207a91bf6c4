"""A derived input: a registry row that computes an input per block from other inputs.

Here NDVI is derived (a constant 0.5, the simplest derivation) instead of read; the run must equal
a run given an NDVI raster holding 0.5 everywhere.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import rasterio

from rasterbudget.catalog.classes import load_class_table
from rasterbudget.catalog.inputs import INPUTS
from rasterbudget.recipe import parse_recipe
from rasterbudget.scene.run import RunOptions, run_scene

from ..conftest import TINY, demo_recipe_dict


def _run(data: dict, out):
    # with one NDVI everywhere, both anchors must accept it
    data["scene"][0]["anchors"] = {"cold_min_ndvi": 0.4, "hot_max_ndvi": 0.6}
    recipe = parse_recipe(data)
    settings = RunOptions(out_dir=out, chunk_size=128, tile_size=64, quicklook=False)
    result = run_scene(recipe, recipe.scene[0], load_class_table(), settings)
    with rasterio.open(result.outputs["ground_heat_flux"]) as src:
        return src.read(1)


def test_a_derived_input_is_computed_per_block_like_a_read_one(tmp_path, monkeypatch):
    with rasterio.open(TINY / "ndvi_20260614.tif") as src:
        profile = src.profile
        half = np.full((src.height, src.width), 0.5, dtype=profile["dtype"])
    constant = tmp_path / "ndvi_half.tif"
    with rasterio.open(constant, "w", **profile) as dst:
        dst.write(half, 1)
    given = demo_recipe_dict()
    given["scene"] = given["scene"][:1]
    given["scene"][0]["inputs"]["ndvi"] = str(constant)
    from_file = _run(given, tmp_path / "file")

    derived_ndvi = dataclasses.replace(
        INPUTS["ndvi"], derived_from=("albedo",), derive=lambda albedo: np.full_like(albedo, 0.5)
    )
    monkeypatch.setitem(INPUTS, "ndvi", derived_ndvi)
    without = demo_recipe_dict()
    without["scene"] = without["scene"][:1]
    del without["scene"][0]["inputs"]["ndvi"]
    derived = _run(without, tmp_path / "derived")
    np.testing.assert_array_equal(derived, from_file)
    # and the NDVI mattered: without it (and without deriving it) G comes from the class table
    monkeypatch.setitem(INPUTS, "ndvi", dataclasses.replace(derived_ndvi, derive=None))
    assert not np.array_equal(_run(without, tmp_path / "none"), from_file, equal_nan=True)
