"""The season-series demo end to end: 25 scenes over five summers, season totals, zones, and the
comparison recipe (difference, standardized anomaly, McKee et al. 1993 categories, zone tables)."""

from __future__ import annotations

import csv
import json
import shutil
from pathlib import Path

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner

from rasterbudget.cli import main
from rasterbudget.demo import (
    SERIES_DRY_YEAR,
    SERIES_YEARS,
    series_recipe_text,
)
from tests.conftest import render_in_chromium

ROOT = Path(__file__).resolve().parents[1]
SERIES_RECIPE = ROOT / "workflows" / "demo_series.toml"
COMPARE_RECIPE = ROOT / "workflows" / "demo_compare.toml"
TINY = ROOT / "tiny_rasters"


def _absolute(text: str, out: Path, series_out: Path | None = None) -> str:
    text = text.replace('"../tiny_rasters/', f'"{TINY}/')
    if series_out is not None:
        text = text.replace('"../out/demo_series/', f'"{series_out}/')
    return text.replace('out = "../out/demo_series"', f'out = "{out}"').replace(
        'out = "../out/demo_compare"', f'out = "{out}"'
    )


@pytest.fixture(scope="session")
def series_run(tmp_path_factory) -> Path:
    base = tmp_path_factory.mktemp("series")
    out = base / "out"
    recipe = base / "demo_series.toml"
    recipe.write_text(_absolute(SERIES_RECIPE.read_text(), out))
    result = CliRunner().invoke(main, ["run", str(recipe), "--quiet"])
    assert result.exit_code == 0, result.output
    return out


@pytest.fixture(scope="session")
def compare_run(series_run, tmp_path_factory) -> Path:
    base = tmp_path_factory.mktemp("compare")
    out = base / "out"
    recipe = base / "demo_compare.toml"
    recipe.write_text(_absolute(COMPARE_RECIPE.read_text(), out, series_run))
    result = CliRunner().invoke(main, ["compare", str(recipe)])
    assert result.exit_code == 0, result.output
    assert "extremely dry" in result.output
    return out


def test_committed_recipe_is_the_generated_one():
    assert SERIES_RECIPE.read_text() == series_recipe_text()


def test_every_scene_and_season_completes(series_run):
    with (series_run / "batch.csv").open() as f:
        rows = list(csv.DictReader(f))
    assert len(rows) == 25 and {r["status"] for r in rows} == {"done"}
    for year in SERIES_YEARS:
        folder = series_run / f"summer_{year}"
        for name in ("et_season", "mean_fraction", "scene_count", "season_qa"):
            assert (folder / f"{name}.tif").is_file()
        assert (folder / "zones.csv").is_file()
    assert (series_run / "report.html").stat().st_size > 100_000


def test_cloudy_scene_is_filled_and_flagged(series_run):
    # 2025-06-30 carries a cloud (NaN in every band): those pixels count four scenes, flagged
    with rasterio.open(series_run / "summer_2025" / "scene_count.tif") as src:
        count = src.read(1)
    with rasterio.open(series_run / "summer_2025" / "season_qa.tif") as src:
        qa = src.read(1)
    with rasterio.open(series_run / "kessendry_20250630" / "reference_et_fraction.tif") as src:
        missing = ~np.isfinite(src.read(1))
    cloud = missing & (count == 4)
    assert cloud.sum() > 300  # the cloud, about 40 x 32 pixels at 90 m
    assert (qa[cloud] & 1).all()


def test_mean_fraction_is_season_et_over_reference_et(series_run):
    folder = series_run / "summer_2026"
    manifest = json.loads((folder / "manifest.json").read_text())
    with (
        rasterio.open(folder / "et_season.tif") as a,
        rasterio.open(folder / "mean_fraction.tif") as b,
    ):
        np.testing.assert_allclose(
            b.read(1), a.read(1) / manifest["reference_et_total_mm"], rtol=1e-6
        )


def _basin_depth(series_run: Path, year: int, zone: str) -> float:
    with (series_run / f"summer_{year}" / "zones.csv").open() as f:
        return next(float(r["mean_depth_mm"]) for r in csv.DictReader(f) if r["zone_id"] == zone)


def test_dry_year_uses_less_water_in_both_sub_basins(series_run):
    for zone in ("basin_west", "basin_east"):
        depths = {year: _basin_depth(series_run, year, zone) for year in SERIES_YEARS}
        others = [d for y, d in depths.items() if y != SERIES_DRY_YEAR]
        assert depths[SERIES_DRY_YEAR] < min(others), (zone, depths)
    # while the reference ET of the dry summer is the highest
    totals = {
        y: json.loads((series_run / f"summer_{y}" / "manifest.json").read_text())[
            "reference_et_total_mm"
        ]
        for y in SERIES_YEARS
    }
    assert max(totals, key=totals.get) == SERIES_DRY_YEAR


def test_the_report_and_zone_tables_carry_the_members_p10_p90(series_run, compare_run):
    """The series demo runs 8 ensemble members: season totals, zone depths and volumes, the
    zone time series and the comparisons carry p10-p90 bands over the members' own totals."""
    page = (series_run / "report.html").read_text()
    assert page.count("Uncertainty: over 8 ensemble members the mean season ET is") == 5
    assert "Shaded: the ensemble members' p10 to p90" in page
    assert "Whiskers: the members' p10 to p90" in page
    for year in SERIES_YEARS:
        with (series_run / f"summer_{year}" / "zones.csv").open() as f:
            for row in csv.DictReader(f):
                low, mid, high = (float(row[f"volume_m3_{q}"]) for q in ("p10", "p50", "p90"))
                assert 0 < low < mid < high, (year, row["zone_id"])
    with (series_run / "zones_series.csv").open() as f:
        assert all(
            float(r["et_daily_mm_p10"]) < float(r["et_daily_mm_p90"]) for r in csv.DictReader(f)
        )
    summary = json.loads((compare_run / "summer_2025_vs_2024" / "compare.json").read_text())
    spread = summary["uncertainty"]["mean_difference"]
    assert spread["p10"] < spread["p50"] < spread["p90"] < 0  # the dry year: less ET
    assert (
        "Uncertainty: over 8 ensemble members (member k minus member k)"
        in (compare_run / "report.html").read_text()
    )


