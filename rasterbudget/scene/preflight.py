"""Before a scene's passes: will its blocks fit in memory, and its outputs on the disk?

Estimates from measured rates (README, Performance): a run's resident memory is the libraries'
base plus, per worker thread, a few hundred bytes per pixel of a block; the outputs are float32
rasters that the default codec shrinks to about half (common practice for smooth fields with a
floating-point predictor). A run that cannot fit is refused with the estimate and the fix.
"""

from __future__ import annotations

import os
import shutil
from pathlib import Path

from ..errors import OutputError

BASE_MEMORY_GB = 0.3  # the libraries, resident before any block
BYTES_PER_PIXEL_PER_THREAD = 400  # a block's working arrays (bench, chunk 512 and 1024)
COMPRESSED_SHARE = 0.5  # written size over raw float32 size, default codec (common practice)


def memory_estimate_gb(chunk: int, members: int = 0, threads: int | None = None) -> float:
    """Peak resident memory of a scene's run at this chunk edge [GB]."""
    threads = threads or os.cpu_count() or 1
    per_block = chunk**2 * BYTES_PER_PIXEL_PER_THREAD * (1 + 0.5 * max(members - 1, 0))
    return BASE_MEMORY_GB + threads * per_block / 1e9


def available_memory_gb() -> float | None:
    """Memory the system can give without swapping [GB] (Linux ``MemAvailable``); None elsewhere."""
    try:
        for line in Path("/proc/meminfo").read_text().splitlines():
            if line.startswith("MemAvailable:"):
                return int(line.split()[1]) * 1024 / 1e9
    except OSError:
        return None
    return None


def output_estimate_gb(pixels: int, rasters: int) -> float:
    """Disk space a scene's rasters take once written [GB]."""
    return pixels * rasters * 4 * COMPRESSED_SHARE / 1e9


def check_room(
    scene_id: str, pixels: int, rasters: int, chunk: int, members: int, out_dir: Path
) -> None:
    """Refuse a scene whose blocks cannot fit in memory or whose outputs cannot fit on disk."""
    need = memory_estimate_gb(chunk, members)
    have = available_memory_gb()
    if have is not None and need > have:
        smaller = chunk
        while smaller > 64 and memory_estimate_gb(smaller, members) > 0.8 * have:
            smaller //= 2
        raise OutputError(
            f"scene {scene_id}: chunk size {chunk} needs about {need:.1f} GB of memory, "
            f"{have:.1f} GB are available; use --chunk-size {smaller} (or run.chunk_size)."
        )
    disk = output_estimate_gb(pixels, rasters)
    free = shutil.disk_usage(out_dir).free / 1e9
    if disk > free:
        raise OutputError(
            f"scene {scene_id}: its {rasters} rasters need about {disk:.2f} GB, {out_dir} has "
            f"{free:.2f} GB free; free some space or choose another --out."
        )
