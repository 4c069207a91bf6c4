"""Zone time series of a recipe run: per zone and scene date the zone's ET, reference-ET
fraction and shares; per zone, season and month (and water year) the ET totals.

Scene rows come from each scene's zone table and a zone pass over its reference-ET fraction.
Monthly totals spread each season over its days at the zone level: the zone-mean fraction of
each scene, interpolated linearly in time between scenes and held before the first and after
the last (as the pixels are), times the station's daily reference ET. Where pixels miss scenes
unevenly, this differs slightly from the zone mean of the pixel totals (``et_season``): the
season's zone table holds the latter.
"""

from __future__ import annotations

import csv
import datetime as dt
from pathlib import Path

import numpy as np

from ..methods.ensemble import member_percentiles

SERIES_TABLE = "zones_series.csv"
MONTHLY_TABLE = "zones_monthly.csv"


def scene_rows(out_dir: Path, scenes: list, fractions: dict[str, dict]) -> list[dict]:
    """One row per zone and completed scene (sorted by date). ``fractions`` holds per scene
    and zone the zone's mean reference-ET fraction and, with an ensemble, its members' (an
    array) with their reference-ET factors: the members' daily ET then gives the row's p10,
    p50 and p90."""
    from .zones import reference_depth

    rows = []
    for scene in sorted(scenes, key=lambda s: s.acquired_utc):
        table = out_dir / scene.id / "zones.csv"
        if not table.is_file():
            continue
        zones = fractions.get(scene.id, {})
        daily_reference = reference_depth(out_dir / scene.id)
        with table.open(newline="", encoding="utf-8") as f:
            for zone in csv.DictReader(f):
                mine = zones.get(zone["zone_id"], {})
                row = {
                    "zone_id": zone["zone_id"],
                    "scene_id": scene.id,
                    "date": scene.acquired_utc.date().isoformat(),
                    "et_daily_mm": float(zone["mean_depth_mm"]),
                    "reference_et_fraction": mine.get("fraction", float("nan")),
                    "valid_share": float(zone["valid_share"]),
                    "flagged_share": float(zone["flagged_share"]),
                    "covered_share": float(zone["covered_share"]),
                }
                if "members" in mine:
                    # each member's daily ET: its fraction x its own daily reference ET (the
                    # station's, from the scene's manifest, times its factor)
                    daily = mine["members"] * mine["factors"] * (daily_reference or np.nan)
                    for suffix, value in member_percentiles(daily).items():
                        row[f"et_daily_mm_{suffix}"] = float(value)
                rows.append(row)
    return rows


def zone_fraction_means(recipe, settings, scene_ids: list[str]) -> dict[str, dict[str, dict]]:
    """Per scene and zone the coverage-and-area weighted mean reference-ET fraction
    (``fraction``) and, where the scene has ensemble members, the members' (``members``, an
    array) and their reference-ET factors (``factors``)."""
    import json

    import rasterio

    from ..catalog.variables import MEMBER_FRACTIONS
    from ..io.engine import effective_chunk_size
    from ..recipe import resolve_path
    from .zones import zone_rows, zone_totals_of, zones_on_grid

    out: dict[str, dict[str, dict]] = {}
    chunk = effective_chunk_size(settings.chunk_size)
    for sid in scene_ids:
        raster = settings.out_dir / sid / "reference_et_fraction.tif"
        if not raster.is_file():
            continue
        with rasterio.open(raster) as src:
            zones = zones_on_grid(
                resolve_path(recipe, recipe.zones.path), recipe.zones.id_property, src.crs
            )
        ids = zones.ids
        # over valid unflagged cells, as the zone tables' depths (flagged: reported apart)
        qa = settings.out_dir / sid / "qa_flags.tif"
        qa = qa if qa.is_file() else None
        stack = settings.out_dir / sid / f"{MEMBER_FRACTIONS}.tif"
        rasters = [(raster, False)] + ([(stack, True)] if stack.is_file() else [])
        # one pass for the fraction and the members' fractions
        totals, *members = zone_totals_of(rasters, zones.geometries, chunk, qa)
        # mean_depth_mm is the weighted mean of the raster's values (here a fraction, not mm)
        rows = zone_rows(ids, totals, "reference_et_fraction")
        out[sid] = {r["zone_id"]: {"fraction": r["mean_depth_mm"]} for r in rows}
        if not members:
            continue
        manifest = json.loads((settings.out_dir / sid / "manifest.json").read_text())
        factors = np.array([m["reference_et_factor"] for m in manifest["ensemble"]])
        per_member = [zone_rows(ids, t, MEMBER_FRACTIONS) for t in members[0]]
        for k, zone in enumerate(ids):
            fractions = np.array([m[k]["mean_depth_mm"] for m in per_member])
            out[sid][zone] |= {"members": fractions, "factors": factors}
    return out


def daily_zone_et(
    scene_dates: list[dt.date], fractions: list[float], days: list[dt.date], etr: np.ndarray
) -> np.ndarray:
    """A zone's daily ET [mm d-1]: its scene fractions interpolated linearly over the days (held
    before the first and after the last valid scene) times each day's reference ET."""
    known = [(d, f) for d, f in zip(scene_dates, fractions, strict=True) if np.isfinite(f)]
    if not known:
        return np.full(len(days), np.nan)
    x = np.array([(d - days[0]).days for d, _ in known], dtype=float)
    y = np.array([f for _, f in known])
    t = np.arange(len(days), dtype=float)
    return np.interp(t, x, y) * etr  # np.interp holds the ends


