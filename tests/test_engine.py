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
