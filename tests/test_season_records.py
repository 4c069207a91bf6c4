"""What a season and a comparison record about themselves (versions, the checksums of what they
were made from, their parameters), the fraction rule, and comparisons of failed runs refused."""

from __future__ import annotations

import datetime as dt
import hashlib
import json

import pytest
from click.testing import CliRunner

from rasterbudget.cli import main
from rasterbudget.errors import RecipeError
from rasterbudget.recipe import parse_recipe
from tests.conftest import ROOT

SEASON = "kessendry_summer_2026"


@pytest.fixture(scope="module")
def season_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("season") / "out"
    args = ["run", str(ROOT / "workflows" / "demo_season.toml"), "--out", str(out), "--quiet"]
    result = CliRunner().invoke(main, [*args, "--no-quicklook"])
    assert result.exit_code == 0, result.output
    return out


def test_the_season_manifest_records_versions_inputs_and_parameters(season_run):
    manifest = json.loads((season_run / SEASON / "manifest.json").read_text())
    assert manifest["versions"]["rasterbudget"]
    assert manifest["parameters"]["fraction"] == "reference_et_fraction"
    for entry in manifest["inputs"]["scenes"]:
        raster = entry["raster"]
        with open(raster, "rb") as f:
            assert entry["sha256"] == hashlib.sha256(f.read()).hexdigest()
        scene = json.loads((season_run / entry["scene_id"] / "manifest.json").read_text())
        assert entry["scene_fingerprint"] == scene["fingerprint"]
    assert len(manifest["inputs"]["weather"][0]["sha256"]) == 64


def test_a_season_of_evaporative_fraction_is_refused_with_the_reason():
    import tomllib

    data = tomllib.loads((ROOT / "workflows" / "demo_season.toml").read_text())
    data["season"][0]["fraction"] = "evaporative_fraction"
    with pytest.raises(RecipeError, match="must be a fraction of reference ET"):
        parse_recipe(data, path=ROOT / "workflows" / "demo_season.toml")


def test_a_comparison_records_its_inputs_and_refuses_a_failed_run(season_run, tmp_path):
    current = season_run / SEASON / "et_season.tif"
    previous = season_run / SEASON / "mean_fraction.tif"
    out = tmp_path / "cmp"
    args = ["compare", str(current), "--previous", str(previous), "--out", str(out)]
    result = CliRunner().invoke(main, args)
    assert result.exit_code == 0, result.output
    summary = json.loads(next(out.rglob("compare.json")).read_text())
    assert summary["inputs"][str(current)]["state"] == "complete"
    assert summary["versions"]["rasterbudget"]
    # the season's run marked failed: its rasters are not compared
    manifest = season_run / SEASON / "manifest.json"
    saved = manifest.read_text()
    manifest.write_text(json.dumps({"status": "failed", "error": "disk full"}))
    try:
        result = CliRunner().invoke(main, [*args[:-1], str(tmp_path / "cmp2")])
    finally:
        manifest.write_text(saved)
    assert result.exit_code == 2, result.output
    assert "not complete (failed: disk full)" in result.output


def _lonlat_stack(path, days, etr, bounds_lonlat):
    """A daily reference-ET stack as xarray writes it, on a 0.05 degree longitude/latitude
    grid around the scene (as gridded weather products are): NetCDF or Zarr by ``path``."""
    import numpy as np
    import pandas as pd
    import rasterio
    import xarray as xr

    west, south, east, north = bounds_lonlat
    lon = np.arange(west - 0.1, east + 0.1, 0.05)
    lat = np.arange(north + 0.1, south - 0.1, -0.05)
    values = np.broadcast_to(
        np.asarray(etr, np.float32)[:, None, None], (len(days), *lat.shape, *lon.shape)
    )
    field = xr.DataArray(
        values.copy(),
        dims=("time", "lat", "lon"),
        coords={"time": pd.to_datetime(days), "lat": lat, "lon": lon},
        attrs={"units": "mm d-1", "grid_mapping": "crs", "long_name": "tall reference ET"},
    )
    field.lon.attrs = {"standard_name": "longitude", "units": "degrees_east", "axis": "X"}
    field.lat.attrs = {"standard_name": "latitude", "units": "degrees_north", "axis": "Y"}
    data = xr.Dataset({"etr_tall": field})
    data["crs"] = xr.DataArray(
        0,
        attrs={
            "grid_mapping_name": "latitude_longitude",
            "crs_wkt": rasterio.crs.CRS.from_epsg(4326).to_wkt(),
        },
    )
    if path.suffix == ".zarr":
        data.to_zarr(path, zarr_format=2)
    else:
        data.to_netcdf(path, engine="scipy")  # NetCDF-3: needs no HDF5 library
    return str(path)


