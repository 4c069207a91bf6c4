"""Uncertainty carried through: each ensemble member's reference-ET fractions per scene, its own
season total, its zone depths and volumes, its season differences, and the p10, p50 and p90
taken over the members' own totals (member k of every scene being one draw)."""

from __future__ import annotations

import csv
import datetime as dt
import json

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner

from rasterbudget.cli import main
from rasterbudget.io.engine import BlockLayout, Target, run_blockwise
from rasterbudget.io.grid import Grid
from rasterbudget.io.writers import AtomicRaster
from rasterbudget.season.totals import season_total_block, season_weights
from tests.conftest import ROOT

SEASON = "kessendry_summer_2026"
SCENES = ("kessendry_20260614", "kessendry_20260823")

#: Members that perturb nothing: the central run's anchor percentiles, factors of 1, offsets 0.
UNPERTURBED = """members = 3
cold_percentile_range = [5.0, 5.0]
hot_percentile_range = [95.0, 95.0]
cold_anchor_factor_range = [1.0, 1.0]
air_temperature_offset_range_c = [0.0, 0.0]
wind_factor_range = [1.0, 1.0]
surface_temperature_offset_range_k = [0.0, 0.0]
albedo_offset_range = [0.0, 0.0]
reference_et_factor_range = [1.0, 1.0]
"""


def season_recipe(tmp_path, uncertainty: str, name: str = "recipe.toml"):
    """The season demo recipe with absolute paths and ``[defaults.uncertainty]``."""
    text = (ROOT / "workflows" / "demo_season.toml").read_text()
    text = text.replace('"../', f'"{ROOT}/')
    text = text.replace(
        "[defaults.residual]", f"[defaults.uncertainty]\n{uncertainty}\n[defaults.residual]"
    )
    path = tmp_path / name
    path.write_text(text)
    return path


def run(recipe, out):
    result = CliRunner().invoke(
        main, ["run", str(recipe), "--out", str(out), "--quiet", "--no-quicklook"]
    )
    assert result.exit_code == 0, result.output


def read(path, band=None):
    with rasterio.open(path) as src:
        return src.read(band).astype(np.float64) if band else src.read().astype(np.float64)


def rows(path):
    with path.open(newline="") as f:
        return list(csv.DictReader(f))


@pytest.fixture(scope="module")
def ensemble_out(tmp_path_factory):
    """The season demo with 8 members over the default ranges."""
    tmp = tmp_path_factory.mktemp("members")
    out = tmp / "out"
    run(season_recipe(tmp, "members = 8\n"), out)
    return out


def test_a_multiband_target_gets_its_layers_in_both_engine_modes(tmp_path):
    from rasterio.crs import CRS
    from rasterio.transform import from_origin

    grid = Grid(CRS.from_epsg(32613), from_origin(500000.0, 4400000.0, 30.0, 30.0), 40, 24)
    layout = BlockLayout(grid.height, grid.width, 16)

    def block(location):
        (r0, r1), (c0, c1) = location
        rr, cc = np.mgrid[r0:r1, c0:c1]
        return np.stack([rr * 100.0 + cc + k for k in range(4)])

    for mode, reduce_array in (("in tasks", None), ("as an array", lambda a: [a.sum()])):
        writer = AtomicRaster(
            tmp_path / f"stack_{mode}.tif",
            grid,
            "float32",
            float("nan"),
            16,
            "stack",
            "1",
            "test",
            bands=("b1", "b2", "b3"),
        )
        run_blockwise(
            layout,
            block,
            layers=4,
            targets=[Target(slice(1, 4), "float32", writer)],
            reduce_array=reduce_array,
            outputs=[writer],
        )
        rr, cc = np.mgrid[0 : grid.height, 0 : grid.width]
        with rasterio.open(writer.path) as src:
            assert src.count == 3 and src.descriptions == ("b1", "b2", "b3")
            for k in range(3):
                np.testing.assert_array_equal(src.read(k + 1), rr * 100.0 + cc + k + 1)


def test_unperturbed_members_reproduce_the_central_season_and_zones(tmp_path):
    out = tmp_path / "out"
    run(season_recipe(tmp_path, UNPERTURBED), out)
    season = out / SEASON
    central = read(season / "et_season.tif", 1)
    members = read(season / "et_season_members.tif")
    assert members.shape[0] == 3
    # members restart from the central run's stability and stop within 0.1 W m-2 of H, about
    # 0.003 mm d-1 of daily ET (test_uncertainty): at most that over the season's 92 days
    for member in members:
        np.testing.assert_allclose(member, central, atol=0.003 * 92)
    manifest = json.loads((season / "manifest.json").read_text())
    p = manifest["uncertainty"]["mean_et_season_mm"]
    assert p["p10"] == pytest.approx(manifest["mean_et_season_mm"], rel=2e-4)
    assert p["p90"] == pytest.approx(manifest["mean_et_season_mm"], rel=2e-4)
    for row in rows(season / "zones.csv"):
        for suffix in ("p10", "p50", "p90"):
            assert float(row[f"mean_depth_mm_{suffix}"]) == pytest.approx(
                float(row["mean_depth_mm"]), rel=2e-4
            )
            assert float(row[f"volume_m3_{suffix}"]) == pytest.approx(
                float(row["volume_m3"]), rel=2e-4
            )