def _read(path: Path) -> np.ndarray:
    with rasterio.open(path) as src:
        return src.read(1, masked=True).astype(float).filled(np.nan)


def test_anomaly_matches_numpy_on_the_season_stack(series_run, compare_run):
    current = _read(series_run / f"summer_{SERIES_DRY_YEAR}" / "et_season.tif")
    stack = np.stack(
        [
            _read(series_run / f"summer_{y}" / "et_season.tif")
            for y in SERIES_YEARS
            if y != SERIES_DRY_YEAR
        ]
    )
    expected = (current - np.nanmean(stack, axis=0)) / np.nanstd(stack, axis=0, ddof=1)
    z = _read(compare_run / "summer_2025_et_anomaly" / "standardized_anomaly.tif")
    np.testing.assert_allclose(z, expected.astype(np.float32), rtol=1e-5, atol=1e-5)


def test_category_shares_add_up_and_the_dry_year_reads_dry(compare_run):
    summary = json.loads((compare_run / "summer_2025_et_anomaly" / "compare.json").read_text())
    shares = {c["category"]: c["share_of_valid_area"] for c in summary["categories"]}
    assert sum(shares.values()) == pytest.approx(1.0)
    dry = shares["extremely dry"] + shares["severely dry"] + shares["moderately dry"]
    assert dry > 0.5
    basin = next(z for z in summary["zones"] if z["zone_id"] == "basin_west")
    assert basin["standardized_anomaly_mean"] < -1.0
    zone_shares = [v for k, v in basin.items() if k.startswith("share_")]
    assert sum(zone_shares) == pytest.approx(1.0)


def test_zone_difference_against_an_independent_box_average(series_run, compare_run):
    # The zones are rectangles on a projected grid: each cell counts with the share of it inside
    # the rectangle (the overlap of the cell's x and y extents with the rectangle's), by hand.
    zones = json.loads((TINY / "zones.geojson").read_text())["features"]
    field = next(z for z in zones if z["properties"]["zone_id"] == "field_B")
    xs, ys = zip(*field["geometry"]["coordinates"][0], strict=True)
    x0, x1, y0, y1 = min(xs), max(xs), min(ys), max(ys)
    path = compare_run / "summer_2025_vs_2024" / "difference.tif"
    with rasterio.open(path) as src:
        t = src.transform
        diff = src.read(1).astype(np.float64)
    left = t.c + np.arange(diff.shape[1]) * t.a
    top = t.f + np.arange(diff.shape[0]) * t.e
    share_x = np.clip(np.minimum(left + t.a, x1) - np.maximum(left, x0), 0, None) / t.a
    share_y = np.clip(np.minimum(top, y1) - np.maximum(top + t.e, y0), 0, None) / -t.e
    share = share_y[:, None] * share_x[None, :]
    ok = np.isfinite(diff) & (share > 0)
    # cell areas vary by 1e-5 across the scene on its UTM grid: a plain weighted mean suffices
    expected = float((diff[ok] * share[ok]).sum() / share[ok].sum())
    with (compare_run / "summer_2025_vs_2024" / "zones.csv").open() as f:
        row = next(r for r in csv.DictReader(f) if r["zone_id"] == "field_B")
    assert float(row["pixels"]) == pytest.approx(share.sum(), abs=1e-3)  # written to 3 decimals
    assert float(row["difference_mean"]) == pytest.approx(expected, rel=1e-4)
    area = share.sum() * abs(t.a * t.e)  # map area; the ground's differs by UTM's scale factor
    assert float(row["difference_volume_m3"]) == pytest.approx(expected / 1000 * area, rel=2e-3)


def test_comparison_tiles_match_numpy(compare_run):
    folder = compare_run / "july_2026_vs_2025"
    diff = _read(folder / "difference.tif")
    with (folder / "tiles.csv").open() as f:
        tiles = list(csv.DictReader(f))
    tile = tiles[5]
    r0, c0 = int(tile["row_off"]), int(tile["col_off"])
    block = diff[r0 : r0 + int(tile["height"]), c0 : c0 + int(tile["width"])]
    values = block[np.isfinite(block)]
    assert float(tile["difference_mean"]) == pytest.approx(values.mean(), rel=1e-6)
    assert float(tile["difference_p90"]) == pytest.approx(np.percentile(values, 90), rel=1e-6)


def test_comparison_report_is_written(compare_run):
    page = (compare_run / "report.html").read_text()
    assert page.count("<h2>Comparison") == 4
    assert "McKee" in page and "licensed" in page


@pytest.mark.skipif(shutil.which("chromium") is None, reason="headless Chromium not installed")
def test_comparison_report_renders_in_headless_chromium(compare_run, tmp_path):
    shot = render_in_chromium(compare_run / "report.html", tmp_path)
    with rasterio.open(shot) as png:  # the screenshot is a page of maps, not a blank one
        pixels = png.read()
    assert pixels.shape[1:] == (2000, 1200)
    assert pixels.std() > 20