def water_year(day: dt.date) -> int:
    """The water year a day belongs to: October to September, named by the year it ends in
    (the U.S. convention; common practice)."""
    return day.year + 1 if day.month >= 10 else day.year


def monthly_rows(
    season_id: str,
    rows: list[dict],
    scene_ids: list[str],
    days: list[dt.date],
    etr: np.ndarray | dict[str, np.ndarray],
    fractions: dict[str, dict] | None = None,
) -> list[dict]:
    """Per zone the season's ET and reference ET by month and by water year [mm]; with the
    ensemble members' zone fractions (``fractions``, as :func:`zone_fraction_means` gives
    them), the p10, p50 and p90 of the members' own totals. ``etr`` is the station's daily
    reference ET, or each zone's own (gridded: :func:`zone_daily_reference`)."""
    out = []
    zones = sorted({r["zone_id"] for r in rows})
    station = etr
    for zone in zones:
        etr = station[zone] if isinstance(station, dict) else station
        mine = sorted(
            (r for r in rows if r["zone_id"] == zone and r["scene_id"] in scene_ids),
            key=lambda r: r["date"],
        )
        dates = [dt.date.fromisoformat(r["date"]) for r in mine]
        daily = daily_zone_et(dates, [r["reference_et_fraction"] for r in mine], days, etr)
        found = [(fractions or {}).get(r["scene_id"], {}).get(zone, {}) for r in mine]
        members = []
        if found and all("members" in f for f in found):
            members = [
                daily_zone_et(dates, [f["members"][m] for f in found], days, etr * factor)
                for m, factor in enumerate(found[0]["factors"])
            ]
        for key, label in ((lambda d: f"{d:%Y-%m}", "month"), (water_year, "water_year")):
            groups: dict = {}
            for k, day in enumerate(days):
                groups.setdefault(key(day), []).append(k)
            for period, index in groups.items():
                row = {
                    "season_id": season_id,
                    "zone_id": zone,
                    "period": label,
                    "value": str(period),
                    "days": len(index),
                    "et_mm": float(np.sum(daily[index])),
                    "reference_et_mm": float(np.sum(etr[index])),
                }
                if members:
                    totals = [float(np.sum(m[index])) for m in members]
                    for suffix, value in member_percentiles(totals).items():
                        row[f"et_mm_{suffix}"] = float(value)
                out.append(row)
    return out


def zone_daily_reference(recipe, settings, manifest: dict) -> dict[str, np.ndarray]:
    """Each zone's daily reference ET [mm d-1] over a gridded season's days: the coverage-and-
    area weighted mean of each day's raster over the zone, in one chunked pass (the zones'
    cell coverage found once per block, the days read one at a time)."""
    import operator

    import rasterio
    from rasterio import features

    from ..io.engine import BlockLayout, effective_chunk_size, run_blockwise
    from ..io.grid import Grid
    from ..recipe import resolve_path
    from .totals import gridded_reference_et, season_days
    from .zones import zones_on_grid

    season = next(s for s in recipe.season if s.id == manifest["season_id"])
    with rasterio.open(manifest["outputs"]["et_season.tif"]) as src:
        grid = Grid(src.crs, src.transform, src.width, src.height)
    days = season_days(season.start, season.end)
    sources = gridded_reference_et(recipe, season, days, grid)
    zones = zones_on_grid(
        resolve_path(recipe, recipe.zones.path), recipe.zones.id_property, grid.crs
    )
    ids, geometries = zones.ids, zones.geometries
    result = run_blockwise(
        BlockLayout(grid.height, grid.width, effective_chunk_size(settings.chunk_size)),
        _zone_daily_sums,
        args=(sources, geometries, [features.bounds(g) for g in geometries], grid),
        combine=operator.add,  # the blocks' one-item lists, added in row-major order below
    )
    sums = np.sum(result.summary, axis=0)  # (days, 2, zones)
    with np.errstate(invalid="ignore", divide="ignore"):
        means = sums[:, 0] / sums[:, 1]
    return {zone: means[:, k] for k, zone in enumerate(ids)}


def _zone_daily_sums(sources, geometries, boxes, grid, location) -> list[np.ndarray]:
    """Per day and zone of one block: the weighted sum of the day's reference ET and the weight
    (coverage x ground area) of its valid cells."""
    from ..io.grid import read_window
    from .zones import block_coverage

    (r0, r1), (c0, c1) = location
    out = np.zeros((len(sources), 2, len(geometries)))
    coverage = block_coverage(geometries, boxes, grid, location)
    if not coverage:
        return [out]
    for d, source in enumerate(sources):
        values = read_window(source, slice(r0, r1), slice(c0, c1))
        for k, rows, cols, _, weight in coverage:
            picked = values[rows, cols]
            ok = np.isfinite(picked)
            out[d, 0, k] = (weight[ok] * picked[ok]).sum()
            out[d, 1, k] = weight[ok].sum()
    return [out]


def write_series(out_dir: Path, scene: list[dict], monthly: list[dict]) -> list[Path]:
    from ..io.writers import write_text_atomic
    from ..scene.summaries import rows_to_csv

    written = [write_text_atomic(out_dir / SERIES_TABLE, rows_to_csv(scene))]
    if monthly:
        written.append(write_text_atomic(out_dir / MONTHLY_TABLE, rows_to_csv(monthly)))
    return written
