"""The blockwise engine: every chunked job of the package runs through :func:`run_blockwise`.

A job is a block layout over a grid and a function of one block location. The engine runs one
task per block, writes each block's layers to the output rasters, tree-reduces the blocks'
small summaries, computes tile statistics, all in ONE ``dask.compute``; then it finishes and
commits every output, or aborts every output if anything failed. Scene pass 1 and pass 2,
season totals, comparisons, zone totals and the benchmark's floor use it.

Two ways to run, chosen by the job:

- **in the block's task** (the default): the task computes its block, writes its windows,
  summarises it and returns only the summary, so no block outlives its task and memory does not
  grow with the number of blocks;
- **as a dask array**, when tiles straddle blocks or the job reduces the whole array with dask
  (``reduce_array``): the blocks are assembled with ``da.block``, stored with ``da.store`` and
  rechunked to tiles.
"""

from __future__ import annotations

import ctypes
import itertools
import math
import os
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from functools import reduce
from typing import Any

import numpy as np

from .cluster import close_worker_read_handles, distributed_client
from .grid import close_read_handles
from .writers import AtomicRaster

Location = tuple[tuple[int, int], tuple[int, int]]  # ((row0, row1), (col0, col1))


def effective_chunk_size(requested: int) -> int:
    """Chunk edge rounded up to a multiple of 16, so GeoTIFF blocks never straddle chunks."""
    return int(math.ceil(requested / 16) * 16)


@dataclass(frozen=True)
class BlockLayout:
    """Square blocks of ``chunk`` pixels over a ``height`` x ``width`` grid (edge blocks
    smaller), in row-major order."""

    height: int
    width: int
    chunk: int

    @classmethod
    def over(cls, grid, requested_chunk: int) -> BlockLayout:
        """Blocks over a grid, the chunk rounded up to a multiple of 16."""
        return cls(grid.height, grid.width, effective_chunk_size(requested_chunk))

    @property
    def row_edges(self) -> list[int]:
        return [*range(0, self.height, self.chunk), self.height]

    @property
    def col_edges(self) -> list[int]:
        return [*range(0, self.width, self.chunk), self.width]

    @property
    def rows(self) -> list[list[Location]]:
        """Block locations, one list per row of blocks."""
        return [
            [((r0, r1), (c0, c1)) for c0, c1 in itertools.pairwise(self.col_edges)]
            for r0, r1 in itertools.pairwise(self.row_edges)
        ]

    @property
    def locations(self) -> list[Location]:
        return [loc for row in self.rows for loc in row]


@dataclass(frozen=True)
class Target:
    """Where one layer of each block goes: ``sink[rows, cols] = block[layer].astype(dtype)``;
    a slice of layers goes to a multi-band sink as ``sink[rows, cols] = block[layer]``."""

    layer: int | slice
    dtype: str
    sink: Any  # an AtomicRaster, a Zarr array, anything with __setitem__ by window


@dataclass(frozen=True)
class Tiles:
    """Statistics of square tiles of some layers: ``statistic(values[layers, tile, tile])``."""

    layers: Sequence[int]
    size: int
    statistic: Callable[[np.ndarray], Any]


@dataclass
class BlockwiseResult:
    summary: Any = None  # the tree-reduced block summaries
    tiles: list[list[Any]] = field(default_factory=list)  # per tile row, per tile column
    reductions: list = field(default_factory=list)  # results of ``reduce_array``


