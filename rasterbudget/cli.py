"""Command line: a thin layer over recipe, pipeline and demo; heavy imports happen in commands."""

from __future__ import annotations

import functools
import sys
import warnings
from pathlib import Path

import click

from .errors import RasterBudgetError

debug_option = click.option(
    "--debug", is_flag=True, help="Show the full traceback on errors (for bug reports)."
)


quiet_option = click.option(
    "--quiet", "-q", is_flag=True, help="No progress bars and no report lines; errors only."
)
verbose_option = click.option(
    "--verbose",
    "-v",
    count=True,
    help="Log what each step does and how long it takes (-vv: more detail).",
)
threads_option = click.option(
    "--threads",
    type=click.IntRange(1, 1024),
    help="At most this many threads for the blocks (default: one per core).",
)

#: Set by the running command: report lines are printed unless --quiet.
QUIET = {"on": False}


def say(message: str, err: bool = False) -> None:
    """One line of the command's report (not with --quiet), printed so that a progress bar on
    the terminal is cleared first and redrawn after it: lines and bars never interleave."""
    if QUIET["on"]:
        return
    from tqdm import tqdm

    with tqdm.external_write_mode(file=sys.stderr):
        click.echo(message, err=err)


def _configure_logging(verbose: int, quiet: bool) -> None:
    import logging

    level = (
        logging.WARNING
        if quiet or not verbose
        else (logging.INFO, logging.DEBUG)[min(verbose, 2) - 1]
    )
    logging.basicConfig(format="%(asctime)s %(name)s: %(message)s", datefmt="%H:%M:%S")
    logging.getLogger("rasterbudget").setLevel(level)


def command(func):
    """A subcommand of ``main`` with the options every command shares (``--debug``, ``--quiet``,
    ``--verbose``, ``--threads``, defined here once); a RasterBudgetError becomes one line on
    standard error and exit status 2."""
    import contextlib
    import inspect as signature_of

    wants_quiet = "quiet" in signature_of.signature(func).parameters

    @functools.wraps(func)
    def wrapper(*args, debug: bool, quiet: bool, verbose: int, threads: int | None, **kwargs):
        QUIET["on"] = quiet
        _configure_logging(verbose, quiet)
        if wants_quiet:
            kwargs["quiet"] = quiet
        cap = contextlib.nullcontext()
        if threads is not None:  # dask's local threaded scheduler (a cluster has its own)
            import dask

            cap = dask.config.set(num_workers=threads)
        try:
            with warnings.catch_warnings(), cap:
                if not debug:  # numpy's "mean of empty slice" and the like are not messages
                    warnings.simplefilter("ignore", RuntimeWarning)
                return func(*args, **kwargs)
        except RasterBudgetError as err:
            _fail(err, debug)
        except KeyboardInterrupt:
            if debug:
                raise
            click.echo(
                "rasterbudget: interrupted; run the same command again to resume (finished "
                "scenes are kept, the interrupted one is redone; no partial file is left).",
                err=True,
            )
            sys.exit(EXIT_INTERRUPTED)

    for option in (threads_option, verbose_option, quiet_option, debug_option):
        wrapper = option(wrapper)
    return main.command()(wrapper)


def chunk_size_option(default: int | None, help: str):
    """``--chunk-size``, the same range for every command."""
    return click.option(
        "--chunk-size",
        type=click.IntRange(64, 16384),
        default=default,
        show_default=default is not None,
        help=help,
    )


def tile_size_option(default: int | None, help: str):
    """``--tile-size``, the same range for every command."""
    return click.option(
        "--tile-size",
        type=click.IntRange(16, 16384),
        default=default,
        show_default=default is not None,
        help=help,
    )


#: Exit statuses (README, "Exit status"): all done; some scenes of a batch failed; refused (the
#: recipe, an input, the output folder, or the one scene of a recipe); interrupted (128 + SIGINT).
EXIT_DONE, EXIT_SOME_FAILED, EXIT_REFUSED, EXIT_INTERRUPTED = 0, 1, 2, 130


def chosen_scenes(recipe, patterns: tuple[str, ...]) -> set[str]:
    """The ids of the recipe's scenes that match any of ``patterns`` (shell patterns); each
    pattern must match at least one."""
    import fnmatch

    ids = [s.id for s in recipe.scene]
    chosen = set()
    for pattern in patterns:
        matched = fnmatch.filter(ids, pattern)
        if not matched:
            shown = ", ".join(ids[:6]) + (" ..." if len(ids) > 6 else "")
            raise RasterBudgetError(
                f"--scene {pattern!r} matches no scene of the recipe (its scenes: {shown})."
            )
        chosen.update(matched)
    return chosen


def _fail(err: Exception, debug: bool) -> None:
    if debug:
        raise err
    click.echo(f"rasterbudget: error: {err}", err=True)
    sys.exit(EXIT_REFUSED)


