"""The Python interface on xarray: a scene from DataArrays equals the command line's rasters bit
for bit; a run's outputs open as Datasets with units, CRS and a time dimension."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest
import rasterio

import rasterbudget
from tests.conftest import ROOT, TINY
from tests.validation._scenes import DAILY as SCENE_DAILY
from tests.validation._scenes import OVERPASS as SCENE_OVERPASS

SCENE = "kessendry_20260614"
# the demo scene's weather, as the validation scenes use it
OVERPASS, DAILY = SCENE_OVERPASS, SCENE_DAILY


def demo_inputs(chunks=None):
    """The demo scene's rasters as an xarray Dataset, as a notebook opens them."""
    import rioxarray
    import xarray as xr

    files = {
        "albedo": TINY / "albedo_20260614.tif",
        "surface_temperature": TINY / "surface_temperature_20260614.tif",
        "land_cover": TINY / "land_cover.tif",
        "ndvi": TINY / "ndvi_20260614.tif",
        "elevation": TINY / "elevation.tif",
    }
    return xr.Dataset(
        {
            role: rioxarray.open_rasterio(path, chunks=chunks).squeeze("band", drop=True)
            for role, path in files.items()
        }
    )


def test_the_public_interface_is_there():
    assert set(rasterbudget.__all__) <= set(dir(rasterbudget))
    assert callable(rasterbudget.energy_balance)
    with pytest.raises(AttributeError):
        rasterbudget.no_such_function  # noqa: B018


@pytest.mark.parametrize("chunks", [None, {"x": 128, "y": 96}])
def test_energy_balance_from_xarray_equals_the_cli_bit_for_bit(demo_run, tmp_path, chunks):
    """numpy- and dask-backed inputs; the demo run (the CLI, chunk 256) is the reference."""
    result = rasterbudget.energy_balance(
        demo_inputs(chunks),
        acquired_utc="2026-06-14T17:52:00Z",
        overpass=OVERPASS,
        daily=DAILY,
        scene_id=SCENE,
        out=tmp_path / "api",
        chunk_size=256,
    )
    import rioxarray  # noqa: F401

    cli_folder = demo_run / SCENE
    compared = 0
    for tif in sorted(cli_folder.glob("*.tif")):
        with rasterio.open(tif) as src:
            expected, units = src.read(1), src.units[0]
        values = result[tif.stem]
        np.testing.assert_array_equal(values.values, expected, err_msg=tif.stem)
        assert values.attrs["units"] == units
        compared += 1
    assert compared >= 9
    assert result.rio.crs.to_epsg() == 32613
    assert result.time.values == np.datetime64("2026-06-14T17:52:00", "ns")
    assert result.attrs["scene_id"] == SCENE
    assert result.et_daily.chunks is not None  # lazily read


def test_bad_inputs_get_one_line(tmp_path):
    from rasterbudget.errors import InputRasterError

    inputs = demo_inputs()
    no_crs = inputs.albedo.copy()
    no_crs.attrs.pop("_FillValue", None)
    no_crs = no_crs.drop_vars("spatial_ref")
    with pytest.raises(InputRasterError, match="input albedo has no CRS"):
        rasterbudget.energy_balance(
            {**{k: inputs[k] for k in inputs.data_vars}, "albedo": no_crs},
            acquired_utc="2026-06-14T17:52:00Z",
            overpass=OVERPASS,
            daily=DAILY,
            out=tmp_path,
        )


def test_open_series_stacks_the_scenes_on_time(demo_run):
    series = rasterbudget.open_series(demo_run)
    assert list(series.scene_id.values) == ["kessendry_20260614", "kessendry_20260823"]
    assert series.sizes["time"] == 2
    assert series.time.values[0] < series.time.values[1]
    with rasterio.open(demo_run / "kessendry_20260823" / "et_daily.tif") as src:
        np.testing.assert_array_equal(series.et_daily.isel(time=1).values, src.read(1))
    assert series.et_daily.attrs["units"] == "mm d-1"


def test_run_recipe_file_and_open_season(tmp_path):
    done = rasterbudget.run_recipe_file(ROOT / "workflows" / "demo_season.toml", tmp_path)
    assert [o.status for o in done.scenes] == ["done", "done"]
    season = rasterbudget.open_season(tmp_path / "kessendry_summer_2026")
    assert season.attrs["start"] == str(dt.date(2026, 6, 1))
    with rasterio.open(tmp_path / "kessendry_summer_2026" / "et_season.tif") as src:
        np.testing.assert_array_equal(season.et_season.values, src.read(1))
    assert season.et_season.attrs["units"] == "mm"


def test_the_readme_example_runs(tmp_path, monkeypatch):
    """The README's "From Python" block, run as written from a copy of the repository's
    inputs and recipes (its outputs go under the working folder)."""
    import re
    import shutil

    text = (ROOT / "README.md").read_text()
    section = text[text.index("## From Python") :]
    code = re.search(r"```python\n(.*?)```", section, re.S).group(1)
    for folder in ("tiny_rasters", "workflows"):
        shutil.copytree(ROOT / folder, tmp_path / folder)
    monkeypatch.chdir(tmp_path)
    exec(compile(code, "README.md", "exec"), {})
    assert (tmp_path / "out" / "python_demo" / "scene" / "et_daily.tif").is_file()
    assert (
        tmp_path / "out" / "python_season" / "kessendry_summer_2026" / "et_season.tif"
    ).is_file()
