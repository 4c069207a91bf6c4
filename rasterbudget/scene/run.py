"""One scene end to end: the two passes of DESIGN.md and the writing of every output.

Pass 1 reads the inputs once and reduces every block to the method's partial result (small
arrays); the method's calibration is then found on scalars. Pass 2 reads the inputs a second
time, computes every flux per block, and in ONE ``dask.compute`` writes all GeoTIFFs (one lock per
file, temporary names) and computes the tile and class summaries from the same blocks. Both
passes run through the blockwise engine (``io.engine.run_blockwise``).
"""

from __future__ import annotations

import logging
import shutil
import time
from contextlib import contextmanager
from dataclasses import dataclass, field, replace
from functools import partial
from pathlib import Path

import numpy as np

from .. import __version__
from ..catalog.classes import ClassTable
from ..catalog.variables import (
    MEMBER_FRACTIONS,
    QA_OUTPUT,
    VARIABLES,
    histogram_variables,
    scene_outputs,
)
from ..errors import OutputError, RasterBudgetError
from ..io.engine import BlockLayout, Target, Tiles, run_blockwise
from ..io.grid import GDAL_OPTIONS, input_source
from ..io.paths import output_folder
from ..io.writers import AtomicRaster, block_size_for, remove_stale_partials, write_text_atomic
from ..methods import get_method
from ..methods.base import Calibrated, CalibrationContext, SensibleHeatMethod
from ..methods.ensemble import sample_members
from ..physics import turbulence
from ..recipe import Recipe, Scene
from ..surface import ClassLookups, SceneConstants
from . import blocks
from .blocks import (
    BlockContext,
    Pass2Parameters,
    block_state,
    block_summary,
    check_input_values,
    combine_block_summaries,
    merge_input_stats,
)
from .constants import metric_pixel_size, scene_constants, with_weather_at_centre
from .inputs import SceneFiles, check_inputs, scene_files
from .manifest import scene_manifest, write_manifest, write_stac
from .preflight import check_room
from .summaries import (
    class_rows,
    rows_to_csv,
    tile_layout,
    tile_rows,
    tile_statistics,
    tiles_geojson,
)


@dataclass
class RunOptions:
    """Chunking and output choices for one run: the recipe's `[run]` table (`recipe.RunSettings`)
    with the command line's options applied."""

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


@dataclass
class SecondPass:
    """What pass 2 leaves behind besides the rasters."""

    written: tuple[str, ...]  # float rasters, in order
    summary: tuple  # class histograms, class moments, QA bit counts, quick-look pixels
    tiles: list[list[np.ndarray]]  # statistics per tile row and column
    panels: dict[str, np.ndarray]  # quick-look pixels per variable
    raster_info: dict[str, tuple]  # stem -> (units, description, dtype, nodata)
    outputs: dict[str, Path]  # committed files


LOG = logging.getLogger(__name__)


