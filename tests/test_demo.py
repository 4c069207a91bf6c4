"""Tests of the deterministic demo-data generator (rasterbudget.demo)."""

from __future__ import annotations

import pathlib
import tomllib
from importlib import resources

import numpy as np
import pytest
import rasterio
from rasterio.transform import Affine

from rasterbudget.demo import DEMO_DATES, DEMO_REGION, make_tiny_rasters

STAMPS = [date.replace("-", "") for date in DEMO_DATES]
SCENE_VARIABLES = ("albedo", "surface_temperature", "ndvi")
EXPECTED_NAMES = [
    "land_cover.tif",
    f"land_cover_{STAMPS[1]}.tif",
    "elevation.tif",
    *[f"{var}_{stamp}.tif" for stamp in STAMPS for var in SCENE_VARIABLES],
]


def _class_table() -> dict[str, dict]:
    text = resources.files("rasterbudget").joinpath("data/classes.toml").read_text("utf-8")
    return {entry["name"]: entry for entry in tomllib.loads(text)["class"]}


CLASSES = _class_table()
CODE = {name: entry["code"] for name, entry in CLASSES.items()}


def _read(path: pathlib.Path) -> np.ndarray:
    with rasterio.open(path) as src:
        return src.read(1)


@pytest.fixture(scope="module")
def demo_dir(tmp_path_factory: pytest.TempPathFactory) -> pathlib.Path:
    out = tmp_path_factory.mktemp("demo")
    make_tiny_rasters(out)
    return out


@pytest.fixture(scope="module")
def scenes(demo_dir: pathlib.Path) -> list[dict[str, np.ndarray]]:
    """Per date: land cover, elevation and the three scene variables as arrays."""
    elevation = _read(demo_dir / "elevation.tif")
    land_cover = [_read(demo_dir / "land_cover.tif"), _read(demo_dir / EXPECTED_NAMES[1])]
    out = []
    for index, stamp in enumerate(STAMPS):
        scene = {"land_cover": land_cover[index], "elevation": elevation}
        for var in SCENE_VARIABLES:
            scene[var] = _read(demo_dir / f"{var}_{stamp}.tif")
        out.append(scene)
    return out


def test_returns_the_files_it_wrote_and_leaves_no_temporary_files(tmp_path):
    paths = make_tiny_rasters(tmp_path / "new_folder")
    assert [p.name for p in paths] == EXPECTED_NAMES
    assert sorted(p.name for p in (tmp_path / "new_folder").iterdir()) == sorted(EXPECTED_NAMES)


def test_same_seed_gives_identical_bytes(tmp_path, demo_dir):
    make_tiny_rasters(tmp_path)
    for name in EXPECTED_NAMES:
        assert (tmp_path / name).read_bytes() == (demo_dir / name).read_bytes(), name


def test_other_seed_gives_other_scene(tmp_path, demo_dir):
    make_tiny_rasters(tmp_path, seed=7)
    assert not np.array_equal(
        _read(tmp_path / f"albedo_{STAMPS[0]}.tif"), _read(demo_dir / f"albedo_{STAMPS[0]}.tif")
    )


def test_grid_profile_and_tags(demo_dir):
    expected_transform = Affine(30.0, 0.0, 480_000.0, 0.0, -30.0, 4_430_000.0)
    for name in EXPECTED_NAMES:
        with rasterio.open(demo_dir / name) as src:
            assert (src.height, src.width, src.count) == (300, 400, 1), name
            assert src.crs.to_epsg() == 32613, name
            assert src.transform.almost_equals(expected_transform), name
            assert src.block_shapes == [(256, 256)], name
            assert src.compression.value.lower() == "deflate", name
            assert src.tags()["DEMO_REGION"] == DEMO_REGION
            assert "units" in src.tags(1), name
            assert src.descriptions[0], name
            if name.startswith("land_cover"):
                assert src.dtypes[0] == "uint8" and src.nodata == 0
                assert src.tags(1)["units"] == "class code"
            elif name == "elevation.tif":
                assert src.dtypes[0] == "float32" and src.nodata == -9999.0
                assert src.tags(1)["units"] == "m"
            else:
                assert src.dtypes[0] == "float32" and np.isnan(src.nodata)
    with rasterio.open(demo_dir / f"surface_temperature_{STAMPS[0]}.tif") as src:
        assert src.tags(1)["units"] == "K"
        assert src.descriptions[0] == "surface_temperature"


