"""A scene's input rasters: their paths from the recipe by the input registry, the target grid,
and the checks a run and ``inspect`` both make before any pixel is computed."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from ..catalog.classes import ClassTable
from ..catalog.inputs import INPUTS, target_role
from ..io.grid import GDAL_OPTIONS, Grid, check_input, grid_from_settings, target_grid
from ..recipe import InputSpec, Recipe, Scene, resolve_path, resolve_raster_path


@dataclass(frozen=True)
class SceneFiles:
    """Where a scene's inputs are, with the recipe's per-input options, on which grid."""

    paths: dict[str, Path | str]  # role -> local path or remote address, in registry order
    specs: dict[str, InputSpec]  # role -> recipe options (scale, offset, units, resampling)
    grid: Grid
    remap: dict[int, int]  # user land-cover code -> class code


def input_paths(recipe: Recipe, scene: Scene) -> tuple[dict, dict]:
    """Every input the scene names, by role (registry order), and its recipe options."""
    paths, specs = {}, {}
    gridded = scene.overpass.gridded()
    for role in INPUTS.values():
        if role.section == "overpass":
            if role.name in gridded:
                paths[role.name] = resolve_raster_path(recipe, gridded[role.name])
            continue
        if role.name == "cloud_mask":
            if scene.inputs.cloud_mask is not None:
                paths[role.name] = resolve_raster_path(recipe, scene.inputs.cloud_mask.path)
            continue
        spec = scene.inputs.spec(role.name)
        if spec is not None:
            paths[role.name] = resolve_raster_path(recipe, spec.path)
            specs[role.name] = spec
    return paths, specs


def scene_files(recipe: Recipe, scene: Scene, table: ClassTable) -> SceneFiles:
    """The scene's inputs and its target grid: the target input's, or ``[scene.grid]``."""
    import rasterio

    paths, specs = input_paths(recipe, scene)
    remap = {}
    if specs["land_cover"].remap is not None:
        from ..catalog.classes import load_remap

        remap = load_remap(resolve_path(recipe, specs["land_cover"].remap), table)
    with rasterio.Env(**GDAL_OPTIONS):
        grid = target_grid(paths[target_role()])  # refuses a target without CRS, in any case
        if scene.grid is not None:
            grid = grid_from_settings(scene.grid)
    return SceneFiles(paths=paths, specs=specs, grid=grid, remap=remap)


def check_inputs(files: SceneFiles) -> dict[str, dict]:
    """Every input exists, is readable, has a CRS and overlaps the grid; its facts by role."""
    import rasterio

    with rasterio.Env(**GDAL_OPTIONS):
        return {role: check_input(path, role, files.grid) for role, path in files.paths.items()}
