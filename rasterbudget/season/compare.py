"""Comparisons: difference and percent change of two rasters, standardized anomaly of one period
against a baseline stack, and drought categories of the anomaly.

Categories follow the classes of standardized anomalies published for the standardized
precipitation index (McKee, Doesken & Kleist 1993, 8th Conf. Applied Climatology): |z| >= 2
extreme, 1.5-2 severe, 1-1.5 moderate, below 1 near normal. A value exactly on a boundary falls
in the more extreme class (z = -1.0 is moderately dry). For ET, below normal reads as dry.
"""

from __future__ import annotations

import json
import warnings
from pathlib import Path

import numpy as np

from ..catalog.variables import DROUGHT_CATEGORIES
from ..errors import InputRasterError
from ..io.paths import output_folder
from ..methods.ensemble import member_percentiles, member_spread
from ..scene.manifest import sha256_of, versions

#: Category code -> name (codes of the drought_category raster; 0 = no value).
CATEGORIES = {code: name for code, name, _ in DROUGHT_CATEGORIES}


def difference(current: np.ndarray, previous: np.ndarray) -> np.ndarray:
    """current - previous, in the rasters' units."""
    return current - previous


def percent_change(current: np.ndarray, previous: np.ndarray) -> np.ndarray:
    """100 (current - previous) / previous [%]; NaN where previous is 0."""
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(previous != 0, 100.0 * (current - previous) / previous, np.nan)


def standardized_anomaly(current: np.ndarray, baseline: np.ndarray) -> np.ndarray:
    """(x - mean) / std over the baseline's leading axis (sample std, ddof = 1) [-].

    NaN where fewer than two baseline values exist or their spread is zero.
    """
    count = np.isfinite(baseline).sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN pixels: handled below
        mean = np.nanmean(baseline, axis=0)
        std = np.nanstd(baseline, axis=0, ddof=1)
        z = (current - mean) / std
    return np.where((count >= 2) & (std > 0), z, np.nan)


def drought_category(z: np.ndarray) -> np.ndarray:
    """Category codes 1-7 (``CATEGORIES``) of standardized anomalies; 0 where z is NaN."""
    code = np.full(z.shape, 4, dtype=np.uint8)
    with np.errstate(invalid="ignore"):
        code[z <= -1.0] = 3
        code[z <= -1.5] = 2
        code[z <= -2.0] = 1
        code[z >= 1.0] = 5
        code[z >= 1.5] = 6
        code[z >= 2.0] = 7
    code[~np.isfinite(z)] = 0
    return code


#: Comparison variables averaged per zone (those the comparison has).
ZONE_VARIABLES = ("current", "previous", "difference", "baseline_mean", "standardized_anomaly")


def zone_comparison_sums(
    values: np.ndarray,
    with_category: bool,
    coverage: list[tuple[int, np.ndarray, np.ndarray, np.ndarray, np.ndarray]],
    n_zones: int,
) -> np.ndarray:
    """Area-weighted sums per zone of one block of comparison values.

    ``values`` is (variables, rows, cols): the float variables, then the category layer when
    ``with_category``. ``coverage`` holds per zone touching the block its cells and their
    coverage fraction x ground area (:func:`rasterbudget.season.zones.block_coverage`). Returns
    (3 + 2 n + 7, zones): zone area, covered pixels, categorised area, then per float variable
    its area-weighted sum and its valid area, then the area of each category 1-7 [m2].
    """
    n_float = values.shape[0] - int(with_category)
    out = np.zeros((3 + 2 * n_float + 7, n_zones))
    for k, rows, cols, share, weight in coverage:
        out[0, k] = weight.sum()
        out[1, k] = share.sum()
        for v in range(n_float):
            picked = values[v][rows, cols]
            ok = np.isfinite(picked)
            out[3 + 2 * v, k] = (picked[ok] * weight[ok]).sum()
            out[4 + 2 * v, k] = weight[ok].sum()
        if with_category:
            codes = values[-1][rows, cols]
            out[2, k] = weight[codes > 0].sum()
            for c in range(1, 8):
                out[3 + 2 * n_float + c - 1, k] = weight[codes == c].sum()
    return out