def run_scene(
    recipe: Recipe,
    scene: Scene,
    table: ClassTable,
    settings: RunOptions,
    fingerprint: str | None = None,
) -> SceneResult:
    """Run one scene end to end and return where its outputs are."""
    import rasterio

    timings: dict[str, float] = {}
    started = time.perf_counter()
    if settings.zarr:
        from ..io.cloud import require_zarr

        require_zarr()  # before any pass, not after minutes of work
    files = scene_files(recipe, scene, table)
    LOG.info("scene %s: inputs %s", scene.id, ", ".join(files.paths))
    described = check_inputs(files)
    # Gridded weather: scene-wide scalars (reference ET, the sun check, ...) take each raster's
    # value at the scene centre; pixels use their own values (surface_block, anchors, pass 2).
    gridded = frozenset(scene.overpass.gridded())
    scene, centre_values = with_weather_at_centre(scene, files.grid, files.paths)
    constants, facts = scene_constants(scene, files.grid)
    facts["gridded_weather_at_centre"] = centre_values
    if files.product is not None:
        facts["product"] = files.product
        stated = files.product.get("sun_elevation_deg")
        if stated is not None:  # the product's own sun, against SPA's at the scene centre
            facts["sun"]["product_elevation_deg"] = stated
            facts["sun"]["elevation_minus_product_deg"] = facts["sun"]["elevation_deg"] - stated
    method = get_method(scene.sensible_heat)
    layout = BlockLayout.over(files.grid, settings.chunk_size)
    out_dir = output_folder(settings.out_dir, scene.id)
    check_room(
        scene.id,
        files.grid.width * files.grid.height,
        len(
            scene_outputs(
                settings.write_components,
                constants.reference_et_hourly is not None,
                bool(scene.uncertainty.members),
            )
        )
        + 1,
        layout.chunk,
        scene.uncertainty.members,
        out_dir,
    )
    remove_stale_partials(out_dir)
    # the old manifest no longer vouches for the folder: a failure below leaves "failed"
    (out_dir / "manifest.json").unlink(missing_ok=True)
    outputs: dict[str, Path] = {}
    try:
        with rasterio.Env(**GDAL_OPTIONS), _outputs_failing_as(scene.id, out_dir):
            ctx = _block_context(scene, files, constants, ClassLookups.from_table(table), facts)
            with _carried_screens(ctx, layout, out_dir) as carried:
                with _timed(timings, "pass1_s"):
                    reduced, input_stats = _first_pass(
                        ctx, carried, layout, method, scene.id, settings.progress
                    )
                    value_summary = check_input_values(input_stats, ctx.sources)
                    calibrated = _calibrate(method, reduced, scene, ctx, gridded)
                with _timed(timings, "pass2_s"):
                    if carried is not None:  # pass 2 reads pass 1's results, not a halo
                        carried.finish()
                        ctx = replace(ctx, halo=0, halo_roles=(), carried=str(carried.partial))
                    second = _second_pass(ctx, layout, calibrated, scene, table, settings, out_dir)
            outputs |= second.outputs
            with _timed(timings, "summaries_s"):
                _, classes = _write_summaries(
                    scene, files, table, settings, second, out_dir, outputs
                )
                outputs |= method.extra_outputs(reduced, calibrated.params, out_dir, scene.id)
            if settings.stac:
                with _timed(timings, "stac_s"):
                    outputs[f"{scene.id}.stac.json"] = write_stac(
                        scene, files.grid, second.raster_info, outputs, out_dir, settings.cog
                    )
            timings["total_s"] = time.perf_counter() - started
            manifest = scene_manifest(
                scene,
                table,
                files,
                described,
                value_summary,
                constants,
                facts,
                calibrated.facts,
                layout,
                settings,
                second,
                classes,
                outputs,
                out_dir,
                fingerprint,
                timings,
            )
            outputs["manifest.json"] = write_manifest(out_dir, manifest)
    except BaseException as err:
        mark_failed(scene.id, out_dir, outputs, err)
        raise
    return SceneResult(scene_id=scene.id, out_dir=out_dir, outputs=outputs, manifest=manifest)


def mark_failed(scene_id: str, out_dir: Path, written: dict, err: BaseException) -> None:
    """A failed scene keeps nothing of its run under a final name and no temporary file; where
    outputs of an earlier run remain, a manifest says the scene failed, so nothing presents them
    as current (best effort: the disk may be full)."""
    import datetime as dt
    import json

    for path in written.values():
        path = Path(path)
        if path.is_dir() and not path.is_symlink():
            shutil.rmtree(path, ignore_errors=True)
        else:
            path.unlink(missing_ok=True)
    remove_stale_partials(out_dir)
    if not any(out_dir.iterdir()):  # nothing older to invalidate: leave nothing at all
        return
    failed = {
        "scene_id": scene_id,
        "status": "failed" if not isinstance(err, KeyboardInterrupt) else "interrupted",
        "error": str(err).splitlines()[0] if str(err) else type(err).__name__,
        "written_utc": dt.datetime.now(dt.UTC).isoformat(timespec="seconds"),
    }
    try:
        write_text_atomic(out_dir / "manifest.json", json.dumps(failed, indent=2))
    except OSError:
        remove_stale_partials(out_dir)