def test_files_are_small(demo_dir):
    total = sum((demo_dir / name).stat().st_size for name in EXPECTED_NAMES)
    assert total < 4_000_000


def test_values_are_rounded(scenes):
    scene = scenes[1]
    for var, decimals in (("albedo", 3), ("ndvi", 3), ("surface_temperature", 2)):
        values = scene[var][np.isfinite(scene[var])].astype(np.float64)
        np.testing.assert_allclose(values, np.round(values, decimals), atol=1e-4)
    elevation = scene["elevation"].astype(np.float64)
    np.testing.assert_allclose(elevation, np.round(elevation, 1), atol=1e-3)


def test_every_class_present_on_both_dates(scenes):
    for scene in scenes:
        counts = np.bincount(scene["land_cover"].ravel(), minlength=10)
        assert counts[0] == 0
        assert (counts[1:10] > 0).all(), counts
        assert 300 <= counts[CODE["open_water"]] <= 900
        assert 800 <= counts[CODE["built_up"]] <= 1400


def test_land_cover_changes_only_where_snow_melted(scenes):
    june, august = scenes[0]["land_cover"], scenes[1]["land_cover"]
    changed = june != august
    assert changed.any()
    assert (june[changed] == CODE["snow_ice"]).all()
    assert np.isin(august[changed], [CODE["bare_soil"], CODE["grassland"]]).all()
    assert ((august == CODE["snow_ice"]) <= (june == CODE["snow_ice"])).all()


def test_terrain(scenes):
    elevation, lc = scenes[0]["elevation"], scenes[0]["land_cover"]
    assert 1500 < np.median(elevation[lc == CODE["irrigated_crop"]]) < 1600
    assert 3200 < elevation.max() < 3450
    assert elevation[:50, -50:].mean() > elevation[-50:, :].mean() + 1000  # north-east mountain
    forest = elevation[lc == CODE["forest"]]
    assert 2200 < np.percentile(forest, 5) and np.percentile(forest, 95) < 3100
    assert elevation[lc == CODE["snow_ice"]].min() > 2950


def _medians(scene: dict[str, np.ndarray], var: str) -> dict[str, float]:
    return {
        name: float(np.nanmedian(scene[var][scene["land_cover"] == code]))
        for name, code in CODE.items()
    }


@pytest.mark.parametrize("date_index", [0, 1])
def test_class_medians_are_ordered_plausibly(scenes, date_index):
    scene = scenes[date_index]
    lst = _medians(scene, "surface_temperature")
    albedo = _medians(scene, "albedo")
    ndvi = _medians(scene, "ndvi")
    valley = ["irrigated_crop", "rainfed_crop", "grassland", "shrubland", "bare_soil", "built_up"]
    assert max(valley, key=lst.get) == "bare_soil"
    assert min(valley, key=lst.get) == "irrigated_crop"
    assert lst["snow_ice"] < lst["open_water"] < lst["irrigated_crop"]
    assert lst["forest"] < lst["irrigated_crop"]
    assert max(CODE, key=ndvi.get) in {"irrigated_crop", "forest"}
    assert min(CODE, key=ndvi.get) == "open_water"
    assert ndvi["irrigated_crop"] > ndvi["rainfed_crop"] > ndvi["shrubland"] > ndvi["bare_soil"]
    assert max(CODE, key=albedo.get) == "snow_ice"
    assert min(CODE, key=albedo.get) == "open_water"
    assert albedo["forest"] < albedo["irrigated_crop"] < albedo["bare_soil"]
    assert 0.17 < albedo["irrigated_crop"] < 0.22
    assert 290 < lst["open_water"] < 296


