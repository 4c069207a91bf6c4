"""Season totals: the ET fraction interpolated between scene dates, times daily reference ET.

Per pixel the fraction (reference-ET fraction or evaporative fraction) is linear in time between
consecutive scenes where that pixel is valid, and constant before the first and after the last;
the season's ET is the sum over days of fraction x daily reference ET. Because the fraction is
piecewise linear, the sum reduces to scene rasters times scalar day weights, so one chunked pass
over the stack does it. A pixel masked in a scene is filled from its valid neighbours in time and
flagged.
"""

from __future__ import annotations

import csv
import datetime as dt
import json
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import RecipeError
from ..io.paths import output_folder
from ..methods.ensemble import member_percentiles, member_spread
from ..physics import reference_et
from ..physics.constants import ZERO_CELSIUS
from ..scene.manifest import sha256_of, versions

#: season_qa bits
SEASON_FILLED = 1  # at least one scene was missing at this pixel and was filled in time
SEASON_EMPTY = 2  # no valid scene at all: no total
SEASON_UNRELIABLE = 4  # a scene flagged the residual unreliable (water, snow, built-up)
SEASON_QA = "season_qa.tif"


@dataclass(frozen=True)
class SeasonWeights:
    """Day weights [mm] of each scene (lead, trail) and scene pair (a, b): scalars per scene
    with a station's reference ET, or per pixel (trailing pixel axes) with gridded reference ET."""

    lead: np.ndarray  # (S, ...) reference ET of the days before scene i (fraction held constant)
    trail: np.ndarray  # (S, ...) reference ET of the days from scene i on
    a: np.ndarray  # (S, S, ...) weight of f_i for the days between scenes i < j
    b: np.ndarray  # (S, S, ...) weight of f_j for the days between scenes i < j


def season_weights(
    scene_days: list[dt.date], days: list[dt.date], etr: np.ndarray
) -> SeasonWeights:
    """Day weights for scenes (sorted by date) over the season's days with their reference ET,
    ``etr`` of shape (days,) for a station or (days, rows, cols) for a grid."""
    n = len(scene_days)
    pixels = etr.shape[1:]
    t = np.array([(d - days[0]).days for d in days], dtype=float)
    ts = np.array([(d - days[0]).days for d in scene_days], dtype=float)
    lead = np.stack([etr[t < ts[i]].sum(axis=0) for i in range(n)])
    trail = np.stack([etr[t >= ts[i]].sum(axis=0) for i in range(n)])
    a = np.zeros((n, n, *pixels))
    b = np.zeros((n, n, *pixels))
    shape = (-1,) + (1,) * len(pixels)
    for i in range(n):
        for j in range(i + 1, n):
            inside = (t >= ts[i]) & (t < ts[j])
            if ts[j] == ts[i]:
                continue
            w = ((t[inside] - ts[i]) / (ts[j] - ts[i])).reshape(shape)
            a[i, j] = ((1.0 - w) * etr[inside]).sum(axis=0)
            b[i, j] = (w * etr[inside]).sum(axis=0)
    return SeasonWeights(lead, trail, a, b)


def _at(weights: np.ndarray, index: np.ndarray) -> np.ndarray:
    """``weights[index]`` per pixel: a scalar per scene, or the pixel's own weight."""
    if weights.ndim == 1:
        return weights[index]
    return np.take_along_axis(weights, index[None], axis=0)[0]


def season_total_block(fractions: np.ndarray, w: SeasonWeights) -> tuple[np.ndarray, ...]:
    """Season ET [mm], valid-scene count and QA for one block of a (S, rows, cols) stack."""
    n = fractions.shape[0]
    valid = np.isfinite(fractions)
    total = np.zeros(fractions.shape[1:])
    last = np.full(fractions.shape[1:], -1)
    f_last = np.zeros(fractions.shape[1:])
    for k in range(n):
        v = valid[k]
        f = np.where(v, fractions[k], 0.0)
        first = v & (last < 0)
        total += np.where(first, f * w.lead[k], 0.0)
        later = v & (last >= 0)
        prev = np.maximum(last, 0)
        a_k, b_k = w.a[:, k], w.b[:, k]
        total += np.where(later, f_last * _at(a_k, prev) + f * _at(b_k, prev), 0.0)
        f_last = np.where(v, f, f_last)
        last = np.where(v, k, last)
    total = np.where(last >= 0, total + f_last * _at(w.trail, np.maximum(last, 0)), np.nan)
    return (total, *season_counts(fractions))


