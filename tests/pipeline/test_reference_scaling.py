"""Reference-ET scaling end to end (workflows/demo_reference_et.toml)."""

from __future__ import annotations

import json

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner

from rasterbudget.cli import main
from tests.conftest import ROOT


@pytest.fixture(scope="module")
def reference_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("reference") / "out"
    recipe = ROOT / "workflows" / "demo_reference_et.toml"
    result = CliRunner().invoke(
        main, ["run", str(recipe), "--out", str(out), "--quiet", "--no-quicklook"]
    )
    assert result.exit_code == 0, result.output
    return out


def _read(folder, name):
    with rasterio.open(folder / f"{name}.tif") as src:
        return src.read(1).astype(np.float64)


@pytest.mark.parametrize("scene", ["kessendry_20260614", "kessendry_20260823"])
def test_daily_et_is_the_reference_fraction_times_daily_reference_et(reference_run, scene):
    folder = reference_run / scene
    manifest = json.loads((folder / "manifest.json").read_text())
    ref = manifest["reference_et"]
    assert manifest["daily_scaling"] == "reference_et_fraction" and ref["surface"] == "tall"
    # tall reference ET of a clear, dry summer day at 1560 m: a few tenths of a mm per hour
    # mid-morning and 8-12 mm per day (common practice for arid irrigated regions)
    assert 0.5 < ref["hourly_mm"] < 1.3 and 7.0 < ref["daily_mm"] < 12.5
    fraction = _read(folder, "reference_et_fraction")
    et_hourly = _read(folder, "et_hourly")
    et_daily = _read(folder, "et_daily")
    ok = np.isfinite(fraction)
    np.testing.assert_allclose(fraction[ok], et_hourly[ok] / ref["hourly_mm"], rtol=1e-5)
    np.testing.assert_allclose(et_daily[ok], fraction[ok] * ref["daily_mm"], rtol=1e-5)


def test_cold_anchor_transpires_at_the_configured_multiple_of_reference_et(reference_run):
    folder = reference_run / "kessendry_20260614"
    manifest = json.loads((folder / "manifest.json").read_text())
    qa = rasterio.open(folder / "qa_flags.tif").read(1)
    fraction = _read(folder, "reference_et_fraction")
    cold = (qa & 128) > 0
    # population median, as in the anchor-condition test of the default demo
    assert np.nanmedian(fraction[cold]) == pytest.approx(1.05, abs=0.02)
    assert manifest["calibration"]["cold_evaporative_fraction"] > 1.0  # advection: LE > Rn - G


def test_reference_scaling_without_daily_wind_is_refused(tmp_path):
    from tests.conftest import demo_recipe_dict, write_toml

    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    data["scene"][0]["daily_scaling"] = "reference_et_fraction"
    data["scene"][0]["daily"].pop("wind_speed_m_s", None)
    recipe = write_toml(data, tmp_path / "r.toml")
    result = CliRunner().invoke(main, ["run", str(recipe), "--out", str(tmp_path / "o")])
    assert result.exit_code == 2
    assert "daily.wind_speed_m_s" in result.output
