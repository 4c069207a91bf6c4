"""Whole recipes: the batch of scenes, then season totals, zone tables and the report; and the
comparisons of a comparison recipe with theirs.

Batches of scenes: run each, keep going past failures, skip what is complete, summarise.

A scene is complete when its ``manifest.json`` says so and its fingerprint - a hash of the
scene's parameters, the class table, the run settings that shape outputs, the software version and
each input's size and modification time - matches the current one. A second run therefore skips
finished scenes and redoes those whose inputs or parameters changed.
"""

from __future__ import annotations

import contextlib
import datetime as dt
import hashlib
import json
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from . import __version__
from .catalog.classes import ClassTable
from .errors import OutputError, RasterBudgetError
from .io.paths import is_remote, output_folder
from .io.writers import write_text_atomic
from .methods import METHODS
from .recipe import Recipe, Scene
from .scene.inputs import input_paths
from .scene.run import RunOptions, mark_failed, run_scene
from .scene.summaries import rows_to_csv

BATCH_TABLE = "batch.csv"


def scene_fingerprint(recipe: Recipe, scene: Scene, table: ClassTable, settings: RunOptions) -> str:
    """Hash of everything that decides a scene's outputs (see module docstring)."""
    # every input file by role: given, gridded weather, a product's bands and pixel QA
    files = {role: _file_identity(path) for role, path in input_paths(recipe, scene)[0].items()}
    if scene.anchors.hot_soil is not None:  # the rain table of the hot anchor's soil balance
        files["hot_soil_table"] = _file_identity(scene.anchors.hot_soil.table)
    payload = {
        "version": __version__,
        "scene": json.loads(scene.model_dump_json()),
        "files": files,
        "class_table": [c.__dict__ for c in table.classes],
        "settings": {
            "write_components": settings.write_components,
            "quicklook": settings.quicklook,
            "tile_size": settings.tile_size,
            # only when on, so fingerprints of runs without them stay as they were
            **{k: True for k in ("cog", "stac", "zarr") if getattr(settings, k)},
            "compression": settings.compression,
        },
    }
    return hashlib.sha256(json.dumps(payload, sort_keys=True).encode()).hexdigest()


def _file_identity(path: Path | str) -> list:
    """Path, size and modification time of a local input; a remote one by its address only."""
    if is_remote(path) or not Path(path).exists():
        return [str(path), None, None]
    stat = Path(path).stat()
    return [str(path), stat.st_size, stat.st_mtime_ns]


def is_complete(out_dir: Path, fingerprint: str) -> bool:
    """True when the scene folder holds a complete manifest with this fingerprint and outputs."""
    manifest_path = out_dir / "manifest.json"
    if not manifest_path.is_file():
        return False
    try:
        manifest = json.loads(manifest_path.read_text())
    except (OSError, json.JSONDecodeError):
        return False
    if manifest.get("status") != "complete" or manifest.get("fingerprint") != fingerprint:
        return False
    # exists(), not is_file(): outputs.zarr is a folder
    return all((out_dir / name).exists() for name in manifest.get("outputs", {}).values())


@dataclass
class SceneOutcome:
    scene_id: str
    status: str  # "done", "skipped" or "failed"
    seconds: float
    message: str = ""
    manifest: dict = field(default_factory=dict, repr=False)

    def row(self) -> dict:
        m = self.manifest
        row = {
            "scene_id": self.scene_id,
            "status": self.status,
            "seconds": round(self.seconds, 2),
            "message": self.message,
            "method": m.get("sensible_heat_method", ""),
        }
        # every method's own columns, filled by the scene's method (blank for the others)
        row |= {column: "" for method in METHODS.values() for column in method.batch_columns}
        if m.get("sensible_heat_method") in METHODS:
            row |= METHODS[m["sensible_heat_method"]].batch_values(m)
        means = m.get("scene_means_all", {})
        for name in (
            "net_radiation",
            "ground_heat_flux",
            "sensible_heat_flux",
            "latent_heat_flux",
            "et_daily",
        ):
            row[f"{name}_mean"] = means.get(name, "")
        return row


