"""``rasterbudget bench``: how far above the raw read/write floor a run is, on a synthetic scene.

One bench run

1. writes a synthetic scene of ``size`` x ``size`` pixels into a temporary folder: the early-summer
   demo scene of the invented region (``tiny_rasters``) tiled by mirroring, as tiled,
   DEFLATE-compressed GeoTIFFs like real inputs (albedo, surface temperature, NDVI, land cover,
   elevation), written strip by strip so the generator's memory does not grow with the scene;
2. times, each in a fresh process (so each has its own peak resident memory):

   - **floor**: every input read once, window by window, and every output raster the pipeline
     writes (same names, data types and creation options) written from those values, with no
     physics: the cost no implementation can avoid;
   - **two-pass floor**: a pass that only reads every input, then the floor: the least any method
     can cost that needs an image-wide reduction before its per-pixel pass, as the anchor and
     edges methods do (each input read twice);
   - **pipeline**: the full run of one scene (anchor calibration, both passes, tile and class
     summaries, quick-look, manifest) with the chosen chunk size on the threaded scheduler;
   - **whole-array** (optional): the same equations on whole arrays held in memory, on one thread:
     what an analyst's numpy script does. It needs the whole scene in memory many times over, so
     it is skipped above ``max_whole_array`` pixels on a side unless asked for;

3. repeats each ``repeat`` times and reports the median wall time, megapixels per second, the
   peak resident memory of each, and the ratios pipeline / floor, pipeline / two-pass floor and
   whole-array / pipeline.
"""

from __future__ import annotations

import json
import os
import resource
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

#: Input rasters of the synthetic scene: demo file -> (role, creation dtype).
_SOURCES = {
    "albedo_20260614.tif": "albedo",
    "surface_temperature_20260614.tif": "surface_temperature",
    "ndvi_20260614.tif": "ndvi",
    "land_cover.tif": "land_cover",
    "elevation.tif": "elevation",
}

_RECIPE = """# Synthetic bench scene: the invented demo region tiled to {size} x {size} pixels.
[run]
out = "out"
chunk_size = {chunk}
tile_size = 256

[[scene]]
id = "bench"
acquired_utc = 2026-06-14T17:52:00Z

[scene.inputs]
albedo = "albedo.tif"
surface_temperature = "surface_temperature.tif"
ndvi = "ndvi.tif"
land_cover = "land_cover.tif"
elevation = "elevation.tif"

[scene.overpass]
station_elevation_m = 1560.0
air_temperature_c = 26.5
relative_humidity_pct = 28.0
wind_speed_m_s = 3.4

[scene.daily]
tmax_c = 31.0
tmin_c = 12.5
rh_max_pct = 62.0
rh_min_pct = 18.0
shortwave_mj_m2 = 29.8
wind_speed_m_s = 2.9
"""


def _mirror_index(n: int, period: int) -> np.ndarray:
    """Indices 0..n-1 folded into 0..period-1 by mirroring (no seams between copies)."""
    k = np.arange(n) % (2 * period)
    return np.where(k < period, k, 2 * period - 1 - k)


def make_synthetic_scene(folder: Path, size: int, tiny_dir: Path) -> Path:
    """Write the tiled synthetic scene and its recipe into ``folder``; returns the recipe path.

    The grid keeps the demo's 30 m pixels and upper-left corner (EPSG:32613), so the sun and the
    weather are the demo's; land cover and every class occur throughout.
    """
    import rasterio
    from rasterio.transform import Affine
    from rasterio.windows import Window

    folder.mkdir(parents=True, exist_ok=True)
    for name, role in _SOURCES.items():
        with rasterio.open(tiny_dir / name) as src:
            data = src.read(1)
            profile = src.profile
        rows = _mirror_index(size, data.shape[0])
        cols = _mirror_index(size, data.shape[1])
        t = profile["transform"]
        profile.update(
            width=size,
            height=size,
            transform=Affine(t.a, 0.0, t.c, 0.0, t.e, t.f),
            blockxsize=512,
            blockysize=512,
            tiled=True,
            compress="deflate",
            bigtiff="if_safer",
        )
        path = folder / f"{role}.tif"
        with rasterio.open(path, "w", **profile) as dst:
            for r0 in range(0, size, 512):
                r1 = min(r0 + 512, size)
                strip = data[np.ix_(rows[r0:r1], cols)]
                dst.write(strip, 1, window=Window(0, r0, size, r1 - r0))
    recipe = folder / "bench.toml"
    recipe.write_text(_RECIPE.format(size=size, chunk=512))
    return recipe


# ----------------------------------------------------------------------------- phases


def _load(recipe_path: Path):
    from .catalog.classes import load_class_table
    from .recipe import load_recipe

    return load_recipe(recipe_path), load_class_table(None)


def _read_inputs(paths: list[Path], location) -> list[np.ndarray]:
    """One block of every input, float32, window by window."""
    import rasterio
    from rasterio.windows import Window

    (r0, r1), (c0, c1) = location
    window = Window(c0, r0, c1 - c0, r1 - r0)
    values = []
    for path in paths:
        with rasterio.open(path) as src:
            values.append(src.read(1, window=window).astype(np.float32))
    return values