def _recipe_and_classes(path: Path):
    """The validated recipe and the class table it names."""
    from .recipe import load_recipe
    from .workflow import recipe_class_table

    parsed = load_recipe(path)
    return parsed, recipe_class_table(parsed)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(package_name="rasterbudget")
def main() -> None:
    """Surface energy balance and actual evapotranspiration from satellite rasters.

    Give a recipe (TOML) naming each scene's albedo, surface-temperature and land-cover rasters
    and its weather; get per-pixel net radiation, ground, sensible and latent heat flux,
    evaporative fraction and ET as GeoTIFFs with tile and class summaries.

    Estimates carry uncertainty and do not replace local regulations or licensed professional
    judgement in water-rights, irrigation or drought decisions.
    """


@command
@click.argument("recipe", type=click.Path(dir_okay=False, path_type=Path))
@click.option(
    "--out",
    "out_dir",
    type=click.Path(file_okay=False, path_type=Path),
    help="Output folder (default: run.out in the recipe, relative to the recipe).",
)
@chunk_size_option(
    None,
    "Edge of the square pixel blocks processed at once; sets peak memory "
    "(about 60 bytes per pixel per thread). Rounded up to a multiple of 16.",
)
@tile_size_option(None, "Edge in pixels of the tiles summarised in tiles.csv / tiles.geojson.")
@click.option(
    "--components",
    is_flag=True,
    default=None,
    help="Also write shortwave_in, longwave_in, longwave_out, net_radiation_daily.",
)
@click.option("--no-quicklook", is_flag=True, help="Skip the quick-look PNG.")
@click.option(
    "--scene",
    "scene_patterns",
    multiple=True,
    metavar="ID",
    help="Run only the scenes with this id (repeat; shell patterns such as 'basin_2025*' "
    "work). Seasons then use the other scenes' complete outputs, or fail alone.",
)
@click.option(
    "--force",
    is_flag=True,
    help="Redo every scene, also those whose outputs are complete and up to date.",
)
@click.option(
    "--scheduler",
    metavar="ADDRESS",
    help="Run on an existing dask.distributed scheduler, e.g. tcp://10.0.0.5:8786.",
)
@click.option(
    "--workers",
    type=click.IntRange(1, 1024),
    help="Start a local dask.distributed cluster of this many worker processes.",
)
def run(
    recipe: Path,
    out_dir: Path | None,
    chunk_size: int | None,
    tile_size: int | None,
    components: bool | None,
    no_quicklook: bool,
    scene_patterns: tuple[str, ...],
    force: bool,
    scheduler: str | None,
    workers: int | None,
    quiet: bool,
) -> None:
    """Run every scene of RECIPE and write its outputs to OUT/<scene id>/.

    Each scene folder gets one GeoTIFF per variable (net_radiation, ground_heat_flux,
    sensible_heat_flux, latent_heat_flux in W m-2; evaporative_fraction; et_hourly in mm h-1;
    et_daily in mm d-1), qa_flags.tif (bits in the README), tiles.csv, tiles.geojson,
    classes.csv, quicklook.png, <scene id>.stac.json (a STAC Item) and manifest.json (inputs,
    parameters, anchors, timings). [run] cog = true makes the GeoTIFFs Cloud Optimized;
    [run] zarr = true adds outputs.zarr.

    \b
    Examples:
      rasterbudget run workflows/demo.toml
      rasterbudget run my_region.toml --out results --chunk-size 512
    """
    import contextlib

    if scheduler is not None and workers is not None:
        raise RasterBudgetError("give --scheduler or --workers, not both.")
    cluster = contextlib.nullcontext()
    if scheduler is not None or workers is not None:
        from .io.cluster import dask_cluster

        cluster = dask_cluster(scheduler, workers)
    with cluster:
        _run(
            recipe,
            out_dir,
            chunk_size,
            tile_size,
            components,
            no_quicklook,
            quiet,
            force,
            scene_patterns,
        )