def season_counts(fractions: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Valid scenes per pixel of a (S, rows, cols) stack and the season QA bits they give."""
    n = fractions.shape[0]
    count = np.isfinite(fractions).sum(axis=0)
    qa = np.where(count < n, SEASON_FILLED, 0) | np.where(count == 0, SEASON_EMPTY, 0)
    return count.astype(np.uint8), qa.astype(np.uint8)


WEATHER_COLUMNS = ("tmax_c", "tmin_c", "wind_speed_m_s", "shortwave_mj_m2")


def daily_reference_et(
    path: Path, days: list[dt.date], latitude_rad: float, elevation: float, surface: str
) -> np.ndarray:
    """Daily reference ET [mm d-1] for the days from a CSV weather table.

    Columns: ``date`` and either ``reference_et_mm`` or ``tmax_c, tmin_c, wind_speed_m_s``
    (at 2 m), ``shortwave_mj_m2`` and ``vapour_pressure_kpa`` or ``rh_max_pct, rh_min_pct``.
    """
    if not path.is_file():
        raise RecipeError(f"daily weather table {path} does not exist; fix season.weather.")
    with path.open(newline="", encoding="utf-8") as f:
        rows = {row["date"]: row for row in csv.DictReader(f)}
    missing = [d.isoformat() for d in days if d.isoformat() not in rows]
    if missing:
        raise RecipeError(
            f"daily weather table {path} lacks {len(missing)} day(s) of the season, first "
            f"{', '.join(missing[:5])}; add them (one row per day, column 'date' as YYYY-MM-DD)."
        )
    out = np.empty(len(days))
    for k, day in enumerate(days):
        row = rows[day.isoformat()]
        try:
            if row.get("reference_et_mm"):
                out[k] = float(row["reference_et_mm"])
                continue
            values = {c: float(row[c]) for c in WEATHER_COLUMNS}
            ea = float(row["vapour_pressure_kpa"]) if row.get("vapour_pressure_kpa") else None
            out[k] = float(
                reference_et.reference_et_daily(
                    values["tmax_c"] + ZERO_CELSIUS,
                    values["tmin_c"] + ZERO_CELSIUS,
                    values["wind_speed_m_s"],
                    values["shortwave_mj_m2"],
                    latitude_rad,
                    day.timetuple().tm_yday,
                    elevation,
                    vapour_pressure=ea,
                    rh_max=None if ea is not None else float(row["rh_max_pct"]),
                    rh_min=None if ea is not None else float(row["rh_min_pct"]),
                    reference=surface,
                )
            )
        except (KeyError, ValueError, TypeError) as err:
            raise RecipeError(
                f"daily weather table {path}, date {day}: cannot read {err}; give "
                "reference_et_mm, or tmax_c, tmin_c, wind_speed_m_s, shortwave_mj_m2 and "
                "vapour_pressure_kpa (or rh_max_pct, rh_min_pct)."
            ) from None
    return out


def season_days(start: dt.date, end: dt.date) -> list[dt.date]:
    return [start + dt.timedelta(days=k) for k in range((end - start).days + 1)]


def scene_state(folder: Path) -> str:
    """``complete``, or why a scene folder is not: ``no outputs``, ``failed: <error>``, ..."""
    import json

    try:
        manifest = json.loads((folder / "manifest.json").read_text())
    except FileNotFoundError:
        return "no outputs" if not folder.is_dir() else "no manifest: an unfinished run"
    except (OSError, ValueError):
        return "an unreadable manifest"
    status = manifest.get("status", "unknown")
    if status == "complete":
        return status
    return f"{status}: {manifest.get('error', '')}".rstrip(": ")


def season_inputs(out_dir: Path, scenes: list, rasters: list[Path], weather: list[Path]) -> dict:
    """Each scene raster's path and SHA-256 with its scene's fingerprint, and the weather
    table's (or the daily reference-ET rasters'): what the season was made from."""
    entries = []
    for scene, raster in zip(scenes, rasters, strict=True):
        manifest = json.loads((out_dir / scene.id / "manifest.json").read_text())
        entries.append(
            {
                "scene_id": scene.id,
                "raster": str(raster),
                "sha256": sha256_of(raster),
                "scene_fingerprint": manifest.get("fingerprint"),
            }
        )
    return {
        "scenes": entries,
        "weather": [{"path": str(w), "sha256": sha256_of(w)} for w in weather],
    }


def gridded_reference_et(recipe, season, days: list[dt.date], grid) -> list:
    """How to read each day's reference ET onto the season's grid (bilinear where it is on
    another grid): a file per day (``{date}`` in the path), or a band per day of one stack whose
    band descriptions are the dates. Every day must be there."""
    from dataclasses import replace

    import rasterio

    from ..io.grid import check_input, input_source
    from ..io.stacks import daily_stack_bands, is_stack

    pattern = season.reference_et_rasters
    if "{date}" not in pattern:  # one stack: multi-band GeoTIFF, NetCDF or Zarr
        path = _resolve(recipe, pattern)
        if not path.exists():
            raise RecipeError(f"season {season.id}: reference_et_rasters {path} does not exist.")
        if is_stack(path):  # the time axis decoded by xarray, the pixels read by GDAL
            name, by_date = daily_stack_bands(
                path, season.reference_et_variable, "daily reference ET"
            )
            bands = {d.isoformat(): band for d, band in by_date.items()}
            described = "has no time step on"
        else:
            name = path
            with rasterio.open(path) as src:
                bands = {str(d): k + 1 for k, d in enumerate(src.descriptions) if d}
            described = "has no band described"
        missing = [d for d in days if d.isoformat() not in bands]
        if missing:
            raise RecipeError(
                f"season {season.id}: {path} {described} {missing[0]} ({len(missing)} days "
                "missing); each day of the season needs its field (a GeoTIFF band's "
                "description is its date, YYYY-MM-DD)."
            )
        check_input(name, "daily reference ET", grid, band=1)
        source = input_source(name, "reference_et", grid)
        return [replace(source, band=bands[d.isoformat()]) for d in days]
    sources = []
    for day in days:
        name = pattern.replace("{date}", day.strftime("%Y%m%d"))
        path = _resolve(recipe, name)
        if not path.is_file():
            raise RecipeError(
                f"season {season.id}: the reference-ET raster of {day} ({path}) does not exist; "
                "season.reference_et_rasters needs one file per day of the season ({date} = "
                "YYYYMMDD)."
            )
        check_input(path, "daily reference ET", grid)
        sources.append(input_source(path, "reference_et", grid))
    return sources


def reference_et_files(recipe, season, sources: list) -> list[Path]:
    """The files the daily reference ET came from: the one stack, or each day's raster."""
    if "{date}" not in season.reference_et_rasters:
        return [_resolve(recipe, season.reference_et_rasters)]
    return [Path(src.path) for src in sources]


