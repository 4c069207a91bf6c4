"""Gridded reference ET for a scene ([scene.reference_et] hourly_raster, daily_raster): each
pixel's reference-ET fraction is divided by its own overpass-hour value and scaled by its own
day's; rasters holding the station's values give the station run."""

from __future__ import annotations

import json
import tomllib

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner

from rasterbudget.cli import main
from tests.conftest import ROOT, TINY, write_toml

RECIPE = ROOT / "workflows" / "demo_reference_et.toml"


def _recipe(tmp_path, reference_et: dict | None = None):
    text = RECIPE.read_text().replace('"../', f'"{ROOT}/')
    data = tomllib.loads(text)
    data["scene"] = data["scene"][:1]
    scene = data["scene"][0]
    scene.pop("uncertainty", None)
    if reference_et:
        scene.setdefault("reference_et", {}).update(reference_et)
    return write_toml(data, tmp_path / "recipe.toml")


def _run(tmp_path, name, reference_et=None):
    out = tmp_path / name
    args = ["run", str(_recipe(tmp_path / f"r_{name}", reference_et)), "--out", str(out)]
    result = CliRunner().invoke(main, [*args, "--quiet", "--no-quicklook"])
    assert result.exit_code == 0, result.output
    return next(p for p in out.iterdir() if p.is_dir() and not p.name.startswith("."))


def _raster(path, values, like):
    with rasterio.open(like) as src:
        profile = src.profile | {"dtype": "float32", "nodata": np.nan, "count": 1}
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(values.astype(np.float32), 1)
    return str(path)


def _read(folder, name):
    with rasterio.open(folder / f"{name}.tif") as src:
        return src.read(1).astype(np.float64)


@pytest.fixture(scope="module")
def station(tmp_path_factory):
    """The station run, its reference ET (hourly, daily) and the grid's shape."""
    tmp_path = tmp_path_factory.mktemp("station")
    (tmp_path / "r_station").mkdir()
    folder = _run(tmp_path, "station")
    reference = json.loads((folder / "manifest.json").read_text())["reference_et"]
    with rasterio.open(LIKE) as src:
        shape = src.shape
    return folder, reference["hourly_mm"], reference["daily_mm"], shape


LIKE = TINY / "elevation.tif"


def test_rasters_of_the_station_values_give_the_station_run(tmp_path, station):
    folder, hourly_mm, daily_mm, shape = station
    (tmp_path / "r_gridded").mkdir()
    gridded = _run(
        tmp_path,
        "gridded",
        {
            "hourly_raster": _raster(tmp_path / "hourly.tif", np.full(shape, hourly_mm), LIKE),
            "daily_raster": _raster(tmp_path / "daily.tif", np.full(shape, daily_mm), LIKE),
        },
    )
    for name in ("reference_et_fraction", "et_daily"):
        np.testing.assert_allclose(
            _read(gridded, name), _read(folder, name), rtol=1e-6, equal_nan=True
        )


def test_each_pixel_divides_by_its_own_hourly_reference(tmp_path, station):
    folder, hourly_mm, _, shape = station
    hourly = np.full(shape, hourly_mm)
    hourly[:, shape[1] // 2 :] *= 1.25  # a wetter air mass over the eastern half
    (tmp_path / "r_east").mkdir()
    east = _run(tmp_path, "east", {"hourly_raster": _raster(tmp_path / "h.tif", hourly, LIKE)})
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = _read(east, "reference_et_fraction") / _read(folder, "reference_et_fraction")
    west, eastern = ratio[:, : shape[1] // 2], ratio[:, shape[1] // 2 :]
    assert np.nanmedian(west) == pytest.approx(1.0, rel=1e-6)
    assert np.nanmedian(eastern) == pytest.approx(1 / 1.25, rel=1e-6)
