"""Comparisons against numpy on the stack, and category boundaries (McKee et al. 1993 classes)."""

from __future__ import annotations

import csv

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner
from rasterio.transform import from_origin

from rasterbudget.cli import main
from rasterbudget.compare import drought_category, standardized_anomaly


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