def write_season_manifest(path: Path, content: dict) -> None:
    from ..io.writers import write_text_atomic

    write_text_atomic(path, json.dumps(content, indent=2, default=str))


def grid_check(paths: list[Path]) -> None:
    import rasterio

    with rasterio.open(paths[0]) as first:
        ref = (first.crs, first.transform, first.shape)
    for p in paths[1:]:
        with rasterio.open(p) as src:
            if (src.crs, src.transform, src.shape) != ref:
                raise RecipeError(
                    f"season scenes are on different grids ({paths[0].parent.name} and "
                    f"{p.parent.name}); give them one target grid ([scene.grid] in [defaults])."
                )


#: A member's parameters as the scene manifests record them, without its fitted calibration.
MEMBER_KEYS = (
    "cold_percentile",
    "hot_percentile",
    "cold_anchor_factor",
    "air_temperature_offset",
    "wind_factor",
    "surface_temperature_offset",
    "albedo_offset",
    "reference_et_factor",
)

#: What carrying members through a season assumes (stated in its manifest).
MEMBER_ASSUMPTION = (
    "member k of every scene is one draw (the same anchor percentiles, offsets and factors in "
    "each scene), so the errors are taken as fully correlated between scenes: none averages "
    "out over the season, and the p10-p90 band is the wider, conservative one"
)


@dataclass(frozen=True)
class SeasonMembers:
    """The scenes' member stacks (sorted as the scenes) and each member's reference-ET factor."""

    stacks: list[Path]
    reference_et_factors: np.ndarray  # (members,)
    parameters: list[dict]


