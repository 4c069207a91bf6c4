"""Scene scalars of the radiation: the overpass sun, the sky's longwave model, the hourly
reference ET at a low sun."""

from __future__ import annotations

import datetime as dt
import json
import math

import pandas as pd
import pytest
from pvlib.solarposition import get_solarposition

from rasterbudget.io.grid import target_grid
from rasterbudget.physics import radiation
from rasterbudget.recipe import load_recipe
from rasterbudget.scene.constants import scene_centre_lonlat, scene_constants
from tests.conftest import TINY, demo_recipe_dict, write_toml

SCENES = ("kessendry_20260614", "kessendry_20260823")


@pytest.mark.parametrize("scene_id", SCENES)
def test_manifest_records_the_spa_sun_at_the_scene_centre(demo_run, scene_id):
    # NREL SPA (Reda & Andreas 2004) through pvlib, evaluated here on its own at the centre
    manifest = json.loads((demo_run / scene_id / "manifest.json").read_text())
    facts = manifest["scene_facts"]
    when = pd.Timestamp(manifest["parameters"]["acquired_utc"])
    spa = get_solarposition(
        pd.DatetimeIndex([when]),
        facts["centre_lat"],
        facts["centre_lon"],
        altitude=manifest["parameters"]["overpass"]["station_elevation_m"],
    ).iloc[0]
    assert facts["sun"]["elevation_deg"] == pytest.approx(90.0 - spa["zenith"], abs=1e-9)
    assert facts["sun"]["azimuth_deg"] == pytest.approx(spa["azimuth"], abs=1e-9)
    assert facts["sun_elevation_deg_centre"] == facts["sun"]["elevation_deg"]
    assert facts["sun"]["equation_of_time_min"] == pytest.approx(spa["equation_of_time"])
    # the demo gives overpass humidity, so the sky's longwave is Brutsaert's by default
    assert facts["longwave_in"] == {
        "method": "brutsaert",
        "asked": "auto",
        "sky_emissivity": "Brutsaert (1975), from overpass vapour pressure and air temperature",
    }


def _scene(tmp_path, **changes):
    data = demo_recipe_dict()
    scene = data["scene"][0]
    for table, values in changes.items():
        scene.setdefault(table, {}).update(values)
    recipe = load_recipe(write_toml(data, tmp_path / "recipe.toml"))
    scene = recipe.scene[0]
    return scene, target_grid(TINY / "albedo_20260614.tif")


def test_sky_longwave_falls_back_to_transmissivity_without_humidity(tmp_path):
    data = demo_recipe_dict()
    for scene in data["scene"]:
        del scene["overpass"]["relative_humidity_pct"]
    recipe = load_recipe(write_toml(data, tmp_path / "recipe.toml"))
    grid = target_grid(TINY / "albedo_20260614.tif")
    constants, facts = scene_constants(recipe.scene[0], grid)
    assert constants.longwave_in_method == "bastiaanssen"
    assert facts["longwave_in"]["asked"] == "auto"


def test_sky_longwave_as_asked(tmp_path):
    scene, grid = _scene(tmp_path, radiation={"longwave_in": "bastiaanssen"})
    constants, facts = scene_constants(scene, grid)
    assert constants.longwave_in_method == "bastiaanssen" == facts["longwave_in"]["method"]


def test_low_sun_overpass_takes_the_days_cloudiness_for_its_hourly_reference_et(tmp_path):
    # ASCE-EWRI (2005): below 0.3 rad the hour's own Rs/Rso is not used; a scene has a single
    # hour, so the day's Rs/Rso stands in for the last hour above 0.3 rad. At 12:50 UTC on
    # 14 June the demo's sun is about 12 degrees high at the centre.
    def hourly(daily_shortwave):
        scene, grid = _scene(
            tmp_path,
            overpass={"shortwave_in_w_m2": 250.0},
            daily={"shortwave_mj_m2": daily_shortwave},
            radiation={"min_sun_elevation_deg": 5.0},
        )
        scene = scene.model_copy(
            update={"acquired_utc": dt.datetime(2026, 6, 14, 12, 50, tzinfo=dt.UTC)}
        )
        constants, facts = scene_constants(scene, grid)
        assert 5.0 < facts["sun"]["elevation_deg"] < math.degrees(0.3)
        return constants.reference_et_hourly

    clear, overcast = hourly(31.0), hourly(8.0)
    # a darker day means a smaller longwave loss, more net radiation, more reference ET
    assert overcast > clear
    # and at a high sun the day's cloudiness does not enter the hour
    scene, grid = _scene(tmp_path, overpass={"shortwave_in_w_m2": 850.0})
    high = scene_constants(scene, grid)[0].reference_et_hourly
    scene, grid = _scene(
        tmp_path, overpass={"shortwave_in_w_m2": 850.0}, daily={"shortwave_mj_m2": 8.0}
    )
    assert scene_constants(scene, grid)[0].reference_et_hourly == high


def test_daily_terms_take_the_local_solar_date(tmp_path):
    # 00:30 UTC on 15 June is 17:30 on 14 June at the demo's 105 degrees W: the daily sums belong
    # to the 14th (day 165), not to the UTC date
    scene, grid = _scene(tmp_path, radiation={"min_sun_elevation_deg": 0.0})
    lon, _ = scene_centre_lonlat(grid)
    assert lon < -100.0
    evening = scene.model_copy(
        update={"acquired_utc": dt.datetime(2026, 6, 15, 0, 30, tzinfo=dt.UTC)}
    )
    constants, facts = scene_constants(evening, grid)
    assert constants.day_of_year == facts["sun"]["local_solar_day_of_year"] == 165


def test_cloudiness_factor_bounds():
    # ASCE-EWRI (2005): fcd = 1.35 Rs/Rso - 0.35 with Rs/Rso in [0.3, 1.0], fcd in [0.05, 1.0]
    assert radiation.cloudiness_factor(radiation.relative_shortwave(1.0, 20.0)) == pytest.approx(
        0.055
    )
    assert radiation.cloudiness_factor(radiation.relative_shortwave(25.0, 20.0)) == 1.0
    # polar winter: no clear-sky shortwave to compare with, the package's stated ratio 0.6
    ratio = radiation.relative_shortwave(0.1, 0.4, radiation.MIN_CLEAR_SKY_SHORTWAVE_DAILY)
    assert ratio == radiation.RELATIVE_SHORTWAVE_WITHOUT_SUN == 0.6