@contextmanager
def _timed(timings: dict[str, float], key: str):
    t0 = time.perf_counter()
    yield
    timings[key] = time.perf_counter() - t0
    LOG.info("%s %.2f s", key.removesuffix("_s").replace("_", " "), timings[key])


@contextmanager
def _outputs_failing_as(scene_id: str, out_dir: Path):
    """An OSError while the passes write is an OutputError naming the folder."""
    try:
        yield
    except RasterBudgetError:
        raise
    except OSError as err:
        # Input windows raise InputRasterError themselves; what is left is writing outputs.
        message = str(err).splitlines()[0] if str(err) else type(err).__name__
        raise OutputError(
            f"scene {scene_id}: writing outputs to {out_dir} failed ({message}); check free disk "
            "space and write permission, then run again (nothing incomplete was kept)."
        ) from err


def _block_context(
    scene: Scene,
    files: SceneFiles,
    constants: SceneConstants,
    lookups: ClassLookups,
    facts: dict,
) -> BlockContext:
    """Everything a block task needs, small and picklable."""
    grid, anchors, overpass = files.grid, scene.anchors, scene.overpass
    screened = get_method(scene.sensible_heat).anchor_screens  # the method's neighbourhood screens
    return BlockContext(
        grid=grid,
        constants=constants,
        lookups=lookups,
        sources=tuple(
            input_source(path, role, grid, files.specs.get(role))
            for role, path in files.paths.items()
        ),
        method=scene.sensible_heat,
        remap=tuple(sorted(files.remap.items())),
        metric_pixel_size=metric_pixel_size(grid, facts["centre_lat"]),
        wind_profile=(
            overpass.wind_height_m,
            anchors.station_roughness_m,
            anchors.blending_height_m,
        ),
        blending_wind_speed=float("nan")
        if overpass.wind_speed_m_s is None
        else turbulence.wind_speed_at_blending_height(
            overpass.wind_speed_m_s,
            overpass.wind_height_m,
            anchors.station_roughness_m,
            anchors.blending_height_m,
        ),
        mask_values=files.mask_values,
        mask_bits=files.mask_bits,
        derive_facts=tuple(sorted((files.derive_facts or {}).items())),
        mask_buffer=files.mask_buffer,
        # the anchor method screens candidates by their neighbourhood
        halo=constants.screens.halo(files.mask_buffer) if screened else files.mask_buffer,
        halo_roles=halo_roles(files.paths, files.derive_facts, files.mask_buffer),
        anchor_screens=screened,
        member_offsets=tuple(m.offsets for m in sample_members(scene.uncertainty)),
    )


#: The inputs the neighbourhood work reads (the anchor screens: surface temperature, NDVI and
#: the cloud mask): when each is given as a raster, only they need a halo.
NEIGHBOURHOOD_ROLES = ("surface_temperature", "ndvi", "cloud_mask")


def halo_roles(paths: dict, derive_facts, mask_buffer: int) -> tuple[str, ...]:
    """The inputs to read with a halo, or () for all of them: all when any input is derived
    from a product's bands (its surface temperature or NDVI is then made from several bands,
    each needing the halo) or a derived cloud mask is buffered."""
    from ..catalog.inputs import INPUTS

    derived = (
        derive_facts
        or mask_buffer
        or any(INPUTS[role].section == "product" for role in paths if role in INPUTS)
    )
    return () if derived else tuple(r for r in NEIGHBOURHOOD_ROLES if r in paths)


@contextmanager
def _carried_screens(ctx: BlockContext, layout: BlockLayout, out_dir: Path):
    """The scratch raster pass 1 fills with its neighbourhood results for pass 2 (None when
    nothing is read with a halo); removed afterwards, whatever happens."""
    if not ctx.halo:
        yield None
        return
    writer = AtomicRaster(
        out_dir / CARRIED_SCRATCH,
        ctx.grid,
        "uint8",
        None,
        block_size_for(layout.chunk),
        "carried",
        "1",
        "pass 1's neighbourhood screens for pass 2 (scratch)",
    )
    try:
        yield writer
    finally:
        writer.abort()  # never committed: its temporary file goes