@pytest.mark.parametrize(
    "layout", ["a file per day", "one multi-band stack", "a NetCDF stack", "a Zarr store"]
)
def test_a_season_with_uniform_gridded_reference_et_equals_the_station_case(
    season_run, tmp_path, layout
):
    """Daily reference ET rasters (a file per day, or one stack with a band per day), each day
    uniform at the station's value: the season total equals the station-table season's, pixel
    for pixel."""
    import shutil
    import tomllib

    import numpy as np
    import rasterio

    from rasterbudget.season.totals import daily_reference_et, season_days

    manifest = json.loads((season_run / SEASON / "manifest.json").read_text())
    recipe_path = ROOT / "workflows" / "demo_season.toml"
    data = tomllib.loads(recipe_path.read_text())
    season = data["season"][0]
    days = season_days(
        dt.date.fromisoformat(manifest["start"]), dt.date.fromisoformat(manifest["end"])
    )
    with rasterio.open(season_run / SEASON / "et_season.tif") as src:
        profile = src.profile | {"dtype": "float32", "count": 1}
        station = src.read(1)
    # the station's daily values, as the station season computed them
    from rasterbudget.io.grid import Grid
    from rasterbudget.recipe import load_recipe
    from rasterbudget.scene.constants import scene_centre_lonlat

    recipe = load_recipe(recipe_path)
    grid = Grid(profile["crs"], profile["transform"], profile["width"], profile["height"])
    _, lat = scene_centre_lonlat(grid)
    elevation = season.get("station_elevation_m", recipe.scene[0].overpass.station_elevation_m)
    etr = daily_reference_et(
        (recipe_path.parent / season["weather"]).resolve(),
        days,
        np.radians(lat),
        elevation,
        season.get("reference", "tall"),
    )
    folder = tmp_path / "etr"
    folder.mkdir()
    shape = (profile["height"], profile["width"])
    if layout == "a file per day":
        pattern = str(folder / "etr_{date}.tif")
        for day, value in zip(days, etr, strict=True):
            with rasterio.open(folder / f"etr_{day:%Y%m%d}.tif", "w", **profile) as dst:
                dst.write(np.full(shape, value, np.float32), 1)
    elif layout in ("a NetCDF stack", "a Zarr store"):
        from rasterio.transform import array_bounds
        from rasterio.warp import transform_bounds

        edges = array_bounds(profile["height"], profile["width"], profile["transform"])
        bounds = transform_bounds(profile["crs"], "EPSG:4326", *edges)  # (W, S, E, N)
        suffix = ".nc" if layout == "a NetCDF stack" else ".zarr"
        pattern = _lonlat_stack(folder / f"etr{suffix}", days, etr, bounds)
    else:
        pattern = str(folder / "etr_stack.tif")
        stack = profile | {"count": len(days), "tiled": False}
        stack.pop("blockxsize", None), stack.pop("blockysize", None)
        with rasterio.open(pattern, "w", **stack) as dst:
            for k, (day, value) in enumerate(zip(days, etr, strict=True), start=1):
                dst.write(np.full(shape, value, np.float32), k)
                dst.set_band_description(k, day.isoformat())
    out = tmp_path / "out"
    shutil.copytree(season_run, out)
    # the same recipe with the rasters instead of the table, its paths made absolute
    edited = tmp_path / "season.toml"
    text = recipe_path.read_text().replace(
        'weather = "', 'reference_et_rasters = "' + pattern + '"\n# was "', 1
    )
    edited.write_text(text.replace('"../', f'"{ROOT}/'))
    result = CliRunner().invoke(main, ["run", str(edited), "--out", str(out), "--quiet"])
    assert result.exit_code == 0, result.output
    gridded = json.loads((out / SEASON / "manifest.json").read_text())
    assert gridded["reference_et"] == "gridded daily rasters"
    with rasterio.open(out / SEASON / "et_season.tif") as src:
        np.testing.assert_allclose(src.read(1), station, rtol=1e-6, equal_nan=True)
    # float32 rasters of the daily values: the reference total within float32 rounding
    assert gridded["reference_et_total_mm"] == pytest.approx(etr.sum(), rel=1e-6)
    # monthly zone totals: each zone's own daily reference ET, here the station's everywhere
    import csv

    def monthly(folder):
        with (folder / "zones_monthly.csv").open() as f:
            return {(r["zone_id"], r["value"]): r for r in csv.DictReader(f)}

    station_months, gridded_months = monthly(season_run), monthly(out)
    assert gridded_months.keys() == station_months.keys()
    for key, row in gridded_months.items():
        for column in ("et_mm", "reference_et_mm"):
            assert float(row[column]) == pytest.approx(
                float(station_months[key][column]), rel=1e-6
            ), key


def test_a_daily_stack_that_cannot_serve_gets_one_line(tmp_path):
    """NetCDF-4 (through h5netcdf) with two variables on a time axis, wrong units, a missing
    day: each refused with the file and what to change."""
    import numpy as np
    import pandas as pd
    import xarray as xr

    from rasterbudget.errors import InputRasterError
    from rasterbudget.io.stacks import daily_stack_bands

    days = pd.date_range("2026-06-01", periods=3)
    field = xr.DataArray(
        np.ones((3, 2, 2), np.float32),
        dims=("time", "lat", "lon"),
        coords={"time": days, "lat": [40.1, 40.0], "lon": [-105.1, -105.0]},
        attrs={"units": "mm d-1"},
    )
    path = tmp_path / "two.nc"
    xr.Dataset({"etr_tall": field, "eto_short": field}).to_netcdf(path, engine="h5netcdf")
    with pytest.raises(
        InputRasterError, match=r"2 variables with a time axis.*reference_et_variable"
    ):
        daily_stack_bands(path, None, "daily reference ET")
    name, bands = daily_stack_bands(path, "eto_short", "daily reference ET")
    assert name == f'NETCDF:"{path}":eto_short'
    assert bands == {dt.date(2026, 6, 1): 1, dt.date(2026, 6, 2): 2, dt.date(2026, 6, 3): 3}
    with pytest.raises(InputRasterError, match="no variable 'etr'"):
        daily_stack_bands(path, "etr", "daily reference ET")
    metres = tmp_path / "metres.nc"
    xr.Dataset({"etr": field.assign_attrs(units="m")}).to_netcdf(metres, engine="h5netcdf")
    with pytest.raises(InputRasterError, match=r"is in 'm'.*mm"):
        daily_stack_bands(metres, None, "daily reference ET")
    with pytest.raises(InputRasterError, match="cannot be opened with xarray"):
        daily_stack_bands(tmp_path / "absent.nc", None, "daily reference ET")
