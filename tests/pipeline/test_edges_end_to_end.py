"""The edges method end to end on the demo (workflows/demo_edges.toml)."""

from __future__ import annotations

import json

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner

from rasterbudget.cli import main
from tests.conftest import ROOT


@pytest.fixture(scope="module")
def edges_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("edges") / "out"
    result = CliRunner().invoke(
        main, ["run", str(ROOT / "workflows" / "demo_edges.toml"), "--out", str(out), "--quiet"]
    )
    assert result.exit_code == 0, result.output
    return out


@pytest.mark.parametrize("scene", ["kessendry_20260614", "kessendry_20260823"])
def test_edges_scene_closes_and_records_its_edges(edges_run, scene):
    folder = edges_run / scene
    read = {
        n: rasterio.open(folder / f"{n}.tif").read(1).astype(np.float64)
        for n in (
            "net_radiation",
            "ground_heat_flux",
            "sensible_heat_flux",
            "latent_heat_flux",
            "evaporative_fraction",
        )
    }
    valid = np.isfinite(read["net_radiation"])
    closure = read["ground_heat_flux"] + read["sensible_heat_flux"] + read["latent_heat_flux"]
    np.testing.assert_allclose(read["net_radiation"][valid], closure[valid], atol=1e-3)
    ef = read["evaporative_fraction"][np.isfinite(read["evaporative_fraction"])]
    assert ef.min() >= 0 and ef.max() <= 1
    manifest = json.loads((folder / "manifest.json").read_text())
    assert manifest["sensible_heat_method"] == "edges"
    e = manifest["edges"]
    assert e["dry_slope"] < 0  # radiation-controlled branch: brighter dry surfaces are cooler
    assert e["dry_intercept"] - e["wet_intercept"] > 20
    assert len(e["bin_albedo"]) >= 4
    assert (folder / "edges.png").stat().st_size > 10_000
    qa = rasterio.open(folder / "qa_flags.tif").read(1)
    assert not ((qa & (128 | 256)) > 0).any()  # no anchor bits for the edges method


def test_edges_need_no_wind_and_no_humidity(tmp_path):
    from tests.conftest import demo_recipe_dict, write_toml

    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    scene = data["scene"][0]
    scene["sensible_heat"] = "edges"
    for key in ("wind_speed_m_s", "relative_humidity_pct"):
        scene["overpass"].pop(key, None)
    scene["daily"].pop("wind_speed_m_s", None)
    recipe = write_toml(data, tmp_path / "recipe.toml")
    out = tmp_path / "out"
    result = CliRunner().invoke(
        main, ["run", str(recipe), "--out", str(out), "--quiet", "--no-quicklook"]
    )
    assert result.exit_code == 0, result.output
    manifest = json.loads((out / "kessendry_20260614" / "manifest.json").read_text())
    assert manifest["reference_et"]["hourly_mm"] is None  # no weather for it, none needed
    et = rasterio.open(out / "kessendry_20260614" / "et_daily.tif").read(1)
    assert np.isfinite(et).mean() > 0.99
