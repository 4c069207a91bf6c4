"""The blockwise engine's own contract, apart from the jobs that use it."""

from __future__ import annotations

import dask
import dask.array as da
import numpy as np

from rasterbudget.io.engine import BlockLayout, Tiles, compute_in_order, run_blockwise


def test_results_come_back_in_the_callers_order():
    # dask 2026.8 returned a delayed list's result in an array's place when an array followed it
    array_sum = da.ones((4, 4), chunks=2).sum()
    one = dask.delayed(lambda: "delayed")()
    nested = [[dask.delayed(lambda: "tile")()]]
    assert compute_in_order([one, array_sum, nested]) == ("delayed", 16.0, [["tile"]])


def test_blocks_cover_the_grid_once_in_row_major_order():
    layout = BlockLayout(height=100, width=70, chunk=32)
    assert layout.row_edges == [0, 32, 64, 96, 100]
    assert layout.col_edges == [0, 32, 64, 70]
    covered = np.zeros((100, 70), dtype=int)
    for (r0, r1), (c0, c1) in layout.locations:
        covered[r0:r1, c0:c1] += 1
    assert (covered == 1).all()
    assert BlockLayout.over(type("G", (), {"height": 10, "width": 10})(), 40).chunk == 48


def test_tile_statistics_agree_in_tasks_and_from_the_array():
    values = np.arange(96 * 80, dtype=np.float64).reshape(1, 96, 80)

    def task(location):
        (r0, r1), (c0, c1) = location
        return values[:, r0:r1, c0:c1]

    def statistic(part):
        return float(part.sum())

    # chunk 48 holds whole 24-pixel tiles (summarised in the block tasks); chunk 32 does not
    # (the blocks are assembled and rechunked to tiles)
    in_tasks = run_blockwise(
        BlockLayout(96, 80, 48), task, layers=1, tiles=Tiles([0], 24, statistic)
    )
    rechunked = run_blockwise(
        BlockLayout(96, 80, 32), task, layers=1, tiles=Tiles([0], 24, statistic)
    )
    assert in_tasks.tiles == rechunked.tiles
    assert sum(map(sum, in_tasks.tiles)) == values.sum()


def _tile_statistics_plainly(block: np.ndarray) -> np.ndarray:
    """The tile statistics as numpy gives them on each variable's finite values (float64)."""
    out = np.full((block.shape[0], 8), np.nan)
    for v, layer in enumerate(block):
        values = layer[np.isfinite(layer)].astype(np.float64)
        out[v, 0] = values.size
        if values.size:
            p10, p50, p90 = np.percentile(values, [10, 50, 90])  # numpy's 'linear' method
            out[v, 1:] = (values.mean(), values.std(), values.min(), p10, p50, p90, values.max())
    return out


def test_tile_statistics_equal_numpys_on_the_unsorted_values():
    from rasterbudget.scene.summaries import tile_statistics

    rng = np.random.default_rng(7)
    block = rng.normal(300.0, 12.0, (5, 256, 256))
    block[rng.random(block.shape) < 0.2] = np.nan
    block[1] = np.nan  # no value at all: count 0, the rest NaN
    block[2, :, :] = np.nan
    block[2, 3, 4] = 5.0  # a single value
    block[3] = np.round(block[3])  # many ties
    for dtype in (np.float32, np.float64):
        typed = block.astype(dtype)
        np.testing.assert_array_equal(tile_statistics(typed), _tile_statistics_plainly(typed))


def test_percentiles_of_sorted_values_equal_numpys():
    from rasterbudget.scene.summaries import TILE_PERCENTILES, percentiles_of_sorted

    rng = np.random.default_rng(11)
    for n in (*range(1, 40), 1000, 65536):
        for values in (rng.normal(0.0, 1.0, n), np.round(rng.normal(5.0, 2.0, n))):
            ordered = np.sort(values)
            np.testing.assert_array_equal(
                percentiles_of_sorted(ordered, TILE_PERCENTILES),
                np.percentile(values, [10, 50, 90]),
            )
