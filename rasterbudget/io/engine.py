"""The blockwise engine: a block layout over a grid, and what every chunked job shares."""

from __future__ import annotations

import ctypes
import math
import os
from functools import reduce

from .writers import AtomicRaster


def effective_chunk_size(requested: int) -> int:
    """Chunk edge rounded up to a multiple of 16, so GeoTIFF blocks never straddle chunks."""
    return int(math.ceil(requested / 16) * 16)


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