def _read_only_block(paths: list[Path], location) -> int:
    """Read one block of every input; its count of finite values."""
    # a small result per block, as pass 1's histograms: the reads are the cost
    return sum(int(np.count_nonzero(np.isfinite(v))) for v in _read_inputs(paths, location))


def _floor_block(paths: list[Path], n_fields: int, location) -> np.ndarray:
    """One block of the floor's outputs, float32 (n_fields + 1, rows, cols): output-like fields,
    then a QA-like code layer."""
    albedo, lst, ndvi, codes, z = _read_inputs(paths, location)
    # Output-like fields from the inputs (one multiply-add each): realistic to compress.
    fields = [lst * (0.5 + 0.1 * k) + albedo * 100.0 * k + ndvi for k in range(n_fields)]
    return np.stack([*fields, codes + (z > 2000)])


def floor_phase(recipe_path: Path, out_dir: Path, chunk: int, passes: int = 1) -> float:
    """Read every input once and write every pipeline output raster; no physics [s].

    ``passes = 2``: first a pass that only reads every input (as the pipeline's pass 1 does), then
    the read-and-write pass: the floor of any method that needs an image-wide reduction first.
    Both passes run through the blockwise engine, as the pipeline's do.
    """
    import operator

    import rasterio

    from .catalog.variables import FLUX_OUTPUTS, QA_OUTPUT
    from .io.engine import BlockLayout, Target, run_blockwise
    from .io.grid import GDAL_OPTIONS, Grid
    from .io.writers import AtomicRaster, block_size_for

    inputs = [recipe_path.parent / f"{role}.tif" for role in _SOURCES.values()]
    with rasterio.open(inputs[0]) as src:
        grid = Grid(src.crs, src.transform, src.width, src.height)
    names = [*FLUX_OUTPUTS, QA_OUTPUT]
    started = time.perf_counter()
    layout = BlockLayout(grid.height, grid.width, chunk)
    if passes == 2:
        with rasterio.Env(**GDAL_OPTIONS):
            run_blockwise(layout, _read_only_block, args=(inputs,), combine=operator.add)
    out_dir.mkdir(parents=True, exist_ok=True)
    size = block_size_for(chunk)
    writers = [
        AtomicRaster(out_dir / f"{n}.tif", grid, "float32", np.nan, size, n, "", "")
        for n in names[:-1]
    ]
    qa_path = out_dir / f"{QA_OUTPUT}.tif"
    writers.append(AtomicRaster(qa_path, grid, "uint16", None, size, QA_OUTPUT, "", ""))
    with rasterio.Env(**GDAL_OPTIONS):
        run_blockwise(
            layout,
            _floor_block,
            args=(inputs, len(names) - 1),
            layers=len(names),
            dtype=np.float32,
            targets=[Target(k, w.dtype, w) for k, w in enumerate(writers)],
            outputs=writers,
        )
    return time.perf_counter() - started


def pipeline_phase(
    recipe_path: Path, out_dir: Path, chunk: int, whole_array: bool, workers: int = 0
) -> float:
    """One full scene run [s]; ``whole_array``: one block the size of the scene, one thread;
    ``workers``: on a local dask.distributed cluster of that many processes (started first, not
    timed)."""
    import dask

    from .scene.run import RunOptions, run_scene

    recipe, table = _load(recipe_path)
    settings = RunOptions(out_dir=out_dir, chunk_size=chunk, tile_size=256, stac=False)
    if workers:
        from .io.cluster import dask_cluster

        scheduler = dask_cluster(None, workers)
    else:
        name = "synchronous" if whole_array else "threads"
        scheduler = dask.config.set(scheduler=name)
    with scheduler as client:
        started = time.perf_counter()
        run_scene(recipe, recipe.scene[0], table, settings)
        seconds = time.perf_counter() - started
        if workers:  # each worker process's own peak memory
            _WORKER_PEAKS[:] = list(client.run(_peak_rss_mb).values())
    return seconds


#: Peak resident memory of each worker of the last distributed pipeline phase [MB].
_WORKER_PEAKS: list[float] = []


def _peak_rss_mb() -> float:
    # ru_maxrss is in kilobytes on Linux
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def _child_main(argv: list[str]) -> None:
    phase, recipe, out, chunk = argv[0], Path(argv[1]), Path(argv[2]), int(argv[3])
    workers = int(argv[4]) if len(argv) > 4 else 0
    if phase in ("floor", "two_pass_floor"):
        seconds = floor_phase(recipe, out, chunk, passes=2 if phase == "two_pass_floor" else 1)
    else:
        seconds = pipeline_phase(recipe, out, chunk, phase == "whole_array", workers)
    peak = _peak_rss_mb() + sum(_WORKER_PEAKS)  # client and workers together
    print(json.dumps({"seconds": seconds, "peak_rss_mb": peak, "worker_peaks_mb": _WORKER_PEAKS}))


