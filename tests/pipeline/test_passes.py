"""The two-pass contract: each input read twice per scene, each block computed once per pass."""

from __future__ import annotations

from collections import Counter

import pytest
import rasterio

from rasterbudget.catalog.classes import load_class_table
from rasterbudget.io import grid
from rasterbudget.recipe import parse_recipe
from rasterbudget.scene import blocks
from rasterbudget.scene import run as pipeline
from rasterbudget.screens import ScreenSettings
from tests.conftest import demo_recipe_dict


@pytest.mark.parametrize(
    "tile_size",
    [
        48,  # tiles inside chunks: one task per chunk computes, writes and summarises its block
        50,  # tiles straddle chunks: blocks are assembled, stored and rechunked into tiles
    ],
)
def test_each_input_is_read_twice_and_each_block_computed_once(tmp_path, monkeypatch, tile_size):
    pixels_read: Counter = Counter()
    halo_reads: Counter = Counter()
    original_read = grid.read_window

    def counting_read(source, rows, cols, halo=0):
        pixels_read[source.role] += (rows.stop - rows.start) * (cols.stop - cols.start)
        halo_reads[source.role, halo] += 1
        return original_read(source, rows, cols, halo)

    block_calls: Counter = Counter()
    original_pass1, original_pass2 = blocks.pass1_block, blocks.pass2_block

    def pass1(ctx, carried, location):
        block_calls["pass1", str(location)] += 1
        return original_pass1(ctx, carried, location)

    def pass2(ctx, params, location):
        block_calls["pass2", str(location)] += 1
        return original_pass2(ctx, params, location)

    monkeypatch.setattr(blocks, "read_window", counting_read)
    monkeypatch.setattr(blocks, "pass1_block", pass1)
    monkeypatch.setattr(blocks, "pass2_block", pass2)
    recipe = parse_recipe(demo_recipe_dict())
    settings = pipeline.RunOptions(
        out_dir=tmp_path, chunk_size=96, tile_size=tile_size, quicklook=True
    )
    result = pipeline.run_scene(recipe, recipe.scene[0], load_class_table(), settings)

    with rasterio.open(result.outputs["net_radiation"]) as src:
        n_pixels = src.width * src.height
    block_count = 4 * 5  # 300 x 400 pixels in chunks of 96
    assert len(block_calls) == 2 * block_count
    assert set(block_calls.values()) == {1}, "a block was computed twice"
    for role in ("albedo", "surface_temperature", "land_cover", "ndvi", "elevation"):
        assert pixels_read[role] == 2 * n_pixels, role
    # the anchor screens' neighbourhood (a halo beyond each window) is read in pass 1 only; pass
    # 2 reads pass 1's results from a scratch raster, which is gone after the run
    halo = ScreenSettings().halo()
    assert halo_reads["surface_temperature", halo] == halo_reads["ndvi", halo] == block_count
    assert halo_reads["surface_temperature", 0] == halo_reads["ndvi", 0] == block_count
    assert halo_reads["albedo", 0] == 2 * block_count
    assert not list(result.out_dir.glob(f"{pipeline.CARRIED_SCRATCH}*"))