def run_batch(
    recipe: Recipe,
    table: ClassTable,
    settings: RunOptions,
    report=None,
    force: bool = False,
    only: set[str] | None = None,
) -> list[SceneOutcome]:
    """Run every scene (or those whose ids are in ``only``); a failing scene is reported and
    the others go on.

    ``report(outcome)`` is called after each scene (the CLI prints a line). Writes
    ``OUT/batch.csv`` (atomically) with one row per scene run.
    """
    from tqdm import tqdm

    outcomes = []
    chosen = [s for s in recipe.scene if only is None or s.id in only]
    scenes = tqdm(chosen, desc="scenes", unit="scene", disable=not settings.progress, leave=False)
    for scene in scenes:
        started = time.perf_counter()
        out_dir = settings.out_dir / scene.id
        try:  # a scene whose files cannot even be listed fails alone, like any other
            fingerprint = scene_fingerprint(recipe, scene, table, settings)
            if not force and is_complete(out_dir, fingerprint):
                manifest = json.loads((out_dir / "manifest.json").read_text())
                outcome = SceneOutcome(
                    scene.id,
                    "skipped",
                    time.perf_counter() - started,
                    "complete and up to date",
                    manifest,
                )
            else:
                result = run_scene(recipe, scene, table, settings, fingerprint=fingerprint)
                outcome = SceneOutcome(
                    scene.id, "done", time.perf_counter() - started, "", result.manifest
                )
        except RasterBudgetError as err:
            outcome = SceneOutcome(scene.id, "failed", time.perf_counter() - started, str(err))
            if out_dir.is_dir():  # older outputs there are no longer this recipe's
                mark_failed(scene.id, out_dir, {}, err)
        outcomes.append(outcome)
        if report is not None:
            report(outcome)
    output_folder(settings.out_dir)
    write_text_atomic(settings.out_dir / BATCH_TABLE, rows_to_csv([o.row() for o in outcomes]))
    return outcomes


def _zone_series(recipe, settings, outcomes, seasons: list[dict]) -> list[Path]:
    """``zones_series.csv`` (zone x scene date) and ``zones_monthly.csv`` (zone x month and
    water year, per season) under OUT."""
    from .season.series import (
        monthly_rows,
        scene_rows,
        write_series,
        zone_daily_reference,
        zone_fraction_means,
    )
    from .season.totals import season_days

    done = [o.scene_id for o in outcomes if o.status != "failed"]
    scenes = [s for s in recipe.scene if s.id in done]
    fractions = zone_fraction_means(recipe, settings, done)
    rows = scene_rows(settings.out_dir, scenes, fractions)
    monthly = []
    for manifest in seasons:
        etr = manifest.get("reference_et_daily_mm")
        # a station's days, or with gridded reference ET each zone's own
        etr = (
            np.asarray(etr) if etr is not None else zone_daily_reference(recipe, settings, manifest)
        )
        days = season_days(
            dt.date.fromisoformat(str(manifest["start"])),
            dt.date.fromisoformat(str(manifest["end"])),
        )
        monthly += monthly_rows(
            manifest["season_id"], rows, manifest["scenes"], days, etr, fractions
        )
    return write_series(settings.out_dir, rows, monthly) if rows else []


@contextlib.contextmanager
def _writing(what: str, out_dir: Path):
    """An OS error while writing ``what`` becomes one line naming the folder."""
    try:
        yield
    except OSError as err:
        reason = err.strerror or str(err).splitlines()[0]
        raise OutputError(
            f"writing {what} into {out_dir} failed ({reason}); the scenes' outputs are complete; "
            "free some space or check permissions and run again."
        ) from None