#: The scratch raster's name in a scene's output folder (its temporary name ends in .partial,
#: so a crashed run's copy is cleared with the other partial files).
CARRIED_SCRATCH = "pass1_screens.tif"


def _first_pass(
    ctx: BlockContext,
    carried: AtomicRaster | None,
    layout: BlockLayout,
    method: SensibleHeatMethod,
    label: str,
    bar: bool,
):
    """Pass 1: the method's reduction and the inputs' value statistics, over every block. Each
    task reads its own windows, so input blocks are never read far ahead of their use; with
    ``carried``, each also writes its neighbourhood results there for pass 2."""
    from ..io.progress import TaskProgress

    result = run_blockwise(
        layout,
        blocks.pass1_block,
        args=(ctx, carried),
        combine=lambda a, b: (method.combine(a[0], b[0]), merge_input_stats(a[1], b[1])),
        progress=lambda: TaskProgress(f"{label} pass 1", bar),
    )
    return result.summary


def _pixel_state(ctx: BlockContext, row: int, col: int) -> dict:
    """The surface state of one pixel (a given anchor's)."""
    return block_state(ctx, slice(row, row + 1), slice(col, col + 1))


def _calibrate(
    method: SensibleHeatMethod, reduced, scene: Scene, ctx: BlockContext, gridded: frozenset
) -> Calibrated:
    return method.calibrate(
        reduced,
        CalibrationContext(
            scene=scene,
            settings=method.settings(scene),
            grid=ctx.grid,
            constants=ctx.constants,
            lookups=ctx.lookups,
            member_offsets=ctx.member_offsets,
            gridded_weather=gridded,
            blending_wind_speed=ctx.blending_wind_speed,
            pixel_state=partial(_pixel_state, ctx),
        ),
    )


def _second_pass(
    ctx: BlockContext,
    layout: BlockLayout,
    calibrated: Calibrated,
    scene: Scene,
    table: ClassTable,
    settings: RunOptions,
    out_dir: Path,
) -> SecondPass:
    """Pass 2: every flux per block, written to every output, with the tile and class summaries
    and the quick-look pixels, in one compute; the outputs committed, or none."""
    from ..io.progress import TaskProgress
    from .quicklook import PANELS, decimation_factor

    written = scene_outputs(
        components=settings.write_components,
        reference=ctx.constants.reference_et_hourly is not None,
        ensemble=bool(calibrated.members),
    )
    variables = (*written, QA_OUTPUT, "land_cover_code")
    writers, targets = _open_outputs(written, variables, scene, settings, out_dir, layout, ctx)
    # the members' reference-ET fractions, one band each after the variables: what a season
    # needs to carry every member through to its totals
    member_bands = (
        tuple(f"member_{k + 1:02d}" for k in range(len(calibrated.members)))
        if calibrated.members and ctx.constants.reference_et_hourly is not None
        else ()
    )
    if member_bands:
        stack = AtomicRaster.for_variable(
            MEMBER_FRACTIONS,
            out_dir,
            ctx.grid,
            block_size_for(layout.chunk),
            {"scene_id": scene.id, "members": len(member_bands)},
            bands=member_bands,
            cog=settings.cog,
            compression=settings.compression,
        )
        writers.append(stack)
        last = len(variables)
        targets.append(Target(slice(last, last + len(member_bands)), stack.dtype, stack))
    summarised = histogram_variables(variables)
    panel_names = [name for name, *_ in PANELS] if settings.quicklook else []
    step = decimation_factor(ctx.grid.width, ctx.grid.height)
    thumbnail = ([variables.index(n) for n in panel_names], step) if panel_names else None
    result = run_blockwise(
        layout,
        blocks.pass2_block,
        args=(
            ctx,
            Pass2Parameters(
                variables=variables,
                method_params=calibrated.params,
                members=calibrated.members,
                member_fractions=bool(member_bands),
            ),
        ),
        layers=len(variables) + len(member_bands),
        dtype=np.float32,
        targets=targets,
        summarise=partial(
            block_summary, variables=variables, class_codes=table.codes, thumbnail=thumbnail
        ),
        combine=combine_block_summaries,
        tiles=Tiles([variables.index(n) for n in summarised], settings.tile_size, tile_statistics),
        outputs=writers,
        progress=lambda: TaskProgress(f"{scene.id} pass 2", settings.progress),
    )
    thumbs = result.summary[3]
    panels = {}
    if panel_names:
        pixels = np.block(
            [[thumbs[r0, c0] for c0 in layout.col_edges[:-1]] for r0 in layout.row_edges[:-1]]
        )
        panels = dict(zip(panel_names, pixels, strict=True))
    rasters = [w for w in writers if isinstance(w, AtomicRaster)]
    outputs = {w.path.stem: w.path for w in rasters}
    outputs |= {w.path.name: w.path for w in writers if not isinstance(w, AtomicRaster)}
    return SecondPass(
        written=written,
        summary=result.summary,
        tiles=result.tiles,
        panels=panels,
        raster_info={w.path.stem: (w.units, w.description, w.dtype, w.nodata) for w in rasters},
        outputs=outputs,
    )