def run_blockwise(
    layout: BlockLayout,
    task: Callable[..., Any],
    *,
    args: Sequence = (),
    layers: int = 0,
    dtype=np.float64,
    targets: Sequence[Target] = (),
    summarise: Callable[[np.ndarray, Location], Any] | None = None,
    combine: Callable[[Any, Any], Any] | None = None,
    tiles: Tiles | None = None,
    reduce_array: Callable[[Any], Sequence] | None = None,
    outputs: Sequence = (),
    progress: Callable[[], Any] | None = None,
) -> BlockwiseResult:
    """Run ``task(*args, location)`` on every block in one dask compute.

    Parameters
    ----------
    task : the block function. With ``layers`` it returns the block's values, an array
        ``(layers, rows, cols)``; without, it returns the block's summary itself.
    args : leading arguments of ``task`` (wrapped once as dask objects: one graph key each).
    targets : the block layers to write, and where.
    summarise : ``summarise(values, location)``, the summary of a block's values.
    combine : merges two summaries (tree-reduced, 8 at a time).
    tiles : tile statistics of some layers; inside blocks when the chunk is a multiple of the
        tile size, else from the rechunked array.
    reduce_array : ``reduce_array(array)``, dask reductions of the whole stacked array computed
        in the same compute (runs the job as a dask array).
    outputs : writers to finish and commit after the compute (``finish()`` if they have one,
        COG conversions side by side), or to abort, all of them, if anything fails.
    progress : a context manager factory shown around the compute (a progress bar).

    Returns
    -------
    BlockwiseResult
    """
    import contextlib

    import dask

    in_tasks = reduce_array is None and (tiles is None or layout.chunk % tiles.size == 0)
    try:
        arg_tasks = [dask.delayed(a) for a in args]  # inside: a failure here aborts the outputs
        if not layers:
            parts = [dask.delayed(task)(*arg_tasks, loc) for loc in layout.locations]
            wanted = [tree_reduce(parts, combine)]
        elif in_tasks:
            parts = [
                dask.delayed(_block_in_task, pure=False)(
                    task, arg_tasks, loc, targets, summarise, tiles
                )
                for loc in layout.locations
            ]
            wanted = [tree_reduce(parts, partial_combine(combine))]
        else:
            wanted = _as_array(
                layout,
                task,
                arg_tasks,
                layers,
                dtype,
                targets,
                summarise,
                combine,
                tiles,
                reduce_array,
            )
        with progress() if progress is not None else contextlib.nullcontext():
            computed = compute_in_order(wanted)
        close_read_handles()  # every task has finished: the cached input datasets close
        client = distributed_client()
        if client is not None:  # and the workers' own
            close_worker_read_handles(client)
        release_free_memory()
        finish_all([w for w in outputs if isinstance(w, AtomicRaster)])
        for w in outputs:
            w.commit()
    finally:
        close_read_handles(finished=False)  # a failure: each thread closes its own, later
        for w in outputs:
            if not getattr(w, "committed", False):
                w.abort()
    if not layers:
        return BlockwiseResult(summary=computed[0])
    if in_tasks:
        summary, block_tiles = computed[0]
        return BlockwiseResult(summary=summary, tiles=_tile_grid(layout, tiles, block_tiles))
    _, tile_grid, summary, *reductions = computed
    return BlockwiseResult(summary=summary, tiles=tile_grid or [], reductions=reductions)


