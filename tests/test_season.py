"""Season totals against hand-computable cases, and end to end on the demo."""

from __future__ import annotations

import datetime as dt
import json

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner

from rasterbudget.cli import main
from rasterbudget.season.totals import (
    SEASON_EMPTY,
    SEASON_FILLED,
    season_days,
    season_total_block,
    season_total_by_day,
    season_weights,
)
from tests.conftest import ROOT

DAYS = season_days(dt.date(2026, 6, 1), dt.date(2026, 6, 30))
SCENES = [dt.date(2026, 6, 6), dt.date(2026, 6, 16), dt.date(2026, 6, 26)]
ETR = np.linspace(6.0, 9.0, len(DAYS))  # invented daily reference ET [mm d-1]


def test_constant_fraction_gives_fraction_times_total_reference_et():
    w = season_weights(SCENES, DAYS, ETR)
    fractions = np.full((3, 2, 2), 0.8)
    total, count, qa = season_total_block(fractions, w)
    np.testing.assert_allclose(total, 0.8 * ETR.sum(), rtol=1e-12)
    assert (count == 3).all() and (qa == 0).all()


def test_linear_interpolation_between_scenes_day_by_day():
    w = season_weights(SCENES, DAYS, ETR)
    f = np.array([0.4, 1.0, 0.7])
    total, _, _ = season_total_block(f[:, None, None], w)
    # by hand: the fraction on each day, then the sum of fraction x reference ET
    t = np.array([(d - DAYS[0]).days for d in DAYS], dtype=float)
    ts = np.array([(d - DAYS[0]).days for d in SCENES], dtype=float)
    daily = np.interp(t, ts, f)  # np.interp holds the end values constant outside
    assert total[0, 0] == pytest.approx((daily * ETR).sum(), rel=1e-12)


def test_a_masked_scene_is_filled_from_its_neighbours_and_flagged():
    w = season_weights(SCENES, DAYS, ETR)
    fractions = np.array([[[0.4, 0.4]], [[np.nan, 1.0]], [[0.7, 0.7]]])  # (3, 1, 2)
    total, count, qa = season_total_block(fractions, w)
    t = np.array([(d - DAYS[0]).days for d in DAYS], dtype=float)
    ts = np.array([(d - DAYS[0]).days for d in SCENES], dtype=float)
    filled = np.interp(t, ts[[0, 2]], [0.4, 0.7])
    assert total[0, 0] == pytest.approx((filled * ETR).sum(), rel=1e-12)
    assert count.tolist() == [[2, 3]] and qa.tolist() == [[SEASON_FILLED, 0]]
    empty, count, qa = season_total_block(np.full((3, 1, 1), np.nan), w)
    assert np.isnan(empty[0, 0]) and qa[0, 0] == SEASON_FILLED | SEASON_EMPTY


def test_day_by_day_totals_equal_the_day_weights_with_gaps_and_pixel_reference_et():
    """The gridded path streams the days (one in memory at a time); the station path sums day
    weights per scene. Random fractions with missing scenes (a pixel with none at all, scenes
    on the first and last day) and a different reference ET per pixel: the same totals."""
    rng = np.random.default_rng(7)
    scenes = [dt.date(2026, 6, 1), *SCENES, dt.date(2026, 6, 30)]
    fractions = rng.uniform(0.1, 1.2, (len(scenes), 6, 5))
    fractions[rng.random(fractions.shape) < 0.3] = np.nan
    fractions[:, 0, 0] = np.nan
    etr = ETR[:, None, None] * rng.uniform(0.7, 1.3, (len(DAYS), 6, 5))
    streamed, reference = season_total_by_day(fractions, scenes, DAYS, iter(etr))
    expected, _, _ = season_total_block(fractions, season_weights(scenes, DAYS, etr))
    np.testing.assert_allclose(streamed, expected, rtol=1e-12, equal_nan=True)
    assert np.isnan(streamed[0, 0])
    np.testing.assert_allclose(reference, etr.sum(axis=0), rtol=1e-12)


def test_demo_season_end_to_end(tmp_path):
    out = tmp_path / "out"
    result = CliRunner().invoke(
        main,
        [
            "run",
            str(ROOT / "workflows" / "demo_season.toml"),
            "--out",
            str(out),
            "--quiet",
            "--no-quicklook",
        ],
    )
    assert result.exit_code == 0, result.output
    folder = out / "kessendry_summer_2026"
    manifest = json.loads((folder / "manifest.json").read_text())
    total = rasterio.open(folder / "et_season.tif").read(1).astype(np.float64)
    count = rasterio.open(folder / "scene_count.tif").read(1)
    fractions = np.stack(
        [
            rasterio.open(out / s / "reference_et_fraction.tif").read(1).astype(np.float64)
            for s in manifest["scenes"]
        ]
    )
    both = np.isfinite(fractions).all(axis=0)
    assert (count[both] == 2).all()
    # with two scenes: lead x f1 + pair weights + trail x f2, checked against the stored weights
    lead, trail = manifest["weights_mm"]["lead"], manifest["weights_mm"]["trail"]
    etr_total = manifest["reference_et_total_mm"]
    between = etr_total - lead[0] - trail[1]
    assert between > 0
    mean_fraction = np.nanmean(fractions[:, both], axis=0)
    assert np.all(total[both] >= 0)
    # the total lies between the smaller and larger fraction times the season's reference ET
    low = np.minimum(fractions[0], fractions[1])[both] * etr_total
    high = np.maximum(fractions[0], fractions[1])[both] * etr_total
    assert np.all(total[both] >= low - 1e-3) and np.all(total[both] <= high + 1e-3)
    assert 0.3 * etr_total < np.nanmean(mean_fraction) * etr_total < 1.2 * etr_total


def test_missing_weather_days_are_listed(tmp_path):
    from rasterbudget.errors import RecipeError
    from rasterbudget.season.totals import daily_reference_et

    table = tmp_path / "weather.csv"
    table.write_text("date,reference_et_mm\n2026-06-01,6.0\n2026-06-03,6.5\n")
    with pytest.raises(RecipeError, match="lacks 1 day"):
        daily_reference_et(
            table, season_days(dt.date(2026, 6, 1), dt.date(2026, 6, 3)), 0.7, 1500.0, "tall"
        )
