"""One scene end to end: the two passes of DESIGN.md and the writing of every output.

Pass 1 reads the inputs once and reduces every block to the anchor histograms (small arrays).
The anchors and the dT calibration are then found on scalars. Pass 2 reads the inputs a second
time, computes every flux per block, and in ONE ``dask.compute`` writes all GeoTIFFs (one lock per
file, temporary names) and computes the tile and class summaries from the same blocks.
"""

from __future__ import annotations

import datetime as dt
import itertools
import json
import math
import time
from dataclasses import asdict, dataclass, field
from functools import partial
from pathlib import Path

import numpy as np

from .. import __version__
from ..catalog.classes import ClassTable
from ..catalog.qa import QA, QA_DESCRIPTIONS
from ..errors import OutputError, RasterBudgetError
from ..io.engine import effective_chunk_size, finish_all, release_free_memory, tree_reduce
from ..io.grid import (
    GDAL_OPTIONS,
    check_input,
    grid_from_settings,
    input_source,
    target_grid,
)
from ..io.paths import is_remote, local_size
from ..io.writers import (
    COMPONENT_OUTPUTS,
    ENSEMBLE_OUTPUTS,
    FLUX_OUTPUTS,
    QA_OUTPUT,
    REFERENCE_OUTPUTS,
    AtomicRaster,
    block_size_for,
    remove_stale_partials,
    write_text_atomic,
)
from ..methods import anchors as anchor_method
from ..methods import get_method
from ..methods.base import CalibrationContext
from ..methods.ensemble import sample_members
from ..recipe import Recipe, Scene, resolve_path, resolve_raster_path
from ..surface import (
    ClassLookups,
)
from . import blocks
from .blocks import (
    BlockContext,
    Pass2Parameters,
    block_state,
    block_summary,
    check_input_values,
    combine_block_summaries,
    merge_input_stats,
    pass2_write_block,
)
from .constants import metric_pixel_size, scene_constants, with_weather_at_centre
from .manifest import CAUTION, json_default, sha256_of, versions, write_stac
from .summaries import (
    HISTOGRAM_RANGES,
    class_rows,
    rows_to_csv,
    tile_layout,
    tile_rows,
    tile_statistics,
    tiles_geojson,
)

OPTIONAL_INPUTS = ("ndvi", "elevation")
REQUIRED_INPUTS = ("albedo", "surface_temperature", "land_cover")


@dataclass
class RunSettings:
    """Chunking and output choices for one run (CLI options override the recipe)."""

    out_dir: Path
    chunk_size: int
    tile_size: int
    write_components: bool = False
    quicklook: bool = True
    progress: bool = False
    cog: bool = False  # rasters as Cloud Optimized GeoTIFFs (same names)
    stac: bool = True  # <scene id>.stac.json
    zarr: bool = False  # outputs.zarr, filled by the same compute as the GeoTIFFs
    compression: str = "zstd"  # GeoTIFF codec, a key of outputs.COMPRESSION


@dataclass
class SceneResult:
    scene_id: str
    out_dir: Path
    outputs: dict[str, Path]
    manifest: dict = field(repr=False)


# ----------------------------------------------------------------------------- scene scalars


# ----------------------------------------------------------------------------- per-block work


# ----------------------------------------------------------------------------- helpers


# ----------------------------------------------------------------------------- the scene


def _pixel_state(ctx: BlockContext, row: int, col: int) -> dict:
    """The surface state of one pixel (a given anchor's)."""
    return block_state(ctx, slice(row, row + 1), slice(col, col + 1))


