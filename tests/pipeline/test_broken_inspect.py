"""Each broken case, through both `run` and `inspect`: one clear line, exit 2, nothing written."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner

from rasterbudget.cli import main
from tests.conftest import demo_recipe_dict, write_toml


def _copy(src_path, dst_path, **changes):
    with rasterio.open(src_path) as src:
        profile, data = src.profile, src.read()
    transform_values = changes.pop("values", None)
    if transform_values is not None:
        data = transform_values(data)
    with rasterio.open(dst_path, "w", **(profile | changes)) as dst:
        dst.write(data)
    return str(dst_path)


def _polar_night(data, tmp_path):
    """The demo's rasters moved to about 79 N (Arctic polar stereographic) in mid-December."""
    moved = rasterio.Affine(30.0, 0.0, 0.0, 0.0, -30.0, -1_200_000.0)
    for role in ("albedo", "surface_temperature", "land_cover", "ndvi"):
        path = data["scene"][0]["inputs"][role]
        data["scene"][0]["inputs"][role] = _copy(
            path, tmp_path / f"{role}_polar.tif", crs="EPSG:3995", transform=moved
        )
    data["defaults"]["inputs"].pop("elevation")
    data["scene"][0]["acquired_utc"] = dt.datetime(2026, 12, 15, 12, 0, tzinfo=dt.UTC)


def _no_crs(data, tmp_path):
    inputs = data["scene"][0]["inputs"]
    inputs["albedo"] = _copy(inputs["albedo"], tmp_path / "albedo_nocrs.tif", crs=None)


def _celsius(data, tmp_path):
    inputs = data["scene"][0]["inputs"]
    inputs["surface_temperature"] = _copy(
        inputs["surface_temperature"], tmp_path / "ts_c.tif", values=lambda t: t - 273.15
    )


def _percent(data, tmp_path):
    inputs = data["scene"][0]["inputs"]
    inputs["albedo"] = _copy(
        inputs["albedo"], tmp_path / "albedo_pct.tif", values=lambda a: a * 100.0
    )


def _missing(data, tmp_path):
    data["scene"][0]["inputs"]["ndvi"] = str(tmp_path / "nowhere.tif")


def _all_nodata(data, tmp_path):
    inputs = data["scene"][0]["inputs"]
    inputs["ndvi"] = _copy(
        inputs["ndvi"], tmp_path / "ndvi_nan.tif", values=lambda v: np.full_like(v, np.nan)
    )


CASES = {
    "polar night": (_polar_night, "below the horizon"),
    "raster without CRS": (_no_crs, "has no CRS"),
    "temperature in Celsius": (_celsius, "degrees Celsius"),
    "albedo in percent": (_percent, "looks like percent"),
    "missing file": (_missing, "does not exist"),
    "all nodata": (_all_nodata, "holds no valid pixel"),
}


@pytest.mark.parametrize("command", ["run", "inspect"])
@pytest.mark.parametrize("case", list(CASES))
def test_broken_case(tmp_path, case, command):
    edit, words = CASES[case]
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    data["run"]["out"] = str(tmp_path / "out")
    edit(data, tmp_path)
    recipe = write_toml(data, tmp_path / "recipe.toml")
    result = CliRunner().invoke(main, [command, str(recipe)])
    assert result.exit_code == 2, result.output
    last = result.output.strip().splitlines()[-1]
    assert last.startswith("rasterbudget: error: ") and words in last, last
    scene_dir = tmp_path / "out" / data["scene"][0]["id"]
    assert not scene_dir.exists() or not any(scene_dir.iterdir())