def season_members(out_dir: Path, scenes: list) -> SeasonMembers | str:
    """Every scene's ensemble members, when all scenes have the same ones; else why not."""
    from ..catalog.variables import MEMBER_FRACTIONS

    stacks, first = [], None
    for scene in scenes:
        manifest = json.loads((out_dir / scene.id / "manifest.json").read_text())
        members = [{k: m[k] for k in MEMBER_KEYS} for m in manifest.get("ensemble") or []]
        stack = out_dir / scene.id / f"{MEMBER_FRACTIONS}.tif"
        if not members or not stack.is_file():
            return f"scene {scene.id} has no ensemble members with reference-ET fractions"
        if first is None:
            first = members
        elif members != first:
            return (
                f"scene {scene.id}'s members differ from {scenes[0].id}'s; give every scene "
                "the same [scene.uncertainty] (seed and ranges)"
            )
        stacks.append(stack)
    factors = np.array([m["reference_et_factor"] for m in first])
    return SeasonMembers(stacks, factors, first)


def season_block_layers(
    paths: list[Path],
    weights: SeasonWeights | None,
    reference_total: float | None,
    gridded: tuple | None,
    members: SeasonMembers | None,
    location,
) -> np.ndarray:
    """The season layers of one block, a float64 array (5, rows, cols): season ET [mm], mean
    fraction [-] (season ET over the season's reference ET ``reference_total`` [mm]),
    valid-scene count, season QA bits and the season's reference ET [mm]; with ``members``
    then the p10, p50 and p90 of the members' season ET and each member's season ET [mm].

    ``paths`` are the scenes' fraction rasters sorted by date; ``location`` is the block's
    ((row0, row1), (col0, col1)). With gridded daily reference ET, ``gridded`` holds (the
    day rasters' :class:`~rasterbudget.io.grid.InputSource` list, the scene dates, the days)
    and the weights and reference total are made per pixel from the block's own values.
    """
    import rasterio
    from rasterio.windows import Window

    from ..catalog.qa import QA

    (r0, r1), (c0, c1) = location
    window = Window(c0, r0, c1 - c0, r1 - r0)
    stack = []
    unreliable = np.zeros((r1 - r0, c1 - c0), bool)
    for p in paths:
        with rasterio.open(p) as src:
            stack.append(src.read(1, window=window).astype(np.float64))
        flags = p.with_name("qa_flags.tif")
        if flags.is_file():
            with rasterio.open(flags) as src:
                bits = src.read(1, window=window)
            unreliable |= (bits & int(QA.RESIDUAL_UNRELIABLE_CLASS)) != 0
    fractions = np.stack(stack)[:, None]  # (scenes, variants, rows, cols): the central run
    if members is not None:  # then each member's
        member_fractions = []
        for p in members.stacks:
            with rasterio.open(p) as src:
                member_fractions.append(src.read(window=window).astype(np.float64))
        fractions = np.concatenate([fractions, np.stack(member_fractions)], axis=1)
    if gridded is None:
        totals = np.stack(
            [season_total_block(fractions[:, v], weights)[0] for v in range(fractions.shape[1])]
        )
    else:
        from ..io.grid import read_window

        sources, scene_days, days = gridded
        # one day's reference ET in memory at a time, whatever the season's length
        daily = (read_window(src, slice(r0, r1), slice(c0, c1)) for src in sources)
        totals, reference_total = season_total_by_day(fractions, scene_days, days, daily)
    count, qa = season_counts(fractions[:, 0])
    total = totals[0]
    qa = qa | np.where(unreliable, SEASON_UNRELIABLE, 0).astype(np.uint8)
    # the mean fraction is divided here, in float64, as the whole-array division did
    reference = np.broadcast_to(reference_total, total.shape)
    layers = [total, total / reference, count.astype(np.float64), qa.astype(np.float64), reference]
    if members is None:
        return np.stack(layers)
    # each member's season with its own reference ET: the season's times its factor
    member_totals = totals[1:] * members.reference_et_factors[:, None, None]
    # p10, p50, p90 per pixel (et_season_p10, _p50, _p90), then each member's total
    spread = list(member_percentiles(member_totals).values())
    return np.concatenate([np.stack(layers), spread, member_totals])


