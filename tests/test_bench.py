"""``rasterbudget bench`` runs end to end on a small synthetic scene and reports every figure."""

from __future__ import annotations

import json

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner

from rasterbudget.bench import _mirror_index, make_synthetic_scene
from rasterbudget.cli import main
from tests.conftest import TINY


def test_mirror_tiling_has_no_seams():
    index = _mirror_index(10, 4)
    assert index.tolist() == [0, 1, 2, 3, 3, 2, 1, 0, 0, 1]


def test_synthetic_scene_tiles_the_demo_region(tmp_path):
    recipe = make_synthetic_scene(tmp_path, 700, TINY)
    assert recipe.is_file()
    with (
        rasterio.open(tmp_path / "albedo.tif") as big,
        rasterio.open(TINY / "albedo_20260614.tif") as demo,
    ):
        assert big.shape == (700, 700) and big.crs == demo.crs
        a, d = big.read(1), demo.read(1)
    np.testing.assert_array_equal(a[:300, :400], d)  # the demo itself in the corner
    np.testing.assert_array_equal(a[300:600, :400], d[::-1])  # then mirrored


def test_bench_command_prints_a_table_and_a_json_line(tmp_path):
    result = CliRunner().invoke(
        main,
        ["bench", "--size", "256", "--chunk-size", "128", "--repeat", "1", "--keep", str(tmp_path)],
    )
    assert result.exit_code == 0, result.output
    figures = json.loads(result.output.strip().splitlines()[-1])
    for phase in ("floor", "two_pass_floor", "pipeline", "whole_array"):
        assert figures[f"{phase}_s"] > 0 and figures[f"{phase}_peak_rss_mb"] > 50
    assert figures["pipeline_over_floor"] > 1.0  # physics costs something
    assert figures["pipeline_over_two_pass_floor"] == pytest.approx(
        figures["pipeline_s"] / figures["two_pass_floor_s"], rel=1e-2
    )
    assert "pipeline / floor" in result.output
    # the pipeline really ran: its fluxes are on the synthetic grid
    with rasterio.open(tmp_path / "out_pipeline" / "bench" / "latent_heat_flux.tif") as src:
        assert src.shape == (256, 256) and np.isfinite(src.read(1)).mean() > 0.9