def _run(
    recipe: Path,
    out_dir: Path | None,
    chunk_size: int | None,
    tile_size: int | None,
    components: bool | None,
    no_quicklook: bool,
    quiet: bool,
    force: bool,
    scene_patterns: tuple[str, ...] = (),
) -> None:
    """The run command's work (inside the chosen dask scheduler)."""
    from .methods import get_method
    from .workflow import run_options, run_recipe

    parsed, table = _recipe_and_classes(recipe)
    only = chosen_scenes(parsed, scene_patterns) if scene_patterns else None
    settings = run_options(
        parsed,
        out_dir,
        chunk_size,
        tile_size,
        components,
        quicklook=not no_quicklook,
        progress=not quiet and sys.stderr.isatty(),
    )

    def scene_line(outcome) -> None:
        if quiet and outcome.status != "failed":
            return
        if outcome.status == "failed":
            if len(parsed.scene) > 1:  # a single scene's error is the one final line
                QUIET["on"] = False  # a failure is always said
                say(f"{outcome.scene_id}: FAILED: {outcome.message}", err=True)
                QUIET["on"] = quiet
            return
        m = outcome.manifest
        how = get_method(m["sensible_heat_method"]).summary(m)
        verb = "done" if outcome.status == "done" else "skipped (complete, up to date)"
        say(
            f"{outcome.scene_id}: {verb} in {outcome.seconds:.1f} s -> "
            f"{settings.out_dir / outcome.scene_id}  ({how})"
        )

    def season_line(done: dict) -> None:
        if not quiet:
            say(
                f"{done['season_id']}: season {done['start']} to {done['end']} from "
                f"{len(done['scenes'])} scenes, mean {done['mean_et_season_mm']:.0f} mm "
                f"(reference ET {done['reference_et_total_mm']:.0f} mm) -> "
                f"{settings.out_dir / done['season_id']}"
            )

    def season_failed(season_id: str, message: str) -> None:
        click.echo(f"{season_id}: FAILED: {message}", err=True)

    done = run_recipe(
        parsed,
        table,
        settings,
        scene_line,
        season_line,
        force=force,
        on_season_failed=season_failed,
        only=only,
    )
    failed = [o for o in done.scenes if o.status == "failed"]
    if len(done.scenes) == 1 and failed and not parsed.season:  # its reason is the one line
        raise RasterBudgetError(failed[0].message)
    if not quiet:
        for path in done.zone_tables:
            say(f"zones: {path}")
        if done.report is not None:
            say(f"report: {done.report}")
    if failed or done.failed_seasons:
        parts = [f"{len(failed)} of {len(done.scenes)} scenes failed"] if failed else []
        if done.failed_seasons:
            parts.append(f"{len(done.failed_seasons)} of {len(parsed.season)} seasons failed")
        click.echo(
            f"rasterbudget: {', '.join(parts)} (see {settings.out_dir / 'batch.csv'} and the "
            "FAILED lines above)",
            err=True,
        )
        sys.exit(EXIT_SOME_FAILED)


@command
@click.argument("current", type=click.Path(dir_okay=False, path_type=Path))
@click.option(
    "--previous",
    type=click.Path(dir_okay=False, path_type=Path),
    help="Raster to compare with: writes difference and percent_change.",
)
@click.option(
    "--baseline",
    type=click.Path(dir_okay=False, path_type=Path),
    multiple=True,
    help="A baseline raster (repeat, at least two): writes standardized_anomaly and "
    "drought_category with the share of area in each category.",
)
@click.option(
    "--out",
    "out_dir",
    type=click.Path(file_okay=False, path_type=Path),
    help="Output folder (required when CURRENT is a raster; overrides compare.out of a recipe).",
)
@click.option(
    "--zones",
    "zones_path",
    type=click.Path(dir_okay=False, path_type=Path),
    help="GeoJSON polygons: per-zone means, volumes and category shares (zones.csv).",
)
@click.option(
    "--zone-id",
    default="zone_id",
    show_default=True,
    help="Property of each polygon that holds its zone id.",
)
@chunk_size_option(512, "Edge of the blocks processed at once.")
@tile_size_option(256, "Edge of the tiles of tiles.csv.")
def compare(
    current: Path,
    previous: Path | None,
    baseline: tuple[Path, ...],
    out_dir: Path | None,
    zones_path: Path | None,
    zone_id: str,
    chunk_size: int,
    tile_size: int,
) -> None:
    """Compare CURRENT (e.g. a season's et_season.tif) with another period or a baseline, or run
    the comparisons of a comparison recipe (CURRENT ending in .toml).

    All rasters must be on one grid (outputs of recipes with the same target grid). Writes the
    comparison rasters, tiles.csv/geojson, categories.csv, zones.csv/geojson (with --zones or the
    recipe's [compare.zones]), compare.json and, for a recipe, report.html.

    \b
    Examples:
      rasterbudget compare workflows/demo_compare.toml
      rasterbudget compare summer_2026/et_season.tif --previous summer_2025/et_season.tif \\
          --out change
      rasterbudget compare summer_2026/et_season.tif --baseline y2021.tif \\
          --baseline y2022.tif --baseline y2023.tif --out anomaly --zones fields.geojson
    """
    from .season.compare import run_compare

    if current.suffix.lower() == ".toml":
        if previous is not None or baseline or zones_path is not None:
            raise RasterBudgetError(
                f"{current} is a comparison recipe: give --previous, --baseline and --zones "
                "in its [[comparison]] and [compare.zones] tables, not on the command line."
            )
        from .recipe import load_compare_recipe
        from .workflow import run_compare_recipe

        results = run_compare_recipe(load_compare_recipe(current), out_dir)
    else:
        if out_dir is None:
            raise RasterBudgetError("give --out: the folder for the comparison outputs.")
        zones = (zones_path, zone_id) if zones_path is not None else None
        summary = run_compare(
            current, out_dir, previous, list(baseline), chunk_size, tile_size, zones
        )
        results = [(out_dir, summary)]
    for folder, summary in results:
        wrote = ", ".join(summary["outputs"])
        say(f"{summary['comparison']}: wrote {wrote} to {folder}")
        for row in summary.get("categories", []):
            say(f"  {row['category']:15s} {row['share_of_valid_area']:7.1%}")


