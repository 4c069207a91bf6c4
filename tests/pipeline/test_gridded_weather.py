"""Gridded overpass weather: rasters in place of the station's numbers."""

from __future__ import annotations

import json

import numpy as np
import rasterio
from click.testing import CliRunner

from rasterbudget.cli import main
from rasterbudget.physics.turbulence import (
    saturation_vapour_pressure,
    vapour_pressure_from_relative_humidity,
)
from rasterbudget.surface import LAPSE_RATE
from tests.conftest import TINY, demo_recipe_dict, write_toml

SCENE = "kessendry_20260614"


def _raster(tmp_path, name, values, like=TINY / "elevation.tif"):
    with rasterio.open(like) as src:
        profile = src.profile | {"dtype": "float32", "nodata": np.nan}
    path = tmp_path / f"{name}.tif"
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(values.astype(np.float32), 1)
    return str(path)


OFF = {"cold_anchor_fraction": "off"}


def _run(tmp_path, overpass, **scene):
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    data["scene"][0]["overpass"].update(overpass)
    data["scene"][0].update(scene)
    tmp_path.mkdir(parents=True, exist_ok=True)
    recipe = write_toml(data, tmp_path / "recipe.toml")
    out = tmp_path / "out"
    result = CliRunner().invoke(
        main, ["run", str(recipe), "--out", str(out), "--quiet", "--no-quicklook", "--components"]
    )
    assert result.exit_code == 0, result.output
    return out / SCENE


def _read(folder, name):
    return rasterio.open(folder / f"{name}.tif").read(1).astype(np.float64)


def test_weather_grids_holding_the_station_values_reproduce_the_station_run(tmp_path, demo_run):
    elevation = rasterio.open(TINY / "elevation.tif").read(1).astype(np.float64)
    # the station's air temperature carried to each pixel as the run itself does
    air = 26.5 - LAPSE_RATE * (elevation - 1560.0)
    # the station's vapour pressure held over the scene, as the run does with its air carried
    # down the lapse rate: the humidity that gives it at each pixel's air temperature
    ea = vapour_pressure_from_relative_humidity(26.5 + 273.15, 28.0)
    rh = 100.0 * ea / saturation_vapour_pressure(air + 273.15)
    folder = _run(
        tmp_path,
        {
            "air_temperature_c": _raster(tmp_path, "ta", air),
            "relative_humidity_pct": _raster(tmp_path, "rh", rh),
            "wind_speed_m_s": _raster(tmp_path, "wind", np.full(elevation.shape, 3.4)),
        },
        reference_et=OFF,
    )
    # the cold anchor's EF is fixed in both runs: by default it follows the reference ET, which
    # gridded weather takes at the scene centre (not at the station's elevation)
    station = _run(tmp_path / "station", {}, reference_et=OFF)
    for name in ("net_radiation", "sensible_heat_flux", "et_daily"):
        np.testing.assert_allclose(
            _read(folder, name),
            _read(station, name),
            rtol=1e-4,
            atol=1e-3,
            equal_nan=True,
            err_msg=name,
        )
    manifest = json.loads((folder / "manifest.json").read_text())
    centre = manifest["scene_facts"]["gridded_weather_at_centre"]
    assert set(centre) == {"air_temperature_c", "relative_humidity_pct", "wind_speed_m_s"}


def test_gridded_shortwave_and_wind_act_pixel_by_pixel(tmp_path, demo_run):
    shape = rasterio.open(TINY / "elevation.tif").shape
    cols = np.broadcast_to(np.arange(shape[1]) / (shape[1] - 1), shape)
    folder = _run(
        tmp_path,
        {
            # 700 W m-2 in the west to 900 in the east, wind 1.5 to 6 m/s west to east
            "shortwave_in_w_m2": _raster(tmp_path, "rs", 700.0 + 200.0 * cols),
            "wind_speed_m_s": _raster(tmp_path, "wind", 1.5 + 4.5 * cols),
        },
    )
    sw = _read(folder, "shortwave_in")
    flat = np.abs(rasterio.open(TINY / "elevation.tif").read(1) - 1560.0) < 30
    west, east = sw[:, :40][flat[:, :40]], sw[:, -40:][flat[:, -40:]]
    assert 680 < np.nanmedian(west) < 730 and 870 < np.nanmedian(east) < 920
    rn = _read(folder, "net_radiation")
    assert np.all(np.isfinite(rn[np.isfinite(_read(demo_run / SCENE, "net_radiation"))]))


def test_inspect_reads_gridded_weather(tmp_path):
    shape = rasterio.open(TINY / "elevation.tif").shape
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    data["scene"][0]["overpass"]["wind_speed_m_s"] = _raster(tmp_path, "wind", np.full(shape, 2.5))
    recipe = write_toml(data, tmp_path / "recipe.toml")
    result = CliRunner().invoke(main, ["inspect", str(recipe)])
    assert result.exit_code == 0, result.output
    assert "gridded weather at the scene centre: wind_speed_m_s 2.5" in result.output
    assert "wind_speed_m_s" in result.output