def _open_outputs(written, variables, scene, settings, out_dir, layout, ctx) -> tuple[list, list]:
    """A GeoTIFF writer per written variable and the QA flags (and a Zarr store), and where each
    layer of a pass-2 block goes."""
    grid = ctx.grid
    block = block_size_for(layout.chunk)
    tags = {
        "scene_id": scene.id,
        "acquired_utc": scene.acquired_utc.isoformat(),
        "software": f"rasterbudget {__version__}",
    }
    names = (*written, QA_OUTPUT)
    writers, targets = [], []
    for name in names:
        writer = AtomicRaster.for_variable(
            name, out_dir, grid, block, tags, cog=settings.cog, compression=settings.compression
        )
        writers.append(writer)
        targets.append(Target(variables.index(name), writer.dtype, writer))
    if settings.zarr:
        from ..io.cloud import ZARR_NAME, AtomicZarr

        zarr_vars = {
            n: (VARIABLES[n].dtype, VARIABLES[n].units, VARIABLES[n].description) for n in names
        }
        store = AtomicZarr(out_dir / ZARR_NAME, grid, layout.chunk, zarr_vars, tags)
        # The same blocks as the GeoTIFFs': each block is computed once and written to both.
        for array, target in zip(store.arrays.values(), list(targets), strict=True):
            targets.append(Target(target.layer, target.dtype, array))
        writers.append(store)
    return writers, targets


def _write_summaries(
    scene: Scene,
    files: SceneFiles,
    table: ClassTable,
    settings: RunOptions,
    second: SecondPass,
    out_dir: Path,
    outputs: dict[str, Path],
) -> tuple[dict[str, Path], list[dict]]:
    """tiles.csv, tiles.geojson, classes.csv and the quick-look (small, written atomically),
    each added to ``outputs`` as it is written; returns them and the per-class rows."""
    grid = files.grid
    names = histogram_variables((*second.written, QA_OUTPUT))
    tile_stats = np.array([[np.asarray(s) for s in row] for row in second.tiles])
    tiles = tile_rows(tile_stats, names, tile_layout(grid, settings.tile_size))
    outputs["tiles.csv"] = write_text_atomic(out_dir / "tiles.csv", rows_to_csv(tiles))
    outputs["tiles.geojson"] = write_text_atomic(
        out_dir / "tiles.geojson", tiles_geojson(tiles, grid.crs.to_string())
    )
    class_hist, class_moments = second.summary[:2]
    pixel_area = abs(grid.transform.a * grid.transform.e)
    classes = class_rows(names, class_hist, class_moments, table, table.codes, pixel_area)
    classes = [c for c in classes if c["valid_pixels"] > 0]
    outputs["classes.csv"] = write_text_atomic(out_dir / "classes.csv", rows_to_csv(classes))
    if settings.quicklook:
        from .quicklook import write_quicklook

        outputs["quicklook.png"] = write_quicklook(
            second.panels,
            out_dir / "quicklook.png",
            f"{scene.id}  {scene.acquired_utc:%Y-%m-%d %H:%M} UTC",
        )
    return outputs, classes