def test_late_summer_is_drier(scenes):
    june, august = (_medians(s, "ndvi") for s in scenes)
    assert august["rainfed_crop"] < june["rainfed_crop"] - 0.2
    assert august["grassland"] < june["grassland"] - 0.1


@pytest.mark.parametrize("date_index", [0, 1])
def test_snow_temperature_at_or_below_melting(scenes, date_index):
    scene = scenes[date_index]
    snow = scene["surface_temperature"][scene["land_cover"] == CODE["snow_ice"]]
    assert np.nanmax(snow) <= 273.5
    assert np.nanmedian(snow) > 268


@pytest.mark.parametrize("date_index", [0, 1])
def test_albedo_inside_class_ranges_except_planted_outliers(scenes, date_index):
    scene = scenes[date_index]
    lc, albedo = scene["land_cover"], scene["albedo"]
    low = np.zeros(lc.shape)
    high = np.zeros(lc.shape)
    for entry in CLASSES.values():
        low[lc == entry["code"]] = entry["albedo_min"]
        high[lc == entry["code"]] = entry["albedo_max"]
    outside = (albedo < low) | (albedo > high)  # NaN compares False
    assert 15 <= outside.sum() <= 25
    assert (lc[outside] == CODE["grassland"]).all()
    np.testing.assert_allclose(albedo[outside], 0.40, atol=0.015)
    rows, cols = np.nonzero(outside)
    assert np.ptp(rows) < 10 and np.ptp(cols) < 10  # one compact patch


def test_nodata_patches(scenes):
    june, august = scenes
    gap = np.isnan(june["albedo"])
    assert 25 <= gap.sum() <= 35
    rows, cols = np.nonzero(gap)
    assert np.ptp(rows) < 8 and np.ptp(cols) < 8
    stripe = np.isnan(august["surface_temperature"])
    assert 15 <= stripe.sum() <= 25
    rows, cols = np.nonzero(stripe)
    assert np.ptp(rows) == 0 and np.ptp(cols) == stripe.sum() - 1  # one contiguous row
    for scene, var in [
        (june, "surface_temperature"),
        (june, "ndvi"),
        (august, "albedo"),
        (august, "ndvi"),
    ]:
        assert np.isfinite(scene[var]).all(), var
    assert (june["elevation"] != -9999.0).all()


@pytest.mark.parametrize("date_index", [0, 1])
def test_no_long_runs_of_identical_values(scenes, date_index):
    scene = scenes[date_index]
    for var in SCENE_VARIABLES:
        values = scene[var]
        same = values[:, 1:] == values[:, :-1]
        assert same.mean() < 0.10, var


@pytest.mark.parametrize("date_index", [0, 1])
def test_within_class_scatter_looks_real(scenes, date_index):
    scene = scenes[date_index]
    lc = scene["land_cover"]
    ok = np.isfinite(scene["albedo"]) & np.isfinite(scene["surface_temperature"])
    for name in ("irrigated_crop", "rainfed_crop", "shrubland", "bare_soil"):
        k = ok & (lc == CODE[name])
        lst = scene["surface_temperature"][k]
        assert np.corrcoef(lst, scene["ndvi"][k])[0, 1] < -0.3, name  # hotter is drier
        assert np.corrcoef(lst, scene["albedo"][k])[0, 1] < -0.1, name  # hotter is darker
        assert np.percentile(lst, 90) - np.percentile(lst, 10) > 1.0, name


def test_surface_temperature_falls_with_elevation(scenes):
    scene = scenes[0]
    k = (scene["land_cover"] == CODE["shrubland"]) & np.isfinite(scene["surface_temperature"])
    slope = np.polyfit(scene["elevation"][k], scene["surface_temperature"][k], 1)[0]
    assert -12e-3 < slope < -4e-3  # [K m-1]