def season_total_by_day(
    fractions: np.ndarray, scene_days: list[dt.date], days: list[dt.date], daily_reference
) -> tuple[np.ndarray, np.ndarray]:
    """Season ET [mm] of (scenes, ...) fractions, day by day: each day's fraction interpolated
    per pixel between the valid scenes around it (held before the first and after the last),
    times that day's reference ET from the iterable ``daily_reference`` (one array a day, in
    order), summed; and the reference ET's sum [mm].

    The same interpolation as :func:`season_weights` with :func:`season_total_block`, but
    with one day in memory at a time: gridded daily reference ET of a long season would
    otherwise hold days x block pixels at once. NaN where no scene is valid.
    """
    n = fractions.shape[0]
    valid = np.isfinite(fractions)
    f = np.where(valid, fractions, 0.0)
    ts = np.array([(d - days[0]).days for d in scene_days], dtype=float)
    # following[k]: per pixel the first valid scene from k on (-1: none)
    following = np.full((n + 1, *fractions.shape[1:]), -1)
    for k in range(n - 1, -1, -1):
        following[k] = np.where(valid[k], k, following[k + 1])
    before = np.full(fractions.shape[1:], -1)  # the last valid scene on or before the day
    passed = 0  # scenes dated on or before the day
    total = np.zeros(fractions.shape[1:])
    reference = 0.0
    for day, etr in zip(days, daily_reference, strict=True):
        t = float((day - days[0]).days)
        while passed < n and ts[passed] <= t:
            before = np.where(valid[passed], passed, before)
            passed += 1
        after = following[passed]  # the first valid scene dated after the day
        f_before = np.take_along_axis(f, np.maximum(before, 0)[None], axis=0)[0]
        f_after = np.take_along_axis(f, np.maximum(after, 0)[None], axis=0)[0]
        t_before, t_after = ts[np.maximum(before, 0)], ts[np.maximum(after, 0)]
        with np.errstate(invalid="ignore", divide="ignore"):
            w = np.where((before >= 0) & (after >= 0), (t - t_before) / (t_after - t_before), 0.0)
        value = np.where(before < 0, f_after, f_before + w * (f_after - f_before))
        total += value * etr
        reference = reference + etr
    return np.where(valid.any(axis=0), total, np.nan), np.asarray(reference)