@dataclass
class RecipeOutcome:
    """What a recipe run did: each scene's outcome, each season's manifest, the zone tables
    and the report."""

    scenes: list[SceneOutcome]
    seasons: list[dict] = field(default_factory=list)
    failed_seasons: list[tuple[str, str]] = field(default_factory=list)  # (id, message)
    zone_tables: list[Path] = field(default_factory=list)
    report: Path | None = None


def recipe_class_table(recipe: Recipe) -> ClassTable:
    """The class table a recipe names (``run.class_table``; the built-in one by default)."""
    from .catalog.classes import load_class_table
    from .recipe import resolve_path

    name = recipe.run.class_table
    return load_class_table(None if name == "builtin" else resolve_path(recipe, name))


def run_options(
    recipe: Recipe,
    out_dir: Path | str | None = None,
    chunk_size: int | None = None,
    tile_size: int | None = None,
    components: bool | None = None,
    quicklook: bool = True,
    progress: bool = False,
) -> RunOptions:
    """A recipe's ``[run]`` table with the caller's choices (command-line options, API
    arguments) applied over it; paths relative to the recipe file."""
    from .recipe import resolve_path

    return RunOptions(
        out_dir=Path(out_dir) if out_dir is not None else resolve_path(recipe, recipe.run.out),
        chunk_size=chunk_size or recipe.run.chunk_size,
        tile_size=tile_size or recipe.run.tile_size,
        write_components=recipe.run.write_components if components is None else components,
        quicklook=recipe.run.quicklook and quicklook,
        progress=progress,
        cog=recipe.run.cog,
        stac=recipe.run.stac,
        zarr=recipe.run.zarr,
        compression=recipe.run.compression,
    )


def run_recipe(
    recipe: Recipe,
    table: ClassTable,
    settings: RunOptions,
    on_scene=None,
    on_season=None,
    force: bool = False,
    on_season_failed=None,
    only: set[str] | None = None,
) -> RecipeOutcome:
    """Every scene (a batch; with ``only``, the scenes of those ids), then the recipe's seasons,
    zones and report.

    ``on_scene(outcome)`` and ``on_season(manifest)`` are called as each finishes (the CLI prints
    a line).
    """
    from .io.lock import output_lock

    if recipe.zones is not None:  # a bad zone file is refused before any scene runs
        from .recipe import resolve_path
        from .season.zones import read_zone_features

        read_zone_features(resolve_path(recipe, recipe.zones.path), recipe.zones.id_property)
    output_folder(settings.out_dir)
    with output_lock(settings.out_dir):  # one run per output folder
        return _run_recipe_locked(
            recipe, table, settings, on_scene, on_season, force, on_season_failed, only
        )


def _run_recipe_locked(
    recipe, table, settings, on_scene, on_season, force, on_season_failed, only=None
) -> RecipeOutcome:
    outcomes = run_batch(recipe, table, settings, on_scene, force=force, only=only)
    done = RecipeOutcome(outcomes)
    zone_targets = [(o.scene_id, "et_daily") for o in outcomes if o.status != "failed"]
    if recipe.season:
        from .season.totals import run_season

        for season in recipe.season:
            try:  # a season that cannot be made fails alone, like a scene
                done.seasons.append(run_season(recipe, season, settings))
            except RasterBudgetError as err:
                done.failed_seasons.append((season.id, str(err)))
                if on_season_failed is not None:
                    on_season_failed(season.id, str(err))
                continue
            if on_season is not None:
                on_season(done.seasons[-1])
    if recipe.zones is not None:
        from .season.zones import run_zones

        made = {m["season_id"] for m in done.seasons}
        zone_targets += [(s.id, "et_season") for s in recipe.season if s.id in made]
        done.zone_tables = run_zones(recipe, settings, zone_targets)
        done.zone_tables += _zone_series(recipe, settings, outcomes, done.seasons)
    if settings.stac:
        with _writing("the STAC collection", settings.out_dir):
            write_run_collection(settings.out_dir, outcomes, done.seasons)
    if settings.quicklook:
        from .report import write_report

        with _writing("the report", settings.out_dir):
            done.report = write_report(
                settings.out_dir,
                [o.scene_id for o in outcomes if o.status != "failed"],
                [m["season_id"] for m in done.seasons],
            )
    return done


