"""Results must not depend on chunking: one block versus many small blocks."""

from __future__ import annotations

import json

import numpy as np
import rasterio
from click.testing import CliRunner

from rasterbudget.catalog.variables import FLUX_OUTPUTS
from rasterbudget.cli import main
from tests.conftest import DEMO_RECIPE


def _run(out, chunk, tile):
    result = CliRunner().invoke(
        main,
        [
            "run",
            str(DEMO_RECIPE),
            "--out",
            str(out),
            "--chunk-size",
            str(chunk),
            "--tile-size",
            str(tile),
            "--quiet",
            "--no-quicklook",
            "--components",
        ],
    )
    assert result.exit_code == 0, result.output


def test_outputs_identical_for_very_different_chunk_sizes(tmp_path):
    # 64-pixel chunks (5 x 7 = 35 blocks, ragged edges) against one 1024-pixel block
    _run(tmp_path / "small", 64, 50)
    _run(tmp_path / "large", 1024, 50)
    for scene in ("kessendry_20260614", "kessendry_20260823"):
        for name in [*FLUX_OUTPUTS, "shortwave_in", "longwave_in", "longwave_out"]:
            a = rasterio.open(tmp_path / "small" / scene / f"{name}.tif").read(1)
            b = rasterio.open(tmp_path / "large" / scene / f"{name}.tif").read(1)
            np.testing.assert_array_equal(np.isnan(a), np.isnan(b))
            # float32 round-off only: a few ulps
            np.testing.assert_allclose(a, b, rtol=1e-6, atol=1e-6, equal_nan=True, err_msg=name)
        qa_a = rasterio.open(tmp_path / "small" / scene / "qa_flags.tif").read(1)
        qa_b = rasterio.open(tmp_path / "large" / scene / "qa_flags.tif").read(1)
        np.testing.assert_array_equal(qa_a, qa_b)
        ma = json.loads((tmp_path / "small" / scene / "manifest.json").read_text())
        mb = json.loads((tmp_path / "large" / scene / "manifest.json").read_text())
        for role in ("cold", "hot"):
            for key in ("row", "col", "candidates", "ts_range"):
                assert ma["anchors"][role][key] == mb["anchors"][role][key]
        assert np.isclose(ma["calibration"]["a"], mb["calibration"]["a"], rtol=1e-12)
        tiles_a = (tmp_path / "small" / scene / "tiles.csv").read_text()
        tiles_b = (tmp_path / "large" / scene / "tiles.csv").read_text()
        assert tiles_a.splitlines()[0] == tiles_b.splitlines()[0]
        assert len(tiles_a.splitlines()) == len(tiles_b.splitlines()) == 1 + 6 * 8


def test_tile_and_class_summaries_agree_whether_tiles_lie_inside_blocks_or_not(tmp_path):
    # chunk 128 holds whole 64-pixel tiles (summarised inside each block's task); chunk 208 cuts
    # them (summarised after a rechunk): the tables must agree
    import csv

    _run(tmp_path / "inside", 128, 64)
    _run(tmp_path / "across", 208, 64)
    for scene in ("kessendry_20260614", "kessendry_20260823"):
        # the rasters too: written by each block's own task (inside) or by da.store (across)
        for name in [*FLUX_OUTPUTS, "qa_flags"]:
            a = rasterio.open(tmp_path / "inside" / scene / f"{name}.tif").read(1)
            b = rasterio.open(tmp_path / "across" / scene / f"{name}.tif").read(1)
            np.testing.assert_allclose(a, b, rtol=1e-6, atol=1e-6, equal_nan=True, err_msg=name)
        for table in ("tiles.csv", "classes.csv"):
            with (tmp_path / "inside" / scene / table).open() as f:
                rows_a = list(csv.DictReader(f))
            with (tmp_path / "across" / scene / table).open() as f:
                rows_b = list(csv.DictReader(f))
            assert len(rows_a) == len(rows_b) > 0
            for ra, rb in zip(rows_a, rows_b, strict=True):
                assert ra.keys() == rb.keys()
                for key in ra:
                    assert _same(ra[key], rb[key]), (scene, table, key, ra[key], rb[key])


def _same(a: str, b: str) -> bool:
    """Equal CSV cells: numbers to float32 round-off, text exactly."""
    try:
        x, y = float(a), float(b)
    except ValueError:
        return a == b
    return bool(np.isclose(x, y, rtol=1e-6, atol=1e-6))