def zone_comparison_rows(
    ids: list[str], totals: np.ndarray, float_names: list[str], with_category: bool, units: str
) -> list[dict]:
    """Rows of the comparison's ``zones.csv``: area, valid share, area-weighted means, volumes
    (when the rasters are depths in mm) and the share of the zone's area in each category."""
    from .zones import CUBIC_METRES_PER_ACRE_FOOT

    rows = []
    for k, zone in enumerate(ids):
        area, pixels, categorised = totals[0, k], totals[1, k], totals[2, k]
        row: dict = {"zone_id": zone, "pixels": round(float(pixels), 3), "area_m2": area}
        means = {}
        for v, name in enumerate(float_names):
            weighted, valid_area = totals[3 + 2 * v, k], totals[4 + 2 * v, k]
            means[name] = weighted / valid_area if valid_area else float("nan")
            if name == "current":
                row["valid_fraction"] = valid_area / area if area else float("nan")
            row[f"{name}_mean"] = means[name]
        if "previous" in means:
            prev = means["previous"]
            row["percent_change_of_means"] = (
                100.0 * (means["current"] - prev) / prev if prev else float("nan")
            )
        if units == "mm":  # depths: volumes over the whole zone at its mean depth
            for name in ("current", "difference"):
                if name in means:
                    row[f"{name}_volume_m3"] = means[name] / 1000.0 * area
            if "difference" in means:
                row["difference_volume_acre_feet"] = (
                    row["difference_volume_m3"] / CUBIC_METRES_PER_ACRE_FOOT
                )
        if with_category:
            n_float = len(float_names)
            for c in range(1, 8):
                share = totals[3 + 2 * n_float + c - 1, k] / categorised if categorised else 0.0
                row[f"share_{CATEGORIES[c].replace(' ', '_')}"] = share
        rows.append(row)
    return rows