@command
@click.argument("recipe", type=click.Path(dir_okay=False, path_type=Path))
@chunk_size_option(None, "Chunk size the run will use (for the memory estimate).")
def inspect(recipe: Path, chunk_size: int | None) -> None:
    """Check RECIPE's inputs before a long run, on a decimated sample of each raster.

    Prints per input its CRS, resolution, extent, overlap with the target grid, dtype, nodata,
    scale/offset, value range and share of valid pixels; per land-cover class the share of
    albedos outside the class range; the anchor candidates per role; the sun elevation; and a
    rough estimate of run time and peak memory. Exits non-zero, with the run's own message,
    where a run would fail.

    \b
    Example:
      rasterbudget inspect workflows/demo.toml
    """
    from .workflow import inspect_recipe

    parsed, table = _recipe_and_classes(recipe)
    lines, problems = inspect_recipe(recipe, table, parsed, chunk_size or parsed.run.chunk_size)
    for line in lines:
        say(line)
    if len(problems) == 1:  # the run's own message, as the run would print it
        raise RasterBudgetError(problems[0][1])
    if problems:
        raise RasterBudgetError(
            f"{len(problems)} of {len(parsed.scene)} scenes would fail "
            f"({', '.join(sid for sid, _ in problems)}); see the PROBLEM lines above."
        )


@command
@click.option(
    "--out",
    "out_dir",
    type=click.Path(file_okay=False, path_type=Path),
    default=Path("tiny_rasters"),
    show_default=True,
    help="Folder to write into.",
)
def demo(out_dir: Path) -> None:
    """Regenerate the invented Kessendry Basin demo rasters (deterministic).

    \b
    Example:
      rasterbudget demo --out tiny_rasters
    """
    from .demo import (
        SERIES_YEARS,
        make_daily_weather,
        make_level2_product,
        make_mixed_grid_inputs,
        make_season_series,
        make_tiny_rasters,
        make_zones,
    )
    from .io.paths import output_folder

    output_folder(out_dir)
    files = make_tiny_rasters(out_dir)
    files += make_mixed_grid_inputs(out_dir)
    files += make_level2_product(out_dir)
    files += make_season_series(out_dir)
    files += [make_daily_weather(out_dir, year) for year in SERIES_YEARS]
    files.append(make_zones(out_dir))
    say(f"wrote {len(files)} files to {out_dir}")


@command
@click.option(
    "--size",
    type=click.IntRange(256, 65536),
    default=4096,
    show_default=True,
    help="Edge of the square synthetic scene [pixels].",
)
@chunk_size_option(512, "Chunk edge of the pipeline and the floor.")
@click.option("--repeat", type=click.IntRange(1, 20), default=3, show_default=True)
@click.option(
    "--whole-array/--no-whole-array",
    default=None,
    help="Also time the whole-array version (default: only up to 4096 pixels on a side).",
)
@click.option(
    "--keep",
    type=click.Path(file_okay=False, path_type=Path),
    help="Keep the synthetic scene and outputs in this folder (default: a temporary one).",
)
@click.option(
    "--workers",
    type=click.IntRange(1, 1024),
    help="Run the pipeline phase on a local dask.distributed cluster of N worker processes.",
)
def bench(
    size: int,
    chunk_size: int,
    repeat: int,
    whole_array: bool | None,
    keep: Path | None,
    workers: int | None,
) -> None:
    """Time the pipeline against the raw read/write floor on a synthetic scene.

    Prints a table and, last, one JSON line: wall seconds, megapixels per second and peak
    resident memory of the floor (read every input, write every output, no physics), the
    two-pass floor (a read-only pass over every input first, as the methods' pass 1), the
    pipeline, and the whole-array version; and the ratios pipeline / floor, pipeline / two-pass
    floor and whole-array / pipeline. See the README's Performance section for how to read it.

    \b
    Example:
      rasterbudget bench --size 4096 --repeat 3
    """
    import json

    from .bench import format_table, run_bench

    result = run_bench(size, chunk_size, repeat, whole_array, keep=keep, workers=workers or 0)
    click.echo(format_table(result))
    click.echo(json.dumps(result))


if __name__ == "__main__":  # pragma: no cover
    main()