def test_each_members_season_is_its_own_fractions_times_its_own_reference_et(ensemble_out):
    manifest = json.loads((ensemble_out / SEASON / "manifest.json").read_text())
    fractions = np.stack(
        [read(ensemble_out / s / "reference_et_fraction_members.tif") for s in SCENES]
    )
    start = dt.date.fromisoformat(str(manifest["start"]))
    days = [start + dt.timedelta(days=k) for k in range(len(manifest["reference_et_daily_mm"]))]
    scene_days = [dt.date.fromisoformat(str(d)) for d in manifest["scene_dates"]]
    weights = season_weights(scene_days, days, np.asarray(manifest["reference_et_daily_mm"]))
    members = read(ensemble_out / SEASON / "et_season_members.tif")
    parameters = manifest["uncertainty"]["member_parameters"]
    assert len(parameters) == members.shape[0] == 8
    for m, member in enumerate(members):
        expected = season_total_block(fractions[:, m], weights)[0]
        expected *= parameters[m]["reference_et_factor"]
        np.testing.assert_allclose(member, expected.astype(np.float32), rtol=1e-6)
    # p10, p50, p90 rasters: per pixel over the members' totals
    for name, q in (("p10", 10), ("p50", 50), ("p90", 90)):
        np.testing.assert_allclose(
            read(ensemble_out / SEASON / f"et_season_{name}.tif", 1),
            np.percentile(members, q, axis=0).astype(np.float32),
            rtol=1e-6,
        )
    # the manifest's percentiles: over the members' own season means, not over pixels
    means = [np.nanmean(m) for m in members]
    spread = manifest["uncertainty"]["mean_et_season_mm"]
    assert spread["p10"] == pytest.approx(np.percentile(means, 10), rel=1e-6)
    assert spread["p90"] == pytest.approx(np.percentile(means, 90), rel=1e-6)
    assert spread["p10"] < manifest["mean_et_season_mm"] < spread["p90"]
    assert "fully correlated" in manifest["uncertainty"]["assumption"]


def test_zone_percentiles_are_over_the_members_own_zone_totals(ensemble_out):
    from rasterbudget.season.zones import load_zones, polygon_area, zone_rows, zone_totals

    raster = ensemble_out / SEASON / "et_season_members.tif"
    with rasterio.open(raster) as src:
        crs = src.crs
    ids, _, _, geometries = load_zones(ROOT / "tiny_rasters" / "zones.geojson", "zone_id", crs)
    areas = [polygon_area(g, crs.to_wkt()) for g in geometries]
    per_member = []
    for band in range(1, 9):  # each band alone, as a one-band raster
        with rasterio.open(raster) as src:
            profile = src.profile | {"count": 1}
            data = src.read(band)
        single = ensemble_out / f"member_{band}.tif"
        with rasterio.open(single, "w", **profile) as dst:
            dst.write(data, 1)
        qa = ensemble_out / SEASON / "season_qa.tif"  # flagged cells apart, as the table's
        per_member.append(zone_rows(ids, zone_totals(single, geometries, 64, qa), "et", areas))
    table = {r["zone_id"]: r for r in rows(ensemble_out / SEASON / "zones.csv")}
    for k, zone in enumerate(ids):
        depths = [m[k]["mean_depth_mm"] for m in per_member]
        volumes = [m[k]["volume_m3"] for m in per_member]
        for suffix, q in (("p10", 10), ("p50", 50), ("p90", 90)):
            assert float(table[zone][f"mean_depth_mm_{suffix}"]) == pytest.approx(
                np.percentile(depths, q), rel=1e-8
            )
            assert float(table[zone][f"volume_m3_{suffix}"]) == pytest.approx(
                np.percentile(volumes, q), rel=1e-8
            )
        # in each member the volume is its depth times the zone's unflagged area on the grid
        row = table[zone]
        unflagged = float(row["area_in_grid_m2"]) * (1.0 - float(row["flagged_share"]))
        assert float(row["volume_m3_p50"]) == pytest.approx(
            float(row["mean_depth_mm_p50"]) / 1000.0 * unflagged, rel=1e-6
        )