def _json_ready(value):
    """Plain JSON values: NaN and infinities become null, numpy scalars Python numbers."""
    if isinstance(value, dict):
        return {k: _json_ready(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_json_ready(v) for v in value]
    if isinstance(value, float | np.floating):
        return float(value) if np.isfinite(value) else None
    if isinstance(value, np.integer):
        return int(value)
    return value


def compare_block(
    current: Path,
    previous: Path | None,
    baseline: list[Path],
    members: tuple[Path, Path] | None,
    location,
) -> np.ndarray:
    """The comparison layers of one block, a float64 array (layers, rows, cols): current, then
    with ``previous`` previous, difference and percent change [%], then with two or more
    ``baseline`` rasters the baseline mean, standardized anomaly [-] and drought category code.
    With ``members`` (the current and previous rasters' member stacks) then the p10, p50 and p90
    of the members' differences and each member's difference (member k minus member k).
    Masked pixels are NaN; ``location`` is the block's ((row0, row1), (col0, col1))."""
    import rasterio
    from rasterio import windows

    (r0, r1), (c0, c1) = location
    window = windows.Window(c0, r0, c1 - c0, r1 - r0)

    def read(p):
        with rasterio.open(p) as src:
            return src.read(1, window=window, masked=True).astype(np.float64).filled(np.nan)

    x = read(current)
    out = [x]
    if previous is not None:
        y = read(previous)
        out += [y, difference(x, y), percent_change(x, y)]
    if len(baseline) >= 2:
        stack = np.stack([read(p) for p in baseline])
        z = standardized_anomaly(x, stack)
        with np.errstate(invalid="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            mean = np.nanmean(stack, axis=0)
        out += [mean, z, drought_category(z).astype(np.float64)]
    if members is not None:
        stacks = []
        for p in members:
            with rasterio.open(p) as src:
                stacks.append(src.read(window=window, masked=True).astype(np.float64))
        differences = difference(stacks[0].filled(np.nan), stacks[1].filled(np.nan))
        # difference_p10, _p50, _p90, then each member's difference
        out += [*member_percentiles(differences).values(), *differences]
    return np.stack(out)


def member_stacks(current: Path, previous: Path | None) -> tuple[Path, Path] | str:
    """The member stacks beside the current and previous rasters (``<stem>_members.tif``, as a
    season writes them) when both have the same members; else why the comparison has none."""
    if previous is None:
        return "no previous raster"
    stacks = tuple(Path(p).with_name(f"{Path(p).stem}_members.tif") for p in (current, previous))
    if not all(p.is_file() for p in stacks):
        return "the compared rasters have no member stacks beside them"
    parameters = []
    for p in stacks:
        try:
            manifest = json.loads((p.parent / "manifest.json").read_text())
        except (OSError, ValueError):
            return f"no readable manifest beside {p}"
        parameters.append((manifest.get("uncertainty") or {}).get("member_parameters"))
    if parameters[0] is None or parameters[0] != parameters[1]:
        return "the two runs' ensemble members differ (seed or ranges)"
    return stacks


def with_member_percentiles(rows: list[dict], n_members: int) -> list[dict]:
    """Zone rows with the p10, p50 and p90 of the members' zone-mean differences (and of their
    volumes for depths), the per-member columns folded away."""
    out = []
    for row in rows:
        means = np.array([row.pop(f"{member_name(k)}_mean") for k in range(n_members)])
        extra = {}
        for suffix, value in member_percentiles(means).items():
            extra[f"difference_mean_{suffix}"] = value
            if "difference_volume_m3" in row:
                extra[f"difference_volume_m3_{suffix}"] = value / 1000.0 * row["area_m2"]
        out.append(row | extra)
    return out


def _uncertainty(members: tuple | str, member_means: list) -> dict:
    """compare.json's ``uncertainty``: the members' mean differences and their p10, p50 and
    p90, or why there are none."""
    if isinstance(members, str):
        return {"members": 0, "why_none": members}
    from .totals import MEMBER_ASSUMPTION

    return member_spread(member_means, "mean_difference") | {
        "assumption": MEMBER_ASSUMPTION
        + "; member k of the two runs is one draw too, so errors common to both cancel",
    }


def compare_stac_item(summary: dict, current: Path, out_dir: Path, grid, writers) -> Path:
    """The comparison's STAC Item: its rasters and tables, over the current raster's period
    (a season's start to end, from the manifest beside it) or at its scene's overpass."""
    import datetime as dt

    from ..io.cloud import stac_item, write_stac_item

    label = summary["comparison"]
    when, period = dt.datetime.now(dt.UTC), None
    try:
        manifest = json.loads((Path(current).parent / "manifest.json").read_text())
    except (OSError, ValueError):
        manifest = {}
    if "start" in manifest and "end" in manifest:
        start = dt.datetime.fromisoformat(str(manifest["start"])).replace(tzinfo=dt.UTC)
        end = dt.datetime.fromisoformat(str(manifest["end"])).replace(tzinfo=dt.UTC)
        when, period = None, (start, end + dt.timedelta(hours=23, minutes=59, seconds=59))
    elif "parameters" in manifest and "acquired_utc" in manifest["parameters"]:
        when = dt.datetime.fromisoformat(manifest["parameters"]["acquired_utc"])
    # compare.json is written right after the Item
    files = ["compare.json"] + [
        n for n in ("categories.csv", "zones.csv") if (out_dir / n).exists()
    ]
    item = stac_item(
        label,
        when,
        grid,
        {w.path.stem: (w.units, w.description, w.dtype, w.nodata) for w in writers},
        files,
        False,
        dt.datetime.now(dt.UTC),
        period=period,
        title=f"{label}: comparison of {summary['variable']}",
    )
    return write_stac_item(item, out_dir / f"{label}.stac.json")


def member_name(k: int) -> str:
    return f"difference_member_{k + 1:02d}"


def zone_sums_of_block(
    values: np.ndarray,
    location,
    *,
    grid,
    keep: list[int],
    category: int | None,
    geometries: list,
    boxes: list,
) -> list[np.ndarray]:
    """A one-item list holding ``zone_comparison_sums`` of one block of ``compare_block`` layers
    (area-weighted sums [m2 x units], areas [m2]): the layers ``keep``, then the category layer
    ``category`` when there is one. A list so that the blocks' sums concatenate in row-major order
    and are added in that order afterwards (their last bits do not depend on the reduction)."""
    from .zones import block_coverage

    coverage = block_coverage(geometries, boxes, grid, location)
    picked = values[keep]
    if category is not None:
        picked = np.concatenate([picked, values[[category]]])
    return [zone_comparison_sums(picked, category is not None, coverage, len(geometries))]


def _folder_state(raster: Path) -> str:
    """The state of the run that made a raster: its folder manifest's status, if any."""
    from .totals import scene_state

    if not (raster.parent / "manifest.json").is_file():
        return "no manifest beside it"
    return scene_state(raster.parent)


def _zone_spec(zones) -> dict | None:
    if zones is None:
        return None
    return {"path": str(zones[0]), "sha256": sha256_of(Path(zones[0])), "id_property": zones[1]}


def _compared_grid(current: Path, previous: Path | None, baseline: list[Path]):
    """The grid, units and variable name of the compared rasters; refuses a missing raster or
    one off the grid of ``current``."""
    import rasterio

    from ..io.grid import Grid

    paths = [current, *([previous] if previous else []), *baseline]
    for p in paths:
        if not Path(p).is_file():
            raise InputRasterError(
                f"raster {p} does not exist; give the path of an output "
                "GeoTIFF (e.g. OUT/<season>/et_season.tif), or run the recipe that makes it."
            )
        state = _folder_state(Path(p))
        if state not in ("complete", "no manifest beside it"):
            raise InputRasterError(
                f"raster {p} comes from a run that is not complete ({state}); run its recipe "
                "again before comparing it."
            )
    with rasterio.open(current) as src:
        grid = Grid(src.crs, src.transform, src.width, src.height)
        units = src.tags(1).get("units", "")
        variable = src.descriptions[0] or Path(current).stem
    for p in paths[1:]:
        with rasterio.open(p) as src:
            if (src.crs, src.transform, src.shape) != (
                grid.crs,
                grid.transform,
                (grid.height, grid.width),
            ):
                raise InputRasterError(
                    f"raster {p} is not on the grid of {current}; compare outputs made on one "
                    "target grid ([scene.grid])."
                )
    return grid, units, variable


def _write_tables(
    summary: dict,
    out_dir: Path,
    grid,
    result,
    names: list[str],
    summarised: list[str],
    tile_size: int,
    zone_tables: tuple | None,
    zone_names: list[str],
) -> None:
    """tiles.csv/geojson, categories.csv and zones.csv/geojson of a comparison; listed in (and,
    for categories and zones, added to) ``summary``."""
    from ..io.writers import write_text_atomic
    from ..scene.summaries import rows_to_csv, tile_layout, tile_rows, tiles_geojson

    tile_stats = np.array([[np.asarray(t) for t in row] for row in result.tiles])
    tiles = tile_rows(tile_stats, summarised, tile_layout(grid, tile_size))
    write_text_atomic(out_dir / "tiles.csv", rows_to_csv(tiles))
    write_text_atomic(out_dir / "tiles.geojson", tiles_geojson(tiles, grid.crs.to_string()))
    summary["outputs"] += ["tiles.csv", "tiles.geojson"]
    with_category = "drought_category" in names
    if with_category:
        counts = result.reductions[:8]
        valid = sum(int(c) for c in counts[1:])
        share = [
            {
                "code": c,
                "category": CATEGORIES[c],
                "pixels": int(counts[c]),
                "share_of_valid_area": int(counts[c]) / valid if valid else float("nan"),
            }
            for c in range(1, 8)
        ]
        write_text_atomic(out_dir / "categories.csv", rows_to_csv(share))
        summary["categories"] = share
        summary["outputs"].append("categories.csv")
    if zone_tables is not None:
        from .zones import write_zone_tables

        zone_ids, zone_props, zone_original = zone_tables
        totals = np.sum(result.summary, axis=0)
        zone_table = zone_comparison_rows(
            zone_ids, totals, zone_names, with_category, summary["units"]
        )
        n_members = sum(n.startswith("difference_member_") for n in zone_names)
        if n_members:
            zone_table = with_member_percentiles(zone_table, n_members)
        write_zone_tables(out_dir, zone_table, zone_props, zone_original)
        summary["zones"] = zone_table
        summary["outputs"] += ["zones.csv", "zones.geojson"]


def run_compare(
    current: Path,
    out_dir: Path,
    previous: Path | None = None,
    baseline: list[Path] = (),
    chunk: int = 1024,
    tile_size: int = 256,
    zones: tuple[Path, str] | None = None,
    label: str | None = None,
) -> dict:
    """Write comparison rasters, tile summaries and (optionally) per-zone tables into ``out_dir``.

    One chunked pass and one dask compute: the rasters, the tile statistics, the category counts
    and the per-zone sums come from the same blocks. Returns a summary (also ``compare.json``).
    """
    import operator
    from functools import partial

    import dask.array as da
    import rasterio
    from rasterio import features

    from ..catalog.variables import VARIABLES
    from ..io.engine import BlockLayout, Target, Tiles, run_blockwise
    from ..io.grid import GDAL_OPTIONS
    from ..io.writers import AtomicRaster, block_size_for, remove_stale_partials, write_text_atomic
    from ..scene.summaries import (
        tile_statistics,
    )

    grid, units, variable = _compared_grid(current, previous, baseline)
    if previous is None and len(baseline) < 2:
        raise InputRasterError(
            "give --previous for a difference, or at least two --baseline "
            "rasters for a standardized anomaly."
        )
    zone_ids: list[str] = []
    if zones is not None:
        from rasterio.warp import transform_geom

        from .zones import load_zones

        zone_ids, zone_props, _, zone_geoms = load_zones(zones[0], zones[1], grid.crs)
        # zones.geojson in WGS84 longitude/latitude (RFC 7946)
        zone_original = [transform_geom(grid.crs, "EPSG:4326", g) for g in zone_geoms]
    layout = BlockLayout.over(grid, chunk)
    block = block_size_for(layout.chunk)
    names = ["current"]
    if previous is not None:
        names += ["previous", "difference", "percent_change"]
    if len(baseline) >= 2:
        names += ["baseline_mean", "standardized_anomaly", "drought_category"]
    with_category = "drought_category" in names
    category = names.index("drought_category") if with_category else None
    members = member_stacks(current, previous)
    n_members = 0
    if not isinstance(members, str):
        with rasterio.open(members[0]) as first, rasterio.open(members[1]) as second:
            n_members = first.count if first.count == second.count else 0
        if not n_members:
            members = "the two member stacks have different numbers of members"
    member_names = [member_name(k) for k in range(n_members)]
    if n_members:
        names += ["difference_p10", "difference_p50", "difference_p90", *member_names]
    zone_names = [n for n in ZONE_VARIABLES if n in names] + member_names

    output_folder(out_dir)
    remove_stale_partials(out_dir)
    written = [n for n in names if n in VARIABLES and VARIABLES[n].group == "comparison"]
    writers = [
        AtomicRaster.for_variable(n, out_dir, grid, block, fill={"units": units}) for n in written
    ]
    targets = [Target(names.index(w.path.stem), w.dtype, w) for w in writers]
    # tiles summarise the compared values; the members' spread is in its own rasters
    spread = {"difference_p10", "difference_p50", "difference_p90", *member_names}
    summarised = [n for n in names if n != "drought_category" and n not in spread]
    zone_sums = None
    if zone_ids:
        # zone sums over: current, [previous, difference], [baseline mean, anomaly], [category]
        zone_sums = partial(
            zone_sums_of_block,
            grid=grid,
            keep=[names.index(n) for n in zone_names],
            category=category,
            geometries=zone_geoms,
            boxes=[features.bounds(g) for g in zone_geoms],
        )
    with rasterio.Env(**GDAL_OPTIONS):
        result = run_blockwise(
            layout,
            compare_block,
            args=(current, previous, list(baseline), None if n_members == 0 else members),
            layers=len(names),
            dtype=np.float64,
            targets=targets,
            summarise=zone_sums,
            # lists of per-block sums, concatenated in row-major order
            combine=operator.add if zone_sums is not None else None,
            tiles=Tiles([names.index(n) for n in summarised], tile_size, tile_statistics),
            # pixels per category code 0-7 of the whole raster and the members' mean
            # differences, by dask's reductions
            reduce_array=(
                (
                    lambda array: [
                        *(da.sum(array[category] == c) for c in range(8) if with_category),
                        *(da.nanmean(array[names.index(n)]) for n in member_names),
                    ]
                )
                if with_category or n_members
                else None
            ),
            outputs=writers,
        )
    zone_tables = (zone_ids, zone_props, zone_original) if zone_ids else None
    summary: dict = {
        "comparison": label or out_dir.name,
        "variable": variable,
        "units": units,
        "current": str(current),
        "previous": str(previous) if previous else None,
        "baseline": [str(p) for p in baseline],
        "outputs": [f"{n}.tif" for n in written],
        "inputs": {
            str(p): {"sha256": sha256_of(Path(p)), "state": _folder_state(Path(p))}
            for p in [current, *([previous] if previous else []), *baseline]
        },
        "parameters": {"chunk_size": chunk, "tile_size": tile_size, "zones": _zone_spec(zones)},
        "uncertainty": _uncertainty(members, result.reductions[8 if with_category else 0 :]),
        "versions": versions(),
    }
    _write_tables(
        summary, out_dir, grid, result, names, summarised, tile_size, zone_tables, zone_names
    )
    summary["outputs"].append(compare_stac_item(summary, current, out_dir, grid, writers).name)
    write_text_atomic(out_dir / "compare.json", json.dumps(_json_ready(summary), indent=2) + "\n")
    return summary
