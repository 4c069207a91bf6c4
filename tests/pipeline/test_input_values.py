"""Inputs as they come: units, scale factors, nodata overrides and a bit-packed cloud mask."""

from __future__ import annotations

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner

from rasterbudget.catalog.qa import QA
from rasterbudget.cli import main
from tests.conftest import demo_recipe_dict, write_toml

SCENE = "kessendry_20260614"


def _derive(src_path, dst_path, transform_values, dtype=None, nodata=None, tags=None):
    with rasterio.open(src_path) as src:
        profile = src.profile
        data = src.read(1)
    data = transform_values(data)
    profile.update(dtype=dtype or data.dtype, nodata=nodata)
    if dtype and np.dtype(dtype).kind in "iu":
        profile.update(predictor=2)
    with rasterio.open(dst_path, "w", **profile) as dst:
        dst.write(data.astype(profile["dtype"]), 1)
        if tags:
            dst.update_tags(1, **tags)
    return dst_path


def _run(tmp_path, edit, extra_args=()):
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    edit(data["scene"][0]["inputs"])
    recipe = write_toml(data, tmp_path / "recipe.toml")
    out = tmp_path / "out"
    result = CliRunner().invoke(
        main, ["run", str(recipe), "--out", str(out), "--quiet", "--no-quicklook", *extra_args]
    )
    return result, out / SCENE


def _et(folder):
    return rasterio.open(folder / "et_daily.tif").read(1)


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    result, folder = _run(tmp_path_factory.mktemp("ref"), lambda inputs: None)
    assert result.exit_code == 0, result.output
    return _et(folder)


def test_albedo_in_percent_is_refused_then_accepted_with_its_units(tmp_path, reference):
    def percent(inputs):
        inputs["albedo"] = str(
            _derive(inputs["albedo"], tmp_path / "albedo_pct.tif", lambda a: a * 100.0)
        )

    result, folder = _run(tmp_path, percent)
    assert result.exit_code == 2
    assert "looks like percent" in result.output and 'units = "percent"' in result.output
    assert not folder.exists() or not any(folder.iterdir())

    def declared(inputs):
        percent(inputs)
        inputs["albedo"] = {"path": inputs["albedo"], "units": "percent"}

    result, folder = _run(tmp_path, declared)
    assert result.exit_code == 0, result.output
    np.testing.assert_allclose(_et(folder), reference, atol=1e-4, equal_nan=True)


def test_temperature_in_celsius_is_refused_then_accepted_with_its_units(tmp_path, reference):
    def celsius(inputs):
        inputs["surface_temperature"] = str(
            _derive(inputs["surface_temperature"], tmp_path / "ts_c.tif", lambda t: t - 273.15)
        )

    result, _ = _run(tmp_path, celsius)
    assert result.exit_code == 2
    assert "degrees Celsius" in result.output and 'units = "C"' in result.output

    def declared(inputs):
        celsius(inputs)
        inputs["surface_temperature"] = {"path": inputs["surface_temperature"], "units": "C"}

    result, folder = _run(tmp_path, declared)
    assert result.exit_code == 0, result.output
    # float32 storage of Ts in degC loses a little precision near 300 K: ~1e-5 K
    np.testing.assert_allclose(_et(folder), reference, atol=2e-3, equal_nan=True)


@pytest.mark.parametrize("where", ["file", "recipe"])
def test_scaled_integer_albedo(tmp_path, reference, where):
    """uint16 albedo x 10000 with nodata 0: the scale from the file's tags or from the recipe."""

    def scaled(inputs):
        path = _derive(
            inputs["albedo"],
            tmp_path / "albedo_u16.tif",
            lambda a: np.where(np.isfinite(a), np.round(a * 10000), 0),
            dtype="uint16",
            nodata=None if where == "recipe" else 0,
        )
        if where == "file":
            with rasterio.open(path, "r+") as dst:
                dst.scales = (0.0001,)
            inputs["albedo"] = str(path)
        else:
            inputs["albedo"] = {"path": str(path), "scale": 0.0001, "nodata": 0}

    result, folder = _run(tmp_path, scaled)
    assert result.exit_code == 0, result.output
    np.testing.assert_allclose(_et(folder), reference, atol=1e-4, equal_nan=True)


def test_all_nodata_input_is_refused(tmp_path):
    def empty(inputs):
        inputs["ndvi"] = str(
            _derive(inputs["ndvi"], tmp_path / "ndvi_empty.tif", lambda v: np.full_like(v, np.nan))
        )

    result, _ = _run(tmp_path, empty)
    assert result.exit_code == 2
    assert "holds no valid pixel" in result.output and "ndvi_empty.tif" in result.output


def test_bit_packed_cloud_mask_drops_pixels_from_anchors_and_statistics(tmp_path, reference):
    with rasterio.open(demo_recipe_dict()["scene"][0]["inputs"]["albedo"]) as src:
        profile = src.profile | {"dtype": "uint16", "nodata": None, "predictor": 2}
        shape = src.shape
    qa_band = np.zeros(shape, dtype=np.uint16)
    qa_band[10:60, 20:120] |= 1 << 3  # "cloud" bit
    qa_band[200:230, 300:340] |= 1 << 4  # "cloud shadow" bit
    qa_band[100:110, 100:110] = 1 << 1  # a bit we keep
    mask_path = tmp_path / "qa_band.tif"
    with rasterio.open(mask_path, "w", **profile) as dst:
        dst.write(qa_band, 1)

    def masked(inputs):
        inputs["cloud_mask"] = {"path": str(mask_path), "drop_bits": [3, 4]}

    result, folder = _run(tmp_path, masked, ["--tile-size", "100"])
    assert result.exit_code == 0, result.output
    qa = rasterio.open(folder / "qa_flags.tif").read(1)
    et = _et(folder)
    dropped = (qa_band & ((1 << 3) | (1 << 4))) > 0
    assert np.array_equal((qa & QA.MASKED) > 0, dropped)
    assert np.all(np.isnan(et[dropped]))
    assert not np.any(qa[dropped] & (QA.COLD_ANCHOR | QA.HOT_ANCHOR))
    kept = ~dropped & np.isfinite(reference)
    assert np.isfinite(et[kept]).all()
    # tile statistics leave masked pixels out
    import csv

    first_tile = next(csv.DictReader((folder / "tiles.csv").open()))
    assert int(first_tile["valid_pixels"]) == 100 * 100 - int(dropped[:100, :100].sum()) - int(
        (~np.isfinite(reference[:100, :100]) & ~dropped[:100, :100]).sum()
    )


def test_mask_without_anything_to_drop_is_refused(tmp_path):
    def masked(inputs):
        inputs["cloud_mask"] = {"path": inputs["albedo"]}

    result, _ = _run(tmp_path, masked)
    assert result.exit_code == 2 and "drop_values" in result.output
