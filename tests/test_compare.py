"""Comparisons against numpy on the stack, and category boundaries (McKee et al. 1993 classes)."""

from __future__ import annotations

import csv

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner
from rasterio.transform import from_origin

from rasterbudget.cli import main
from rasterbudget.season.compare import drought_category, standardized_anomaly


@pytest.mark.parametrize(
    ("z", "code"),
    [
        (-2.5, 1),
        (-2.0, 1),
        (-1.99, 2),
        (-1.5, 2),
        (-1.49, 3),
        (-1.0, 3),
        (-0.99, 4),
        (0.0, 4),
        (0.99, 4),
        (1.0, 5),
        (1.49, 5),
        (1.5, 6),
        (1.99, 6),
        (2.0, 7),
        (3.0, 7),
        (np.nan, 0),
    ],
)
def test_category_boundaries(z, code):
    # McKee, Doesken & Kleist (1993) classes; boundaries go to the more extreme class
    assert drought_category(np.array([z]))[0] == code


def test_standardized_anomaly_equals_numpy_on_the_stack():
    rng = np.random.default_rng(4)
    baseline = rng.normal(500.0, 60.0, (5, 20, 30))
    baseline[2, 3, 4] = np.nan  # one missing year at one pixel
    current = rng.normal(480.0, 60.0, (20, 30))
    z = standardized_anomaly(current, baseline)
    expected = (current - np.nanmean(baseline, axis=0)) / np.nanstd(baseline, axis=0, ddof=1)
    np.testing.assert_allclose(z, expected, rtol=1e-12)
    assert np.isnan(standardized_anomaly(current, baseline[:1])).all()  # needs two years


def _write(path, data):
    with rasterio.open(
        path,
        "w",
        driver="GTiff",
        width=data.shape[1],
        height=data.shape[0],
        count=1,
        dtype="float32",
        crs="EPSG:32613",
        transform=from_origin(480000.0, 4430000.0, 30.0, 30.0),
        nodata=np.nan,
    ) as dst:
        dst.write(data.astype(np.float32), 1)
    return path


def test_compare_command_writes_rasters_and_category_shares(tmp_path):
    rng = np.random.default_rng(9)
    years = [rng.normal(600.0, 50.0, (150, 170)) for _ in range(4)]
    current = years[0] - 90.0  # a dry year
    paths = [_write(tmp_path / f"y{k}.tif", y) for k, y in enumerate(years)]
    now = _write(tmp_path / "now.tif", current)
    args = [
        "compare",
        str(now),
        "--previous",
        str(paths[0]),
        "--out",
        str(tmp_path / "cmp"),
        "--chunk-size",
        "64",
    ]
    for p in paths:
        args += ["--baseline", str(p)]
    result = CliRunner().invoke(main, args)
    assert result.exit_code == 0, result.output
    out = tmp_path / "cmp"
    diff = rasterio.open(out / "difference.tif").read(1)
    np.testing.assert_allclose(diff, -90.0, atol=1e-3)
    pct = rasterio.open(out / "percent_change.tif").read(1)
    stored = lambda p: rasterio.open(p).read(1).astype(np.float64)  # noqa: E731
    np.testing.assert_allclose(
        pct, 100 * (stored(now) - stored(paths[0])) / stored(paths[0]), rtol=1e-5
    )
    z = rasterio.open(out / "standardized_anomaly.tif").read(1)
    stack = np.stack([stored(p) for p in paths])
    np.testing.assert_allclose(z, (stored(now) - stack.mean(0)) / stack.std(0, ddof=1), rtol=1e-5)
    codes = rasterio.open(out / "drought_category.tif").read(1)
    np.testing.assert_array_equal(codes, drought_category(z.astype(np.float64)))
    rows = list(csv.DictReader((out / "categories.csv").open()))
    assert sum(float(r["share_of_valid_area"]) for r in rows) == pytest.approx(1.0)
    dry = sum(float(r["share_of_valid_area"]) for r in rows if "dry" in r["category"])
    assert dry > 0.5


def test_compare_refuses_rasters_on_other_grids(tmp_path):
    a = _write(tmp_path / "a.tif", np.ones((10, 10)))
    b = _write(tmp_path / "b.tif", np.ones((12, 10)))
    result = CliRunner().invoke(
        main, ["compare", str(a), "--previous", str(b), "--out", str(tmp_path / "o")]
    )
    assert result.exit_code == 2 and "not on the grid" in result.output


def test_comparison_recipe_errors_name_the_key(tmp_path):
    from rasterbudget.errors import RecipeError
    from rasterbudget.recipe import load_compare_recipe

    recipe = tmp_path / "c.toml"
    recipe.write_text('[[comparison]]\nid = "x"\ncurrent = "a.tif"\nbaseline = ["b.tif"]\n')
    with pytest.raises(RecipeError, match=r"comparison\.0.*previous.*two baseline"):
        load_compare_recipe(recipe)
    recipe.write_text('[compare]\noutt = "o"\n[[comparison]]\nid = "x"\ncurrent = "a.tif"\n')
    with pytest.raises(RecipeError, match=r"compare\.outt: unknown key"):
        load_compare_recipe(recipe)


def test_compare_recipe_with_a_missing_raster_writes_nothing(tmp_path):
    recipe = tmp_path / "c.toml"
    recipe.write_text(
        f'[compare]\nout = "{tmp_path / "out"}"\n[[comparison]]\nid = "x"\n'
        'current = "missing.tif"\nprevious = "also_missing.tif"\n'
    )
    result = CliRunner().invoke(main, ["compare", str(recipe)])
    assert result.exit_code != 0
    assert "missing.tif does not exist" in result.output
    assert not (tmp_path / "out" / "x").exists() or not list((tmp_path / "out" / "x").iterdir())


def test_comparison_outputs_do_not_depend_on_chunking(tmp_path):
    import json

    from rasterbudget.season.compare import run_compare

    rng = np.random.default_rng(5)
    years = [_write(tmp_path / f"y{k}.tif", rng.normal(600.0, 50.0, (150, 170))) for k in range(3)]
    now = _write(tmp_path / "now.tif", rng.normal(560.0, 50.0, (150, 170)))
    zones = tmp_path / "zones.geojson"
    box = [
        [480300.0, 4426000.0],
        [483000.0, 4426000.0],
        [483000.0, 4429000.0],
        [480300.0, 4429000.0],
    ]
    zones.write_text(
        json.dumps(
            {
                "type": "FeatureCollection",
                "crs": {"type": "name", "properties": {"name": "EPSG:32613"}},
                "features": [
                    {
                        "type": "Feature",
                        "properties": {"zone_id": "z"},
                        "geometry": {"type": "Polygon", "coordinates": [[*box, box[0]]]},
                    }
                ],
            }
        )
    )
    results = {}
    for chunk in (64, 512):
        out = tmp_path / f"c{chunk}"
        results[chunk] = run_compare(now, out, years[0], years, chunk, 50, (zones, "zone_id"))
    for name in ("difference", "percent_change", "standardized_anomaly", "drought_category"):
        with (
            rasterio.open(tmp_path / "c64" / f"{name}.tif") as a,
            rasterio.open(tmp_path / "c512" / f"{name}.tif") as b,
        ):
            np.testing.assert_array_equal(a.read(), b.read())
    assert results[64]["categories"] == results[512]["categories"]
    for key, value in results[64]["zones"][0].items():
        other = results[512]["zones"][0][key]
        assert value == other or np.isclose(value, other, rtol=1e-12), key
    assert (tmp_path / "c64" / "tiles.csv").read_text() == (
        tmp_path / "c512" / "tiles.csv"
    ).read_text()
