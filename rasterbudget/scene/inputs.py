"""A scene's input rasters: their paths from the recipe by the input registry, the target grid,
and the checks a run and ``inspect`` both make before any pixel is computed."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from ..catalog.classes import ClassTable
from ..catalog.inputs import INPUTS, target_role
from ..errors import InputRasterError
from ..io.grid import GDAL_OPTIONS, Grid, check_input, grid_from_settings, target_grid
from ..recipe import InputSpec, Recipe, Scene, resolve_path, resolve_raster_path
from .products import ProductInputs, product_inputs


@dataclass(frozen=True)
class SceneFiles:
    """Where a scene's inputs are, with the recipe's per-input options, on which grid."""

    paths: dict[str, Path | str]  # role -> local path or remote address, in registry order
    specs: dict[str, InputSpec]  # role -> recipe options (scale, offset, units, resampling)
    grid: Grid
    remap: dict[int, int]  # user land-cover code -> class code
    mask_values: tuple[int, ...] = ()  # cloud-mask values dropped
    mask_bits: tuple[int, ...] = ()  # cloud-mask bits dropped
    product: dict | None = None  # the product's facts, for the manifest
    derive_facts: dict | None = None  # scene facts of derived inputs (a Level-1 product's)
    mask_buffer: int = 0  # halo read for a derived cloud mask's buffer [pixels]


def input_paths(
    recipe: Recipe, scene: Scene, product: ProductInputs | None = None
) -> tuple[dict, dict]:
    """Every input the scene names, by role (registry order), and its recipe options; a
    product's roles fill in what ``[scene.inputs]`` does not give."""
    if product is None and scene.product is not None:
        product = product_inputs(recipe, scene)
    paths, specs = {}, {}
    gridded = scene.overpass.gridded()
    for role in INPUTS.values():
        if role.section == "overpass":
            if role.name in gridded:
                paths[role.name] = resolve_raster_path(recipe, gridded[role.name])
            continue
        if role.section == "reference_et":
            given = getattr(scene.reference_et, role.name)
            if given is not None:
                paths[role.name] = resolve_raster_path(recipe, given)
            continue
        if role.name == "cloud_mask" and scene.inputs.cloud_mask is not None:
            paths[role.name] = resolve_raster_path(recipe, scene.inputs.cloud_mask.path)
            continue
        given = role.section == "inputs" and role.name != "cloud_mask"
        spec = scene.inputs.spec(role.name) if given else None
        if spec is not None:
            paths[role.name] = resolve_raster_path(recipe, spec.path)
            specs[role.name] = spec
        elif product is not None and role.name in product.paths:  # given wins over derived
            paths[role.name] = product.paths[role.name]
            if role.name in product.specs:
                specs[role.name] = product.specs[role.name]
    return paths, specs


def mask_rule(scene: Scene, product: ProductInputs | None) -> tuple[tuple, tuple]:
    """The cloud-mask values and bits dropped: the recipe's mask, else the product's QA bits."""
    if scene.inputs.cloud_mask is not None:
        mask = scene.inputs.cloud_mask
        return tuple(mask.drop_values), tuple(mask.drop_bits)
    if product is not None:
        return (), product.mask_bits
    return (), ()


def scene_files(recipe: Recipe, scene: Scene, table: ClassTable) -> SceneFiles:
    """The scene's inputs and its target grid: the target input's, or ``[scene.grid]``."""
    import rasterio

    product = product_inputs(recipe, scene) if scene.product is not None else None
    paths, specs = input_paths(recipe, scene, product)
    remap = {}
    if "land_cover" in specs and specs["land_cover"].remap is not None:
        from ..catalog.classes import load_remap

        remap = load_remap(resolve_path(recipe, specs["land_cover"].remap), table)
    with rasterio.Env(**GDAL_OPTIONS):
        # refuses a target without CRS, in any case
        grid = target_grid(paths[target_role(paths)])
        if scene.grid is not None:
            grid = grid_from_settings(scene.grid)
    values, bits = mask_rule(scene, product)
    return SceneFiles(
        paths=paths,
        specs=specs,
        grid=grid,
        remap=remap,
        mask_values=values,
        mask_bits=bits,
        product=None if product is None else product.facts,
        derive_facts=None if product is None else product.derive_facts,
        mask_buffer=0 if product is None else product.mask_buffer,
    )


def check_inputs(files: SceneFiles) -> dict[str, dict]:
    """Every input exists, is readable, has a CRS and overlaps the grid; its facts by role."""
    import rasterio

    with rasterio.Env(**GDAL_OPTIONS):
        described = {
            role: check_input(
                path,
                role,
                files.grid,
                files.specs[role].band if role in files.specs else None,
            )
            for role, path in files.paths.items()
        }
    for role, info in described.items():
        if role != "cloud_mask" and info["covers"] < MIN_COVERAGE:
            raise InputRasterError(
                f"{role} raster {info['path']} covers only {info['covers']:.2%} of the target "
                f"grid (at least {MIN_COVERAGE:.0%} needed): another region or a clipped file? "
                "Check its extent, or set [scene.grid] to the area it covers."
            )
    return described


#: Least share of the target grid an input must cover (a cloud mask may cover less).
MIN_COVERAGE = 0.10
