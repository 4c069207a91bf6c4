"""Zone time series: a row per zone and scene date, monthly and water-year totals per zone that
add up, and the season's zone totals they approximate."""

from __future__ import annotations

import csv
import datetime as dt

import numpy as np
import pytest
from click.testing import CliRunner

from rasterbudget.cli import main
from rasterbudget.season.series import daily_zone_et, water_year
from tests.conftest import ROOT


@pytest.fixture(scope="module")
def season_out(tmp_path_factory):
    out = tmp_path_factory.mktemp("series") / "out"
    recipe = ROOT / "workflows" / "demo_season.toml"
    result = CliRunner().invoke(main, ["run", str(recipe), "--out", str(out), "--quiet"])
    assert result.exit_code == 0, result.output
    return out


def _rows(path):
    with path.open(newline="") as f:
        return list(csv.DictReader(f))


def test_a_row_per_zone_and_scene(season_out):
    rows = _rows(season_out / "zones_series.csv")
    zones = {r["zone_id"] for r in _rows(season_out / "kessendry_20260614" / "zones.csv")}
    assert len(rows) == 2 * len(zones)
    assert {r["date"] for r in rows} == {"2026-06-14", "2026-08-23"}
    for r in rows:  # the fraction times a plausible hourly-to-daily ratio is the ET, roughly
        assert 0.0 <= float(r["reference_et_fraction"]) < 1.5
        assert 0.0 <= float(r["valid_share"]) <= 1.0


def test_months_add_up_to_the_water_year_and_near_the_season_zone_total(season_out):
    monthly = _rows(season_out / "zones_monthly.csv")
    season_zones = {
        r["zone_id"]: float(r["mean_depth_mm"])
        for r in _rows(season_out / "kessendry_summer_2026" / "zones.csv")
    }
    for zone, season_total in season_zones.items():
        months = [
            float(r["et_mm"]) for r in monthly if r["zone_id"] == zone and r["period"] == "month"
        ]
        (year,) = [
            float(r["et_mm"])
            for r in monthly
            if r["zone_id"] == zone and r["period"] == "water_year"
        ]
        assert len(months) == 3 and sum(months) == pytest.approx(year, rel=1e-8)  # CSV digits
        # the zone-level spreading against the zone mean of the pixel totals: close
        assert year == pytest.approx(season_total, rel=0.05)


def test_the_report_shows_the_zone_series(season_out):
    page = (season_out / "report.html").read_text()
    assert "Zone time series" in page and "zones_monthly.csv" in page


def test_daily_zone_et_interpolates_and_holds_the_ends():
    days = [dt.date(2026, 6, 1) + dt.timedelta(days=k) for k in range(10)]
    etr = np.full(10, 5.0)
    got = daily_zone_et([days[2], days[6]], [0.4, 0.8], days, etr)
    np.testing.assert_allclose(got[:3], 2.0)  # held before the first scene
    assert got[4] == pytest.approx(5.0 * 0.6)  # half way
    np.testing.assert_allclose(got[6:], 4.0)  # held after the last
    assert water_year(dt.date(2025, 10, 1)) == 2026 and water_year(dt.date(2026, 9, 30)) == 2026