def run_season(recipe, season, settings) -> dict:
    """Compute one season's totals from its scenes' outputs in one chunked pass."""
    import dask.array as da
    import rasterio

    from ..io.engine import BlockLayout, Target, run_blockwise
    from ..io.grid import GDAL_OPTIONS, Grid
    from ..io.writers import AtomicRaster, block_size_for, remove_stale_partials
    from ..scene.constants import scene_centre_lonlat

    scenes = {s.id: s for s in recipe.scene}
    unknown = [i for i in season.scenes if i not in scenes]
    if unknown:
        raise RecipeError(f"season {season.id}: scene id(s) {unknown} are not in the recipe.")
    chosen = sorted((scenes[i] for i in season.scenes), key=lambda s: s.acquired_utc)
    for s in chosen:  # a failed or unfinished scene's old rasters are not this recipe's
        state = scene_state(settings.out_dir / s.id)
        if state != "complete":
            raise RecipeError(
                f"season {season.id}: scene {s.id} is not complete ({state}); fix it and run "
                "again (its older outputs, if any, are not used)."
            )
    stem = season.fraction
    paths = [settings.out_dir / s.id / f"{stem}.tif" for s in chosen]
    absent = [str(p) for p in paths if not p.is_file()]
    if absent:
        raise RecipeError(
            f"season {season.id}: {stem} is missing for {len(absent)} scene(s) ({absent[0]}...); "
            "run those scenes first (reference_et_fraction needs humidity and wind at overpass)."
        )
    grid_check(paths)
    with rasterio.open(paths[0]) as src:
        grid = Grid(src.crs, src.transform, src.width, src.height)
    days = season_days(season.start, season.end)
    _, lat = scene_centre_lonlat(grid)
    elevation = (
        season.station_elevation_m
        if season.station_elevation_m is not None
        else chosen[0].overpass.station_elevation_m
    )
    scene_days = [s.acquired_utc.date() for s in chosen]
    gridded = None
    if season.reference_et_rasters is not None:
        sources = gridded_reference_et(recipe, season, days, grid)
        gridded = (sources, scene_days, days)
        weights, reference_total = None, None
        etr = None
    else:
        etr = daily_reference_et(
            Path(_resolve(recipe, season.weather)),
            days,
            math.radians(lat),
            elevation,
            season.reference,
        )
        weights = season_weights(scene_days, days, etr)
        reference_total = float(etr.sum())

    out_dir = output_folder(settings.out_dir, season.id)
    remove_stale_partials(out_dir)
    layout = BlockLayout.over(grid, settings.chunk_size)
    block = block_size_for(layout.chunk)
    fill = {"start": season.start, "end": season.end, "fraction": stem}
    tags = {"season": season.id}
    writers = [
        AtomicRaster.for_variable(name, out_dir, grid, block, tags, fill)
        for name in ("et_season", "mean_fraction", "scene_count", "season_qa")
    ]
    targets = [Target(k, w.dtype, w) for k, w in enumerate(writers)]
    members = season_members(settings.out_dir, chosen)
    n_members = 0 if isinstance(members, str) else len(members.reference_et_factors)
    if n_members:
        for k, name in enumerate(("et_season_p10", "et_season_p50", "et_season_p90"), start=5):
            writers.append(AtomicRaster.for_variable(name, out_dir, grid, block, tags, fill))
            targets.append(Target(k, writers[-1].dtype, writers[-1]))
        bands = tuple(f"member_{k + 1:02d}" for k in range(n_members))
        stack = AtomicRaster.for_variable(
            "et_season_members", out_dir, grid, block, tags, fill, bands=bands
        )
        writers.append(stack)
        targets.append(Target(slice(8, 8 + n_members), stack.dtype, stack))
    with rasterio.Env(**GDAL_OPTIONS):
        result = run_blockwise(
            layout,
            season_block_layers,
            args=(paths, weights, reference_total, gridded, members if n_members else None),
            layers=5 + (3 + n_members if n_members else 0),
            dtype=np.float64,
            targets=targets,
            # dask's own nanmean over the whole array: its summation order, hence its last bits,
            # are the manifest's mean
            reduce_array=lambda array: [
                da.nanmean(array[0]),
                da.nanmean(array[4]),
                *(da.nanmean(array[8 + m]) for m in range(n_members)),
            ],
            outputs=writers,
        )
    mean_total, mean_reference, *member_means = result.reductions
    outputs = {w.path.name: str(w.path) for w in writers}
    if settings.stac:
        outputs[f"{season.id}.stac.json"] = str(season_stac_item(season, grid, writers, out_dir))
    content = {
        "season_id": season.id,
        "status": "complete",
        "start": season.start,
        "end": season.end,
        "fraction": stem,
        "reference_surface": season.reference,
        "scenes": [s.id for s in chosen],
        "scene_dates": [s.acquired_utc.date() for s in chosen],
        "reference_et_total_mm": float(mean_reference),  # the grid's mean when gridded
        "reference_et": "gridded daily rasters" if gridded is not None else "station table",
        "reference_et_daily_mm": None if etr is None else [float(v) for v in etr],
        "mean_et_season_mm": float(mean_total),
        "weights_mm": None
        if weights is None
        else {"lead": weights.lead.tolist(), "trail": weights.trail.tolist()},
        "outputs": outputs,
        "parameters": season.model_dump(mode="json"),
        "inputs": season_inputs(
            settings.out_dir,
            chosen,
            paths,
            reference_et_files(recipe, season, gridded[0])
            if gridded is not None
            else [_resolve(recipe, season.weather)],
        ),
        "uncertainty": season_uncertainty(members, member_means),
        "versions": versions(),
        "caution": "Season totals interpolate between a few scenes; see the README's cautions.",
    }
    write_season_manifest(out_dir / "manifest.json", content)
    return content


def season_stac_item(season, grid, writers: list, out_dir: Path) -> Path:
    """The season's STAC Item: its rasters and manifest, over its days (start to end)."""
    from ..io.cloud import stac_item, write_stac_item

    start = dt.datetime.combine(season.start, dt.time(0, 0), tzinfo=dt.UTC)
    end = dt.datetime.combine(season.end, dt.time(23, 59, 59), tzinfo=dt.UTC)
    item = stac_item(
        season.id,
        None,
        grid,
        {w.path.stem: (w.units, w.description, w.dtype, w.nodata) for w in writers},
        ["manifest.json"],
        False,
        dt.datetime.now(dt.UTC),
        period=(start, end),
        title=f"{season.id}: season ET {season.start} to {season.end}",
    )
    return write_stac_item(item, out_dir / f"{season.id}.stac.json")


def season_uncertainty(members: SeasonMembers | str, member_means: list) -> dict:
    """The manifest's ``uncertainty``: the members' mean season ET and its percentiles over the
    members' own means, what that assumes, or why the season has none."""
    if isinstance(members, str):
        return {"members": 0, "why_none": members}
    return member_spread(member_means, "mean_et_season_mm") | {
        "member_parameters": members.parameters,
        "assumption": MEMBER_ASSUMPTION,
        "percentiles": "over the members' own totals (not of pixels)",
    }


def _resolve(recipe, value: str) -> Path:
    from ..recipe import resolve_path

    return resolve_path(recipe, value)