def _block_in_task(task, args, location, targets, summarise, tiles):
    """One block: computed, its windows written to every target, summarised; only the summary
    and its tiles' statistics leave the task."""
    values = task(*args, location)
    (r0, r1), (c0, c1) = location
    window = (slice(r0, r1), slice(c0, c1))
    for t in targets:
        t.sink[window] = values[t.layer].astype(t.dtype, copy=False)  # float32: no copy
    stats = {}
    if tiles is not None:
        chosen = values[list(tiles.layers)]
        for tr in range(0, values.shape[1], tiles.size):
            for tc in range(0, values.shape[2], tiles.size):
                part = chosen[:, tr : tr + tiles.size, tc : tc + tiles.size]
                stats[(r0 + tr) // tiles.size, (c0 + tc) // tiles.size] = tiles.statistic(part)
    return (summarise(values, location) if summarise is not None else None), stats


def partial_combine(combine):
    """Combine (summary, tile statistics) pairs: summaries by ``combine``, tiles by union."""

    def both(a, b):
        summary = combine(a[0], b[0]) if combine is not None else None
        return summary, {**a[1], **b[1]}

    return both


def _tile_grid(layout: BlockLayout, tiles: Tiles | None, stats: dict) -> list[list[Any]]:
    if tiles is None:
        return []
    rows = -(-layout.height // tiles.size)
    cols = -(-layout.width // tiles.size)
    return [[stats[i, j] for j in range(cols)] for i in range(rows)]


def _as_array(
    layout, task, arg_tasks, layers, dtype, targets, summarise, combine, tiles, reduce_array
) -> list:
    """The job as a dask array: store, rechunked tiles, per-block summaries, reductions."""
    import dask
    import dask.array as da

    stacked = da.block(
        [
            [
                da.from_delayed(
                    dask.delayed(task)(*arg_tasks, loc),
                    shape=(layers, loc[0][1] - loc[0][0], loc[1][1] - loc[1][0]),
                    dtype=dtype,
                    meta=np.empty((0, 0, 0), dtype),
                )
                for loc in row
            ]
            for row in layout.rows
        ]
    )
    # A lock per file inside each writer: different files may be written at once.
    store = (
        da.store(
            [stacked[t.layer].astype(t.dtype) for t in targets],
            [t.sink for t in targets],
            lock=False,
            compute=False,
        )
        if targets
        else None
    )
    tile_stats = None
    if tiles is not None:
        tiled = stacked[list(tiles.layers)].rechunk((len(tiles.layers), tiles.size, tiles.size))
        tile_blocks = tiled.to_delayed(optimize_graph=False)[0]
        tile_stats = [[dask.delayed(tiles.statistic)(b) for b in row] for row in tile_blocks]
    summary = None
    if summarise is not None:
        block_grid = stacked.to_delayed(optimize_graph=False)[0]
        parts = [
            dask.delayed(summarise)(b, loc)
            for row_blocks, row_locs in zip(block_grid, layout.rows, strict=True)
            for b, loc in zip(row_blocks, row_locs, strict=True)
        ]
        summary = tree_reduce(parts, combine)
    reductions = list(reduce_array(stacked)) if reduce_array is not None else []
    return [store, tile_stats, summary, *reductions]


def compute_in_order(wanted: Sequence) -> tuple:
    """``dask.compute(*wanted)`` with every result at its own position.

    dask (2026.8) merges the graphs of the collections of one kind (arrays, delayed) into one
    group each and returns the results group by group, so an array placed after a delayed item
    received a delayed item's result. Each item here holds one kind of collection; the items go
    to dask sorted so that each kind is contiguous (first kind first), and the results come back
    in the caller's order. Sorting changes neither the merged graph nor any value.
    """
    import dask

    kinds = [_collection_kind(w) for w in wanted]
    first = {}
    for kind in kinds:
        first.setdefault(kind, len(first))
    order = sorted(range(len(wanted)), key=lambda i: first[kinds[i]])
    results = dask.compute(*[wanted[i] for i in order])
    computed: list = [None] * len(wanted)
    for position, result in zip(order, results, strict=True):
        computed[position] = result
    return tuple(computed)


def _collection_kind(value) -> str | None:
    """The kind of dask collection ``value`` holds (in nested lists and tuples), None if none."""
    import dask
    from dask.delayed import Delayed

    if isinstance(value, Delayed):
        return "delayed"
    if isinstance(value, list | tuple):
        kinds = {_collection_kind(v) for v in value} - {None}
        if len(kinds) > 1:
            raise ValueError(f"one item of a blockwise compute mixes dask collections {kinds}")
        return kinds.pop() if kinds else None
    if dask.is_dask_collection(value):
        return type(value).__name__
    return None


def tree_reduce(items: list, combine, split_every: int = 8):
    import dask

    level = list(items)
    while len(level) > 1:
        level = [
            dask.delayed(lambda *xs: reduce(combine, xs))(*level[i : i + split_every])
            for i in range(0, len(level), split_every)
        ]
    return level[0]


def release_free_memory() -> None:
    """Hand the heap pages freed by a pass back to the operating system (glibc's malloc_trim).

    After pass 2 glibc kept the blocks' freed memory (about 200 MB at chunk 512); the summaries,
    quick-look and manifest that follow then set the run's peak on top of it.
    """
    try:
        ctypes.CDLL("libc.so.6").malloc_trim(0)
    except (OSError, AttributeError):  # not glibc: nothing to do
        pass


def finish_all(writers: list[AtomicRaster]) -> None:
    """Close every writer; COG conversions run side by side (GDAL works outside the GIL)."""
    from concurrent.futures import ThreadPoolExecutor

    if not any(w.cog for w in writers):
        for w in writers:
            w.finish()
        return
    with ThreadPoolExecutor(max_workers=min(len(writers), os.cpu_count() or 1)) as pool:
        list(pool.map(AtomicRaster.finish, writers))  # re-raises the first failure
