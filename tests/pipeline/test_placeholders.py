"""Recipe placeholders ({date}, {year}, {doy}, {id}) and daily weather read from a table."""

from __future__ import annotations

import datetime as dt

import pytest

from rasterbudget.errors import RecipeError
from rasterbudget.recipe import parse_recipe

WHEN = dt.datetime(2025, 7, 24, 17, 52, tzinfo=dt.UTC)


def _recipe(tmp_path, **scene):
    table = tmp_path / "weather_2025.csv"
    table.write_text(
        "date,tmax_c,tmin_c,rh_max_pct,rh_min_pct,wind_speed_m_s,shortwave_mj_m2,note\n"
        "2025-07-24,34.6,15.6,54,8,2.0,28.8,clear\n"
    )
    return {
        "defaults": {
            "daily_table": "weather_{year}.csv",
            "inputs": {
                "albedo": "s/albedo_{date}.tif",
                "surface_temperature": {"path": "s/lst_{doy}.tif", "units": "C"},
                "land_cover": "s/{id}_lc.tif",
            },
            "overpass": {
                "station_elevation_m": 1560.0,
                "air_temperature_c": 31.0,
                "wind_speed_m_s": 3.0,
            },
        },
        "scene": [{"id": "k_0724", "acquired_utc": WHEN, **scene}],
    }


def test_placeholders_and_daily_table_fill_each_scene(tmp_path):
    recipe = parse_recipe(_recipe(tmp_path), path=tmp_path / "r.toml")
    scene = recipe.scene[0]
    assert scene.inputs.albedo == "s/albedo_20250724.tif"
    assert scene.inputs.spec("surface_temperature").path == "s/lst_205.tif"
    assert scene.inputs.land_cover == "s/k_0724_lc.tif"
    assert scene.daily_table == "weather_2025.csv"
    assert (scene.daily.tmax_c, scene.daily.rh_min_pct, scene.daily.shortwave_mj_m2) == (
        34.6,
        8.0,
        28.8,
    )


def test_the_scenes_own_daily_keys_win_over_the_table(tmp_path):
    recipe = parse_recipe(_recipe(tmp_path, daily={"tmax_c": 33.0}), path=tmp_path / "r.toml")
    assert recipe.scene[0].daily.tmax_c == 33.0
    assert recipe.scene[0].daily.tmin_c == 15.6


def test_unknown_placeholder_is_named(tmp_path):
    data = _recipe(tmp_path)
    data["defaults"]["inputs"]["albedo"] = "s/albedo_{month}.tif"
    with pytest.raises(RecipeError, match=r"inputs.albedo.*unknown placeholder \{month\}"):
        parse_recipe(data, path=tmp_path / "r.toml")


def test_missing_day_in_the_table_is_named(tmp_path):
    data = _recipe(tmp_path)
    data["scene"][0]["acquired_utc"] = WHEN + dt.timedelta(days=1)
    with pytest.raises(RecipeError, match=r"no row for 2025-07-25"):
        parse_recipe(data, path=tmp_path / "r.toml")


def test_missing_table_and_bad_number_are_named(tmp_path):
    data = _recipe(tmp_path)
    data["defaults"]["daily_table"] = "weather_{year}_missing.csv"
    with pytest.raises(RecipeError, match=r"daily_table .*weather_2025_missing.csv does not exist"):
        parse_recipe(data, path=tmp_path / "r.toml")
    data = _recipe(tmp_path)
    (tmp_path / "weather_2025.csv").write_text(
        "date,tmax_c,tmin_c,rh_max_pct,rh_min_pct,shortwave_mj_m2\n2025-07-24,hot,15,54,8,28\n"
    )
    with pytest.raises(RecipeError, match=r"column tmax_c = 'hot' is not a number"):
        parse_recipe(data, path=tmp_path / "r.toml")