def test_the_zone_series_has_each_dates_and_months_member_band(ensemble_out):
    series = rows(ensemble_out / "zones_series.csv")
    assert series
    for r in series:
        low, mid, high = (float(r[f"et_daily_mm_{s}"]) for s in ("p10", "p50", "p90"))
        assert low <= mid <= high
        assert low < high  # the members differ
    monthly = rows(ensemble_out / "zones_monthly.csv")
    for r in monthly:
        assert float(r["et_mm_p10"]) <= float(r["et_mm_p50"]) <= float(r["et_mm_p90"])
    # months add up per member, so the water year's median lies within the months' bands' sum
    zone = monthly[0]["zone_id"]
    months = [r for r in monthly if r["zone_id"] == zone and r["period"] == "month"]
    (year,) = [r for r in monthly if r["zone_id"] == zone and r["period"] == "water_year"]
    assert sum(float(r["et_mm_p10"]) for r in months) <= float(year["et_mm_p50"])
    assert float(year["et_mm_p50"]) <= sum(float(r["et_mm_p90"]) for r in months)


def test_a_comparison_of_two_ensemble_seasons_carries_member_differences(tmp_path, ensemble_out):
    from rasterbudget.season.compare import run_compare

    current = ensemble_out / SEASON / "et_season.tif"
    # the same season against itself: every member's difference is zero
    summary = run_compare(current, tmp_path / "same", current, chunk=64, tile_size=50)
    assert summary["uncertainty"]["members"] == 8
    assert summary["uncertainty"]["mean_difference"] == {"p10": 0.0, "p50": 0.0, "p90": 0.0}
    # against the central raster of a run without members: none, and why
    other = tmp_path / "plain.tif"
    other.write_bytes(current.read_bytes())
    summary = run_compare(current, tmp_path / "plain", other, chunk=64, tile_size=50)
    assert summary["uncertainty"]["members"] == 0
    assert "no member stacks" in summary["uncertainty"]["why_none"]


def test_a_comparison_takes_member_k_minus_member_k(tmp_path, ensemble_out):
    from rasterbudget.season.compare import run_compare

    season = ensemble_out / SEASON
    previous_dir = tmp_path / "previous_season"
    previous_dir.mkdir()
    # a previous season: every member's total scaled by 0.8
    for name in ("et_season.tif", "et_season_members.tif"):
        with rasterio.open(season / name) as src:
            profile, data = src.profile, src.read()
            descriptions = src.descriptions
        with rasterio.open(previous_dir / name, "w", **profile) as dst:
            dst.write(data * np.float32(0.8))
            dst.descriptions = descriptions
    (previous_dir / "manifest.json").write_text((season / "manifest.json").read_text())
    summary = run_compare(
        season / "et_season.tif",
        tmp_path / "cmp",
        previous_dir / "et_season.tif",
        chunk=64,
        tile_size=50,
        zones=(ROOT / "tiny_rasters" / "zones.geojson", "zone_id"),
    )
    members = read(season / "et_season_members.tif")
    expected = [np.nanmean(m - np.float32(0.8) * m) for m in members.astype(np.float32)]
    spread = summary["uncertainty"]["mean_difference"]
    assert spread["p50"] == pytest.approx(np.percentile(expected, 50), rel=1e-5)
    np.testing.assert_allclose(
        read(tmp_path / "cmp" / "difference_p90.tif", 1),
        np.percentile(members - (members.astype(np.float32) * np.float32(0.8)), 90, axis=0),
        rtol=1e-5,
    )
    for zone in summary["zones"]:
        assert zone["difference_mean_p10"] <= zone["difference_mean_p90"]
        assert not any(k.startswith("difference_member_") for k in zone)


def test_a_season_whose_scenes_differ_in_members_has_none_and_says_why(tmp_path):
    out = tmp_path / "out"
    text = season_recipe(tmp_path, "members = 4\n").read_text()
    # the second scene draws its members with another seed
    text = text.replace(
        'id = "kessendry_20260823"',
        'id = "kessendry_20260823"\nuncertainty = { members = 4, seed = 7 }',
    )
    recipe = tmp_path / "mixed.toml"
    recipe.write_text(text)
    run(recipe, out)
    manifest = json.loads((out / SEASON / "manifest.json").read_text())
    assert manifest["uncertainty"]["members"] == 0
    assert "kessendry_20260823" in manifest["uncertainty"]["why_none"]
    assert not (out / SEASON / "et_season_members.tif").exists()
    assert "mean_depth_mm_p10" not in rows(out / SEASON / "zones.csv")[0]


def test_a_season_flags_cells_any_scene_flagged_and_its_zones_report_them_apart(ensemble_out):
    from rasterbudget.catalog.qa import QA
    from rasterbudget.season.totals import SEASON_UNRELIABLE

    season_bits = read(ensemble_out / SEASON / "season_qa.tif", 1).astype(int)
    scene_bits = [read(ensemble_out / s / "qa_flags.tif", 1).astype(int) for s in SCENES]
    flagged = np.any([(b & int(QA.RESIDUAL_UNRELIABLE_CLASS)) != 0 for b in scene_bits], axis=0)
    assert flagged.any()
    np.testing.assert_array_equal((season_bits & SEASON_UNRELIABLE) != 0, flagged)
    table = rows(ensemble_out / SEASON / "zones.csv")
    assert any(float(r["flagged_share"]) > 0 for r in table)