def run_scene(
    recipe: Recipe,
    scene: Scene,
    table: ClassTable,
    settings: RunSettings,
    fingerprint: str | None = None,
) -> SceneResult:
    """Run one scene end to end and return where its outputs are."""
    import dask
    import dask.array as da
    import rasterio

    from ..io.progress import TaskProgress

    started = time.perf_counter()
    timings: dict[str, float] = {}
    chunk = effective_chunk_size(settings.chunk_size)
    block = block_size_for(chunk)
    if settings.zarr:
        from ..io.cloud import require_zarr

        require_zarr()  # before any pass, not after minutes of work

    paths, specs = {}, {}
    for role in REQUIRED_INPUTS + OPTIONAL_INPUTS:
        spec = scene.inputs.spec(role)
        if spec is not None:
            paths[role] = resolve_raster_path(recipe, spec.path)
            specs[role] = spec
    if scene.inputs.cloud_mask is not None:
        paths["cloud_mask"] = resolve_raster_path(recipe, scene.inputs.cloud_mask.path)
    for key, value in scene.overpass.gridded().items():
        paths[key] = resolve_raster_path(recipe, value)
    remap = {}
    if specs["land_cover"].remap is not None:
        from ..catalog.classes import load_remap

        remap = load_remap(resolve_path(recipe, specs["land_cover"].remap), table)
    with rasterio.Env(**GDAL_OPTIONS):
        grid = target_grid(paths["albedo"])  # refuses an albedo without CRS, in any case
        if scene.grid is not None:
            grid = grid_from_settings(scene.grid)
        described = {role: check_input(path, role, grid) for role, path in paths.items()}
    # Gridded weather: scene-wide scalars (reference ET, the sun check, ...) take each raster's
    # value at the scene centre; pixels use their own values (surface_block, anchors, pass 2).
    gridded_keys = scene.overpass.gridded()
    scene, centre_values = with_weather_at_centre(scene, grid, paths)
    constants, facts = scene_constants(scene, grid)
    facts["gridded_weather_at_centre"] = centre_values
    lookups = ClassLookups.from_table(table)

    out_dir = settings.out_dir / scene.id
    out_dir.mkdir(parents=True, exist_ok=True)
    remove_stale_partials(out_dir)

    env = rasterio.Env(**GDAL_OPTIONS)
    env.__enter__()
    writers: list[AtomicRaster] = []
    zarr_store = None
    try:
        sources = tuple(
            input_source(path, role, grid, specs.get(role)) for role, path in paths.items()
        )
        ctx = BlockContext(
            grid=grid,
            constants=constants,
            lookups=lookups,
            sources=sources,
            method=scene.sensible_heat,
            remap=tuple(sorted(remap.items())),
            metric_pixel_size=metric_pixel_size(grid, facts["centre_lat"]),
            wind_profile=(
                scene.overpass.wind_height_m,
                scene.anchors.station_roughness_m,
                scene.anchors.blending_height_m,
            ),
            blending_wind_speed=float("nan")
            if scene.overpass.wind_speed_m_s is None
            else (
                anchor_method.wind_at_blending_height(
                    scene.overpass.wind_speed_m_s,
                    scene.overpass.wind_height_m,
                    scene.anchors.station_roughness_m,
                    scene.anchors.blending_height_m,
                )
            ),
            mask_values=tuple(
                scene.inputs.cloud_mask.drop_values if scene.inputs.cloud_mask else ()
            ),
            mask_bits=tuple(scene.inputs.cloud_mask.drop_bits if scene.inputs.cloud_mask else ()),
            member_air_offsets=tuple(
                m.air_temperature_offset for m in sample_members(scene.uncertainty)
            ),
        )
        ctx_task = dask.delayed(ctx)  # one graph key shared by every block task
        row_edges = [*range(0, grid.height, chunk), grid.height]
        col_edges = [*range(0, grid.width, chunk), grid.width]
        locations = [
            [((r0, r1), (c0, c1)) for c0, c1 in itertools.pairwise(col_edges)]
            for r0, r1 in itertools.pairwise(row_edges)
        ]

        # ---------------- pass 1: anchor histograms. Each task reads its own windows, so input
        # blocks are never read far ahead of their use.
        t0 = time.perf_counter()
        partials = [
            dask.delayed(blocks.pass1_block)(ctx_task, loc) for row in locations for loc in row
        ]
        method = get_method(scene.sensible_heat)
        total = tree_reduce(
            partials, lambda a, b: (method.combine(a[0], b[0]), merge_input_stats(a[1], b[1]))
        )
        with TaskProgress(f"{scene.id} pass 1", settings.progress):
            ((reduced, input_stats),) = dask.compute(total)
        value_summary = check_input_values(input_stats, sources)
        calibrated = method.calibrate(
            reduced,
            CalibrationContext(
                scene=scene,
                settings=method.settings(scene),
                grid=grid,
                constants=constants,
                lookups=lookups,
                member_air_offsets=ctx.member_air_offsets,
                gridded_weather=frozenset(gridded_keys),
                blending_wind_speed=ctx.blending_wind_speed,
                pixel_state=partial(_pixel_state, ctx),
            ),
        )
        method_facts = calibrated.facts
        timings["pass1_s"] = time.perf_counter() - t0

        # ---------------- pass 2: fluxes, GeoTIFFs and summaries in one compute
        t0 = time.perf_counter()
        written = list(FLUX_OUTPUTS) + (
            list(COMPONENT_OUTPUTS) if settings.write_components else []
        )
        if constants.reference_et_hourly is not None:
            written.append("reference_et_fraction")
        if calibrated.members:
            written += list(ENSEMBLE_OUTPUTS)
        variables = (*written, QA_OUTPUT, "land_cover_code")
        params = Pass2Parameters(
            variables=variables, method_params=calibrated.params, members=calibrated.members
        )
        params_task = dask.delayed(params)
        descriptions = {
            **FLUX_OUTPUTS,
            **COMPONENT_OUTPUTS,
            **REFERENCE_OUTPUTS,
            **ENSEMBLE_OUTPUTS,
        }
        tags = {
            "scene_id": scene.id,
            "acquired_utc": scene.acquired_utc.isoformat(),
            "software": f"rasterbudget {__version__}",
        }
        targets = []  # (variable index, data type, GeoTIFF writer or Zarr array)
        for k, name in enumerate(written):
            units, text = descriptions[name]
            writer = AtomicRaster(
                out_dir / f"{name}.tif",
                grid,
                "float32",
                np.nan,
                block,
                name,
                units,
                text,
                tags,
                cog=settings.cog,
                compression=settings.compression,
            )
            writers.append(writer)
            targets.append((k, "float32", writer))
        qa_writer = AtomicRaster(
            out_dir / f"{QA_OUTPUT}.tif",
            grid,
            "uint16",
            None,  # no nodata: 0 means "no flag", and GIS tools would hide such pixels
            block,
            QA_OUTPUT,
            "bitmask",
            "QA flags, bits in the README",
            tags,
            cog=settings.cog,
            compression=settings.compression,
        )
        writers.append(qa_writer)
        targets.append((variables.index(QA_OUTPUT), "uint16", qa_writer))
        if settings.zarr:
            from ..io.cloud import ZARR_NAME, AtomicZarr

            zarr_vars = {n: ("float32", *descriptions[n]) for n in written}
            zarr_vars[QA_OUTPUT] = ("uint16", "1", "QA flags, bits in the README")
            zarr_store = AtomicZarr(out_dir / ZARR_NAME, grid, chunk, zarr_vars, tags)
            # The same blocks as the GeoTIFFs': each block is computed once and written to both.
            for array, (k, dtype, _) in zip(zarr_store.arrays.values(), list(targets), strict=True):
                targets.append((k, dtype, array))

        tile = settings.tile_size
        flux_names = [n for n in HISTOGRAM_RANGES if n in variables]  # summarised variables
        index = [variables.index(n) for n in flux_names]
        # Tiles inside blocks are summarised by the block's own task; others need a rechunk.
        tiles_in_blocks = chunk % tile == 0
        # Every n-th pixel of the quick-look variables comes from the same blocks, in the summary
        # task (reading the written outputs back cost about 1 s at 4096 x 4096).
        from .quicklook import PANELS, decimation_factor

        panel_names = [name for name, *_ in PANELS] if settings.quicklook else []
        step = decimation_factor(grid.width, grid.height)
        panel_index = [variables.index(name) for name in panel_names]
        class_codes = table.codes
        tile_stats = []
        if tiles_in_blocks:
            # One task per block computes it, writes its windows and returns only its summary:
            # no block outlives its task, so memory does not grow with the number of blocks.
            write_block = partial(pass2_write_block, targets=targets)
            summary_parts = [
                dask.delayed(write_block, pure=False)(
                    ctx_task,
                    params_task,
                    loc,
                    (
                        variables,
                        class_codes,
                        (panel_index, step, loc[0][0], loc[1][0]) if panel_names else None,
                        (index, tile, loc[0][0], loc[1][0]),
                    ),
                )
                for row in locations
                for loc in row
            ]
            store = None
        else:
            stacked = da.block(
                [
                    [
                        da.from_delayed(
                            dask.delayed(blocks.pass2_block)(ctx_task, params_task, loc),
                            shape=(len(variables), loc[0][1] - loc[0][0], loc[1][1] - loc[1][0]),
                            dtype=np.float32,
                            meta=np.empty((0, 0, 0), np.float32),
                        )
                        for loc in row
                    ]
                    for row in locations
                ]
            )
            # A lock per file: GDAL handles are not thread-safe, but different files may be
            # written at once (AtomicRaster.__setitem__ holds its own lock, so lock=False here).
            arrays = [stacked[k].astype(dtype) for k, dtype, _ in targets]
            store = da.store(arrays, [t for *_, t in targets], lock=False, compute=False)
            tiled = stacked[index].rechunk((len(flux_names), tile, tile))
            tile_delayed = tiled.to_delayed(optimize_graph=False)[0]
            tile_stats = [[dask.delayed(tile_statistics)(b) for b in row] for row in tile_delayed]
            block_grid = stacked.to_delayed(optimize_graph=False)[0]
            summary_parts = [
                dask.delayed(block_summary)(
                    b,
                    variables,
                    class_codes,
                    (panel_index, step, r0, c0) if panel_names else None,
                )
                for row, r0 in zip(block_grid, row_edges[:-1], strict=True)
                for b, c0 in zip(row, col_edges[:-1], strict=True)
            ]
        summary_total = tree_reduce(summary_parts, combine_block_summaries)
        with TaskProgress(f"{scene.id} pass 2", settings.progress):
            _, tile_stats, summary = dask.compute(store, tile_stats, summary_total)
        class_hist, class_moments, qa_bit_counts, thumbs, block_tiles = summary
        if tiles_in_blocks:
            tile_rows_count = -(-grid.height // tile)
            tile_cols_count = -(-grid.width // tile)
            tile_stats = [
                [block_tiles[i, j] for j in range(tile_cols_count)] for i in range(tile_rows_count)
            ]
        panels = {}
        if panel_names:
            thumbnails = np.block(
                [[thumbs[r0, c0] for c0 in col_edges[:-1]] for r0 in row_edges[:-1]]
            )
            panels = dict(zip(panel_names, thumbnails, strict=True))
        timings["pass2_s"] = time.perf_counter() - t0
        release_free_memory()
        t0 = time.perf_counter()
        finish_all(writers)  # with cog: converted; all still under temporary names
        if settings.cog:
            timings["cog_s"] = time.perf_counter() - t0
        raster_info = {w.path.stem: (w.units, w.description, w.dtype, w.nodata) for w in writers}
        outputs = {w.path.stem: w.commit() for w in writers}
        writers = []
        if zarr_store is not None:
            outputs[zarr_store.path.name] = zarr_store.commit()
            zarr_store = None
    except RasterBudgetError:
        raise
    except OSError as err:
        # Input windows raise InputRasterError themselves; what is left is writing outputs.
        message = str(err).splitlines()[0] if str(err) else type(err).__name__
        raise OutputError(
            f"scene {scene.id}: writing outputs to {out_dir} failed ({message}); check free disk "
            "space and write permission, then run again (nothing incomplete was kept)."
        ) from err
    finally:
        for w in writers:
            w.abort()
        if zarr_store is not None:
            zarr_store.abort()
        env.__exit__(None, None, None)

    # ---------------- summaries, quick-look, manifest (small, written atomically)
    t0 = time.perf_counter()
    tile_stats = np.array([[np.asarray(s) for s in row] for row in tile_stats])
    tile_info = tile_layout(grid, tile)
    tiles = tile_rows(tile_stats, flux_names, tile_info)
    outputs["tiles.csv"] = write_text_atomic(out_dir / "tiles.csv", rows_to_csv(tiles))
    outputs["tiles.geojson"] = write_text_atomic(
        out_dir / "tiles.geojson", tiles_geojson(tiles, grid.crs.to_string())
    )
    pixel_area = abs(grid.transform.a * grid.transform.e)
    classes = class_rows(flux_names, class_hist, class_moments, table, class_codes, pixel_area)
    classes = [c for c in classes if c["valid_pixels"] > 0]
    outputs["classes.csv"] = write_text_atomic(out_dir / "classes.csv", rows_to_csv(classes))
    if settings.quicklook:
        from .quicklook import write_quicklook

        outputs["quicklook.png"] = write_quicklook(
            panels,
            out_dir / "quicklook.png",
            f"{scene.id}  {scene.acquired_utc:%Y-%m-%d %H:%M} UTC",
        )
    outputs.update(method.extra_outputs(reduced, calibrated.params, out_dir, scene.id))
    timings["summaries_s"] = time.perf_counter() - t0
    if settings.stac:
        t0 = time.perf_counter()
        outputs[f"{scene.id}.stac.json"] = write_stac(
            scene, grid, raster_info, outputs, out_dir, settings.cog
        )
        timings["stac_s"] = time.perf_counter() - t0
    timings["total_s"] = time.perf_counter() - started

    qa_counts = {b.name: int(n) for b, n in zip(QA, qa_bit_counts, strict=True)}
    manifest = {
        "scene_id": scene.id,
        "status": "complete",
        "fingerprint": fingerprint,
        "written_utc": dt.datetime.now(dt.UTC).isoformat(timespec="seconds"),
        "caution": CAUTION,
        "inputs": {
            role: {
                **info,
                # Remote inputs are not fetched a third time just to size and hash them.
                "bytes": local_size(info["path"]),
                "sha256": None if is_remote(info["path"]) else sha256_of(Path(info["path"])),
                "values_on_grid": value_summary.get(role),
            }
            for role, info in described.items()
        },
        "class_table": table.source,
        "grid": {
            "crs": grid.crs.to_string(),
            "transform": list(grid.transform)[:6],
            "width": grid.width,
            "height": grid.height,
        },
        "chunking": {"chunk_size": chunk, "tile_size": tile, "geotiff_block": block},
        "formats": {"cog": settings.cog, "stac": settings.stac, "zarr": settings.zarr},
        "parameters": json.loads(scene.model_dump_json()),
        "scene_constants": asdict(constants),
        "scene_facts": facts,
        "sensible_heat_method": scene.sensible_heat,
        "daily_scaling": scene.daily_scaling,
        "reference_et": {
            "surface": scene.reference_et.surface,
            "hourly_mm": constants.reference_et_hourly,
            "daily_mm": constants.reference_et_daily,
        },
        **method_facts,
        "qa_bits": {
            f"bit {int(math.log2(b))}": {
                "name": b.name,
                "meaning": QA_DESCRIPTIONS[b],
                "pixels": qa_counts.get(b.name, 0),
            }
            for b in QA
        },
        "scene_means_all": {
            name: (
                float(class_moments[:, v, 1].sum() / class_moments[:, v, 0].sum())
                if class_moments[:, v, 0].sum()
                else None
            )
            for v, name in enumerate(flux_names)
        },
        "scene_means": {c["name"]: {v: c.get(f"{v}_mean") for v in flux_names} for c in classes},
        "outputs": {k: str(v.relative_to(out_dir)) for k, v in outputs.items()},
        "timings_s": timings,
        "versions": versions(),
    }
    outputs["manifest.json"] = write_text_atomic(
        out_dir / "manifest.json", json.dumps(manifest, indent=2, default=json_default)
    )
    return SceneResult(scene_id=scene.id, out_dir=out_dir, outputs=outputs, manifest=manifest)