COLLECTION = "collection.json"


def write_run_collection(out_dir: Path, outcomes, seasons: list[dict]) -> Path | None:
    """``OUT/collection.json``: a STAC Collection linking the Items of the run's complete
    scenes and seasons (relative hrefs), its extent spanning theirs."""
    names = [o.scene_id for o in outcomes if o.status != "failed"]
    names += [m["season_id"] for m in seasons]
    return write_collection(out_dir, [(name, out_dir / name) for name in names])


def write_collection(out_dir: Path, folders: list[tuple[str, Path]]) -> Path | None:
    """``OUT/collection.json`` linking the STAC Item ``<folder>/<name>.stac.json`` of each
    (name, folder) that has one."""
    from .io.cloud import stac_collection

    items = []
    for name, folder in folders:
        path = folder / f"{name}.stac.json"
        if path.is_file():
            href = f"./{path.relative_to(out_dir).as_posix()}"
            items.append((href, json.loads(path.read_text())))
    if not items:
        return None
    collection = stac_collection(out_dir.resolve().name, items, dt.datetime.now(dt.UTC))
    return write_text_atomic(out_dir / COLLECTION, json.dumps(collection, indent=2) + "\n")


def run_compare_recipe(recipe, out_override: Path | None = None) -> list[tuple[Path, dict]]:
    """Run each ``[[comparison]]`` of a comparison recipe into ``OUT/<id>/``; write the report."""
    from .recipe import resolve_path
    from .report import write_compare_report
    from .season.compare import run_compare

    settings = recipe.compare
    out = out_override if out_override is not None else resolve_path(recipe, settings.out)
    zones = (
        (resolve_path(recipe, settings.zones.path), settings.zones.id_property)
        if settings.zones is not None
        else None
    )
    from .io.lock import output_lock

    output_folder(out)
    results = []
    with output_lock(out):  # one run per output folder
        for c in recipe.comparison:
            folder = output_folder(out, c.id)
            summary = run_compare(
                resolve_path(recipe, c.current),
                folder,
                resolve_path(recipe, c.previous) if c.previous else None,
                [resolve_path(recipe, p) for p in c.baseline],
                settings.chunk_size,
                settings.tile_size,
                zones,
                label=c.id,
            )
            results.append((folder, summary))
        write_compare_report(out, results)
        write_collection(out, [(c.id, output_folder(out, c.id)) for c in recipe.comparison])
    return results


def inspect_recipe(
    path: Path, table: ClassTable, recipe: Recipe, chunk_size: int
) -> tuple[list[str], list[tuple[str, str]]]:
    """Every scene's lines, and every scene's problem (scene id, message): a failing scene
    keeps the lines found before its problem, and the scenes after it are inspected too."""
    from .recipe import resolve_path
    from .scene.inspection import inspect_scene

    out: list[str] = []
    problems: list[tuple[str, str]] = []
    if recipe.zones is not None:
        from .season.zones import read_zone_features

        zone_path = resolve_path(recipe, recipe.zones.path)
        try:
            features, _ = read_zone_features(zone_path, recipe.zones.id_property)
            out.append(f"zones {zone_path}: {len(features)} polygons")
        except RasterBudgetError as err:
            out.append(f"  PROBLEM: {err}")
            problems.append(("zones", str(err)))
    for scene in recipe.scene:
        try:
            inspect_scene(recipe, scene, table, chunk_size, out)
        except RasterBudgetError as err:
            out.append(f"  PROBLEM: {err}")
            problems.append((scene.id, str(err)))
    return out, problems
