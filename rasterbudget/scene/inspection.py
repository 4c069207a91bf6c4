"""``rasterbudget inspect``: look at a recipe's inputs before any heavy work.

Everything here runs on a decimated copy of the target grid (longest side at most
``SAMPLE_SIDE`` pixels, read through GDAL's warper), so it costs seconds whatever the scene size.
The checks are the run's own: where a run would fail, inspect fails with the same message.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import rasterio
from rasterio.transform import Affine

from ..catalog.classes import ClassTable
from ..catalog.inputs import derive_inputs, gridded_weather_in_si, target_role
from ..errors import AnchorError
from ..io.grid import (
    GDAL_OPTIONS,
    Grid,
    check_input,
    grid_from_settings,
    input_source,
    overlap_fraction,
    read_window,
    target_grid,
)
from ..methods import get_method
from ..recipe import Recipe, Scene, resolve_path
from ..surface import ClassLookups, land_cover_codes, surface_block
from .blocks import (
    BlockContext,
    check_input_values,
    input_stats,
    known_cover_counts,
    mask_pixels,
    remap_codes,
)
from .constants import format_lonlat, scene_constants, with_weather_at_centre
from .geometry import pixel_lonlat
from .inputs import input_paths, mask_rule
from .preflight import memory_estimate_gb
from .products import product_inputs

SAMPLE_SIDE = 1024

#: Measured on the project's 2-core machine: seconds per megapixel of a run's passes
#: (``rasterbudget bench`` pipeline phase at 2048 square: 4.4 s for 4.19 Mpx, less the scene's
#: fixed 1.5 s; 12.2 s at 4096 square against 13.3 s estimated) and seconds
#: per scene of what does not grow with its size (inputs' checks, summaries, quick-look,
#: manifest: 1.5-2 s for each 0.12 Mpx demo scene, whose passes take under 1 s).
SECONDS_PER_MEGAPIXEL = 0.7
SECONDS_PER_SCENE = 1.5
#: The first scene of a run also loads the libraries (numpy, dask, rasterio, scipy, pvlib,
#: matplotlib): 4.5-5 s against 1-2 s for the next demo scenes.
SECONDS_TO_START = 3.0


def sample_grid(grid: Grid) -> tuple[Grid, int]:
    factor = max(1, math.ceil(max(grid.width, grid.height) / SAMPLE_SIDE))
    t = grid.transform
    coarse = Affine(t.a * factor, t.b, t.c, t.d, t.e * factor, t.f)
    return Grid(
        grid.crs, coarse, math.ceil(grid.width / factor), math.ceil(grid.height / factor)
    ), factor


def inspect_scene(
    recipe: Recipe, scene: Scene, table: ClassTable, chunk_size: int, lines: list[str] | None = None
) -> list[str]:
    """Lines describing one scene's inputs, appended to ``lines`` as they are found (so a caller
    keeps them when a check fails); raises the run's own error where a run would fail."""
    lines = [] if lines is None else lines
    lines.append(f"scene {scene.id}  acquired {scene.acquired_utc.isoformat()}")
    if scene.acquired_from:
        lines.append(f"  acquisition time {scene.acquired_from}")
    product = product_inputs(recipe, scene) if scene.product is not None else None
    paths, specs = input_paths(recipe, scene, product)
    with rasterio.Env(**GDAL_OPTIONS):
        grid = target_grid(paths[target_role(paths)])
        if scene.grid is not None:
            grid = grid_from_settings(scene.grid)
        left, bottom, right, top = grid.bounds
        lines.append(
            f"  target grid  {grid.crs.to_string()}  {grid.width} x {grid.height} pixels of "
            f"{grid.pixel_size[0]:g} x {grid.pixel_size[1]:g}  extent ({left:.1f}, {bottom:.1f}, "
            f"{right:.1f}, {top:.1f})"
        )
        coarse, factor = sample_grid(grid)
        sources, data = [], {}
        for role, path in paths.items():
            info = check_input(path, role, grid, specs[role].band if role in specs else None)
            with rasterio.open(path) as src:
                res = src.res
                overlap = overlap_fraction(src, grid)
            source = input_source(path, role, grid, specs.get(role))
            sources.append(source)
            sample = replace(source, grid=coarse, same_grid=False)
            if role != "cloud_mask" and source.resampling_name is None and role != "land_cover":
                sample = replace(sample, resampling_name="average")
            data[role] = read_window(sample, slice(0, coarse.height), slice(0, coarse.width))
            values = data[role][np.isfinite(data[role])]
            value_range = (
                f"{values.min():.4g} to {values.max():.4g}" if values.size else "no valid value"
            )
            lines.append(
                f"  {role:20s} {path}\n"
                f"      {info['crs']}  {info['width']} x {info['height']}  res {res[0]:g} x "
                f"{res[1]:g}  {info['dtype']}  nodata {info['nodata']}  scale/offset "
                f"{info['scale']:g}/{info['offset']:g}"
                + (
                    f" (recipe: {specs[role].scale}/{specs[role].offset})"
                    if role in specs and (specs[role].scale or specs[role].offset)
                    else ""
                )
                + f"\n      covers {overlap:.0%} of the target grid; values {value_range}; "
                f"valid {values.size / data[role].size:.1%} (sampled 1 in {factor}x{factor})"
                + ("" if info["same_grid"] else "; warped to the target grid")
            )
        stats = {role: input_stats(role, values) for role, values in data.items()}
        if "land_cover" in specs and specs["land_cover"].remap is not None:
            from ..catalog.classes import load_remap

            mapping = load_remap(resolve_path(recipe, specs["land_cover"].remap), table)
            data["land_cover"], stats["land_cover_unmapped"] = remap_codes(
                data["land_cover"], mapping
            )
        if "land_cover" in data:  # the run's own check: some code of the class table
            stats["land_cover_known"] = known_cover_counts(data["land_cover"], table.known())
        check_input_values(stats, tuple(sources))
    # albedo, NDVI, surface temperature, land cover and clouds from a product's bands
    data = derive_inputs(data, None if product is None else product.derive_facts)
    scene, centre = with_weather_at_centre(scene, grid, paths)
    if centre:
        lines.append(
            "  gridded weather at the scene centre: "
            + ", ".join(f"{k} {v:.4g}" for k, v in centre.items())
        )
    constants, facts = scene_constants(scene, grid)
    lines.append(
        f"  sun elevation at the scene centre {facts['sun_elevation_deg_centre']:.1f} deg, "
        f"azimuth {facts['sun_azimuth_deg_centre']:.1f} deg "
        f"({format_lonlat(facts['centre_lon'], facts['centre_lat'])}; NREL SPA)"
    )
    lines.append(f"  sky longwave: {facts['longwave_in']['sky_emissivity']}")
    lookups = ClassLookups.from_table(table)
    ctx = BlockContext(grid=coarse, constants=constants, lookups=lookups, sources=())
    lon, lat = pixel_lonlat(ctx.grid, slice(0, coarse.height), slice(0, coarse.width))
    masked = None
    if "cloud_mask" in data:
        masked = mask_pixels(data["cloud_mask"], *mask_rule(scene, product))
        lines.append(f"  cloud/QA mask drops {masked.mean():.1%} of the pixels")
    state = surface_block(
        constants,
        lookups,
        data["albedo"],
        data["surface_temperature"],
        data["land_cover"],
        lat,
        lon,
        ndvi=data.get("ndvi"),
        elevation=data.get("elevation"),
        masked=masked,
        weather=gridded_weather_in_si(data),
    )
    codes = land_cover_codes(data["land_cover"])
    lines.append("  per class (sampled): pixels, albedo outside the class range, median Ts")
    for cls in table.classes:
        in_class = (codes == cls.code) & np.isfinite(data["albedo"])
        if not in_class.any():
            continue
        albedo = data["albedo"][in_class]
        outside = np.mean((albedo < cls.albedo_min) | (albedo > cls.albedo_max))
        ts = data["surface_temperature"][in_class]
        lines.append(
            f"      {cls.name:16s} {in_class.sum() * factor**2:>10d}  {outside:6.1%}  "
            f"{np.nanmedian(ts):7.2f} K"
        )
    method_lines, problems = get_method(scene.sensible_heat).inspect(scene, state, factor)
    lines += method_lines
    megapixels = grid.width * grid.height / 1e6
    members = max(1, scene.uncertainty.members)
    # an ensemble of 8 costs about 1.7x one member (README, Performance)
    seconds = SECONDS_PER_SCENE + SECONDS_PER_MEGAPIXEL * megapixels * (1 + 0.1 * (members - 1))
    chunk = min(chunk_size, max(grid.width, grid.height))
    memory = memory_estimate_gb(chunk, scene.uncertainty.members, threads=2)
    lines.append(
        f"  estimate on 2 cores: about {seconds:.1f} s and {memory:.2f} GB peak memory "
        f"for {megapixels:.1f} Mpx at chunk {chunk}, plus about {SECONDS_TO_START:.0f} s once "
        "per run to start (rough: measured rates, not this scene)"
    )
    if problems:
        raise AnchorError(f"scene {scene.id}: " + " Also: ".join(problems))
    return lines