def _run_child(phase: str, recipe: Path, out: Path, chunk: int, workers: int = 0) -> dict:
    shutil.rmtree(out, ignore_errors=True)
    args = [phase, str(recipe), str(out), str(chunk), str(workers)]
    done = subprocess.run(
        [sys.executable, "-m", "rasterbudget.bench", *args],
        capture_output=True,
        text=True,
        env=os.environ.copy(),
        check=False,
    )
    if done.returncode != 0:
        from .errors import RasterBudgetError

        tail = "\n".join(done.stderr.strip().splitlines()[-5:])
        raise RasterBudgetError(f"bench phase {phase} failed:\n{tail}")
    return json.loads(done.stdout.strip().splitlines()[-1])


def run_bench(
    size: int,
    chunk: int = 512,
    repeat: int = 3,
    whole_array: bool | None = None,
    max_whole_array: int = 4096,
    keep: Path | None = None,
    tiny_dir: Path | None = None,
    workers: int = 0,
) -> dict:
    """Generate the scene, time each phase ``repeat`` times; return the results (one dict)."""
    tiny = tiny_dir or Path(__file__).resolve().parents[1] / "tiny_rasters"
    if not (tiny / "albedo_20260614.tif").is_file():
        from .demo import make_tiny_rasters

        tiny = Path(tempfile.mkdtemp(prefix="rasterbudget-demo-"))
        make_tiny_rasters(tiny)
    work = keep or Path(tempfile.mkdtemp(prefix="rasterbudget-bench-"))
    try:
        t0 = time.perf_counter()
        recipe = make_synthetic_scene(work / "scene", size, tiny)
        generate_s = time.perf_counter() - t0
        input_mb = sum(p.stat().st_size for p in (work / "scene").glob("*.tif")) / 1e6
        phases = ["floor", "two_pass_floor", "pipeline"]
        if whole_array or (whole_array is None and size <= max_whole_array):
            phases.append("whole_array")
        runs: dict[str, list[dict]] = {p: [] for p in phases}
        for _ in range(repeat):
            for phase in phases:
                block = size if phase == "whole_array" else chunk
                cluster = workers if phase == "pipeline" else 0
                runs[phase].append(_run_child(phase, recipe, work / f"out_{phase}", block, cluster))
        output_mb = sum(p.stat().st_size for p in (work / "out_pipeline").rglob("*.tif")) / 1e6
    finally:
        if keep is None:
            shutil.rmtree(work, ignore_errors=True)
    megapixels = size * size / 1e6
    result: dict = {
        "size": size,
        "megapixels": megapixels,
        "chunk_size": chunk,
        "repeat": repeat,
        "cores": os.cpu_count(),
        "workers": workers or "threads",
        "generate_s": round(generate_s, 2),
        "input_mb": round(input_mb, 1),
        "output_mb": round(output_mb, 1),
    }
    for phase, items in runs.items():
        seconds = statistics.median(r["seconds"] for r in items)
        result[f"{phase}_s"] = round(seconds, 3)
        result[f"{phase}_mpx_per_s"] = round(megapixels / seconds, 3)
        result[f"{phase}_peak_rss_mb"] = round(max(r["peak_rss_mb"] for r in items), 1)
    result["pipeline_over_floor"] = round(result["pipeline_s"] / result["floor_s"], 3)
    result["pipeline_over_two_pass_floor"] = round(
        result["pipeline_s"] / result["two_pass_floor_s"], 3
    )
    if "whole_array_s" in result:
        result["whole_array_over_pipeline"] = round(
            result["whole_array_s"] / result["pipeline_s"], 3
        )
    return result


def format_table(result: dict) -> str:
    """The bench result as a small text table."""
    lines = [
        f"scene {result['size']} x {result['size']} ({result['megapixels']:.1f} Mpx), "
        f"chunk {result['chunk_size']}, {result['cores']} cores, pipeline on "
        f"{result['workers']}{' worker processes' if result['workers'] != 'threads' else ''}, "
        f"median of {result['repeat']}",
        f"{'phase':<16}{'seconds':>10}{'Mpx/s':>10}{'peak MB':>10}",
    ]
    for phase in ("floor", "two_pass_floor", "pipeline", "whole_array"):
        if f"{phase}_s" in result:
            lines.append(
                f"{phase:<16}{result[f'{phase}_s']:>10.2f}{result[f'{phase}_mpx_per_s']:>10.2f}"
                f"{result[f'{phase}_peak_rss_mb']:>10.0f}"
            )
    lines.append(
        f"pipeline / floor: {result['pipeline_over_floor']:.2f}   "
        f"pipeline / two-pass floor: {result['pipeline_over_two_pass_floor']:.2f}"
    )
    if "whole_array_over_pipeline" in result:
        lines.append(f"whole-array / pipeline: {result['whole_array_over_pipeline']:.2f}")
    return "\n".join(lines)


if __name__ == "__main__":  # a bench phase in its own process
    _child_main(sys.argv[1:])
