"""Where the anchors land on small invented scenes without a land-cover map.

Each test paints a scene of a few surfaces (``_scenes.py``: 30 m pixels, mild noise), runs it
through the command line and checks the cold and hot anchor populations flagged in
``qa_flags.tif`` (and the manifest's anchor pixels) against where the physics says they belong.
A cold anchor stands for a well-watered, fully covered surface transpiring at the potential rate
under the scene's sun; a hot anchor for the driest, sparsest ground, whose LE is (near) zero.
"""

from __future__ import annotations

import dataclasses
import datetime as dt

import numpy as np
import pytest

from . import _scenes as S
from ._scenes import AIR_K, Surface

# --------------------------------------------------------------------------- 1. forest and pasture

#: A humid summer day: moist air, moderate sun and wind.
HUMID_OVERPASS = {"air_temperature_c": 27.0, "relative_humidity_pct": 65.0, "wind_speed_m_s": 2.5}
HUMID_DAILY = {
    "tmax_c": 30.0,
    "tmin_c": 18.5,
    "rh_max_pct": 95.0,
    "rh_min_pct": 52.0,
    "shortwave_mj_m2": 26.5,
    "wind_speed_m_s": 2.2,
}


def test_forest_with_pasture(tmp_path):
    rng = np.random.default_rng(11)
    scene = S.blank((150, 150))
    r, c = np.mgrid[0:150, 0:150]
    air = HUMID_OVERPASS["air_temperature_c"] + 273.15
    regions = {
        # closed forest: dark, freely transpiring, within a degree of the air
        "forest": (r < 70) & (c < 75),
        # the wettest pasture (low-lying, moist): green and nearly as cool as the forest
        "wet_pasture": (r < 70) & (c >= 75),
        "pasture": (r >= 70) & (r < 115),
        # overgrazed patches inside the pasture and a strip of thin, dry grass
        "sparse": np.zeros((150, 150), dtype=bool),
        "bare": (r >= 115) & (c >= 95),
        "dry_grass": (r >= 115) & (c < 95),
    }
    for r0, c0 in ((74, 8), (80, 60), (98, 30), (92, 110), (102, 132)):
        regions["sparse"][r0 : r0 + 9, c0 : c0 + 9] = True
    regions["pasture"] &= ~regions["sparse"]
    surfaces = {
        "forest": Surface(0.86, 0.12, air + 0.8),
        "wet_pasture": Surface(0.72, 0.18, air + 2.0),
        "pasture": Surface(0.58, 0.19, air + 5.0),
        "sparse": Surface(0.22, 0.21, air + 13.0),
        "dry_grass": Surface(0.30, 0.22, air + 11.0),
        # the sparsest, hottest ground: a ploughed, dry field
        "bare": Surface(0.12, 0.25, air + 20.0),
    }
    for name, surface in surfaces.items():
        S.paint(scene, regions[name], surface, rng)

    run = S.run(tmp_path, scene, overpass=HUMID_OVERPASS, daily=HUMID_DAILY)
    assert run.result.exit_code == 0, run.result.output
    cold, hot = run.populations()
    anchors = run.manifest["anchors"]
    why = run.describe()
    # Cold: the coolest fully covered pixels are the forest (transpiring freely, rough, so close
    # to the air temperature); only the wettest pasture is nearly as cool.
    wet = regions["forest"] | regions["wet_pasture"]
    assert cold.sum() >= 20 and wet[cold].all(), why
    assert wet[anchors["cold"]["row"], anchors["cold"]["col"]], why
    # Hot: the anchor is the dry extreme (LE ~ 0), i.e. the sparsest and hottest ground: the bare
    # field, not the sparse patches or the dry grass, which still transpire a little.
    assert hot.sum() >= 20 and regions["bare"][hot].all(), why
    assert regions["bare"][anchors["hot"]["row"], anchors["hot"]["col"]], why
    ts = scene.surface_temperature
    assert ts[hot].mean() > np.percentile(ts[regions["bare"]], 75), why


# --------------------------------------------------------------------------- 2. grassland only


def test_grassland_gradient_without_crops_or_bare_soil(tmp_path):
    rng = np.random.default_rng(12)
    rows, cols = 120, 150
    scene = S.blank((rows, cols))
    # a slope of rangeland from thin, dry grass in the west (NDVI 0.2, hot) to green meadow in
    # the east (NDVI 0.65): greener grass transpires more and stays cooler
    x = np.linspace(0.0, 1.0, cols)[None, :] * np.ones((rows, 1))
    scene.ndvi = 0.20 + 0.45 * x + rng.normal(0.0, 0.012, (rows, cols))
    scene.albedo = 0.23 - 0.05 * x + rng.normal(0.0, 0.004, (rows, cols))
    scene.surface_temperature = AIR_K + 16.0 - 13.0 * x + rng.normal(0.0, 0.25, (rows, cols))

    run = S.run(tmp_path, scene)
    # no crop and no bare soil: the scene still has a wet and a dry end, so anchors are found
    assert run.result.exit_code == 0, run.result.output
    cold, hot = run.populations()
    anchors = run.manifest["anchors"]
    why = run.describe()
    col = np.broadcast_to(np.arange(cols), (rows, cols))
    # Cold: the greenest (and so coolest) grass, at the eastern end.
    assert cold.sum() >= 20 and (col[cold] >= 0.85 * cols).all(), why
    assert anchors["cold"]["col"] >= 0.85 * cols, why
    # Hot: the thinnest, driest grass, at the western end.
    assert hot.sum() >= 20 and (col[hot] < 0.15 * cols).all(), why
    assert anchors["hot"]["col"] < 0.15 * cols, why
    assert anchors["hot"]["surface_temperature"] > anchors["cold"]["surface_temperature"] + 8.0


# --------------------------------------------------------------------------- 3. cropland


def cropland(rng) -> tuple[S.Scene, dict[str, np.ndarray]]:
    """Six by six fields of 29 x 29 pixels on a 30-pixel pitch, separated by one-pixel strips:
    along the rows dirt farm tracks (bare, compacted, the hottest pixels of the scene), along
    the columns irrigation canals with wet, vegetated banks (the coolest). Fields are irrigated
    crops, bare fallow or rainfed pasture."""
    pitch, n = 30, 6
    size = pitch * n
    scene = S.blank((size, size))
    r, c = np.mgrid[0:size, 0:size]
    track = r % pitch == pitch - 1
    canal = (c % pitch == pitch - 1) & ~track
    field = ~(track | canal)
    kind = np.array(
        [
            ["irrigated", "fallow", "pasture", "irrigated", "fallow", "pasture"],
            ["fallow", "irrigated", "fallow", "pasture", "irrigated", "irrigated"],
            ["pasture", "irrigated", "irrigated", "fallow", "pasture", "fallow"],
            ["irrigated", "fallow", "pasture", "irrigated", "fallow", "irrigated"],
            ["fallow", "pasture", "irrigated", "fallow", "irrigated", "fallow"],
            ["irrigated", "fallow", "fallow", "pasture", "irrigated", "pasture"],
        ]
    )[r // pitch, c // pitch]
    regions = {
        "irrigated": field & (kind == "irrigated"),
        "fallow": field & (kind == "fallow"),
        "pasture": field & (kind == "pasture"),
        "track": track,
        "canal": canal,
    }
    surfaces = {
        "irrigated": Surface(0.80, 0.20, AIR_K - 2.5),
        "fallow": Surface(0.11, 0.27, AIR_K + 20.0),
        "pasture": Surface(0.55, 0.19, AIR_K + 6.0),
        "track": Surface(0.10, 0.25, AIR_K + 24.0),
        "canal": Surface(0.64, 0.14, AIR_K - 5.0),
    }
    for name, surface in surfaces.items():
        S.paint(scene, regions[name], surface, rng)
    return scene, regions


def test_cropland_anchors_stay_inside_fields(tmp_path):
    scene, regions = cropland(np.random.default_rng(13))
    boundary = regions["track"] | regions["canal"]
    distance = S.distance_to(boundary)

    run = S.run(tmp_path / "screened", scene)
    assert run.result.exit_code == 0, run.result.output
    cold, hot = run.populations()
    anchors = run.manifest["anchors"]
    why = run.describe()
    # The strips are one pixel wide: a pixel on a strip, or next to one, mixes field and strip
    # in its 3 x 3 neighbourhood (several kelvin and a large NDVI step), so the homogeneity
    # screen keeps both anchors at least 2 pixels inside a field.
    for population in (cold, hot):
        assert population.sum() >= 20 and (distance[population] >= 2).all(), why
    for role in ("cold", "hot"):
        assert distance[anchors[role]["row"], anchors[role]["col"]] >= 2, why
    # and in the right fields: the cool irrigated crop, the hot bare fallow
    assert regions["irrigated"][cold].all() and regions["fallow"][hot].all(), why

    # Without the homogeneity screen the cool canal banks and the hot farm tracks are the
    # extremes: the anchors go onto the strips (so the assertions above can fail).
    loose = S.run(
        tmp_path / "unscreened",
        scene,
        anchors={"max_ts_spread_k": 100.0, "max_ndvi_spread": 1.0},
        components=False,
    )
    assert loose.result.exit_code == 0, loose.result.output
    cold, hot = loose.populations()
    why = loose.describe()
    assert regions["canal"][cold].mean() > 0.9, why
    assert regions["track"][hot].mean() > 0.9, why


# --------------------------------------------------------------------------- 4. steep terrain

#: Near local solar noon (11:55 at 105.2 W): the sun about 73 degrees high in the south, so
#: that a slope facing north is shaded and one facing south is lit about like flat ground.
NOON = dt.datetime(2026, 6, 14, 18, 55, tzinfo=dt.UTC)


def ridge_scene(rng) -> tuple[S.Scene, dict[str, np.ndarray]]:
    """An east-west ridge with 20-degree flanks across a vegetated valley, bare fields in the
    south; the shaded north flank is the coolest vegetation of the scene."""
    rows, cols = 180, 150
    rise = S.PIXEL * np.tan(np.radians(20.0))  # [m per pixel]
    r = np.arange(rows, dtype=float)[:, None] * np.ones((1, cols))
    # flat valley (rows 0-59), north flank (60-79) up to the crest, south flank (80-99) down
    height = np.clip(np.minimum(r - 59.5, 99.5 - r), 0.0, None) * rise
    scene = S.blank((rows, cols))
    scene.elevation = S.STATION_ELEVATION + height + rng.normal(0.0, 0.2, (rows, cols))
    regions = {
        "valley": r < 60,
        "north_flank": (r >= 60) & (r < 80),
        "south_flank": (r >= 80) & (r < 100),
        "plain": (r >= 100) & (r < 150),
        "bare": r >= 150,
    }
    # the same well-watered canopy everywhere; its Ts follows the sunshine it gets and the air
    # cooling up the slope (6.5 K per km): the lit flat vegetation runs a little above the air,
    # the shaded flank 3 K colder (cold for lack of sun, not for evaporating more), the flank
    # facing the sun warmer
    offsets = {"valley": 1.5, "plain": 1.5, "north_flank": -1.5, "south_flank": 3.5}
    for name, offset in offsets.items():
        S.paint(scene, regions[name], Surface(0.82, 0.17, AIR_K + offset), rng)
    S.paint(scene, regions["bare"], Surface(0.11, 0.26, AIR_K + 21.0), rng)
    scene.surface_temperature -= 0.0065 * height
    return scene, regions


def test_shaded_slope_is_not_the_cold_anchor(tmp_path):
    scene, regions = ridge_scene(np.random.default_rng(14))
    vegetated = scene.ndvi > 0.5

    run = S.run(tmp_path / "screened", scene, acquired=NOON)
    assert run.result.exit_code == 0, run.result.output
    cold, hot = run.populations()
    shortwave = run.read("shortwave_in")
    why = run.describe()
    # the scene does what it should: the north flank gets clearly less sun than flat ground
    assert np.nanmean(shortwave[regions["north_flank"]]) < 0.9 * np.nanmean(
        shortwave[regions["valley"]]
    )
    # The illumination screen keeps the cold anchor off the shaded flank: its population is lit
    # like the scene's vegetation as a whole, so the anchor's available energy is typical.
    assert cold.sum() >= 20 and not (cold & regions["north_flank"]).any(), why
    ratio = np.nanmean(shortwave[cold]) / np.nanmean(shortwave[vegetated])
    assert abs(ratio - 1.0) < 0.03, (ratio, why)
    assert regions["bare"][hot].all(), why

    # With the screen effectively off, the shaded flank is the coldest vegetation and takes the
    # cold anchor: the screen is what keeps it off.
    loose = S.run(
        tmp_path / "unscreened",
        scene,
        anchors={"illumination_tolerance": 1.0},
        acquired=NOON,
    )
    assert loose.result.exit_code == 0, loose.result.output
    cold = loose.populations()[0]
    shortwave = loose.read("shortwave_in")
    why = loose.describe()
    assert cold.sum() >= 20 and regions["north_flank"][cold].mean() > 0.9, why
    assert np.nanmean(shortwave[cold]) < 0.9 * np.nanmean(shortwave[vegetated]), why
    # and it matters: the shaded anchor has less available energy, so the same reference-ET
    # flux is a larger share of it (the cold anchor's imposed EF rises)
    fraction = "cold_evaporative_fraction"
    assert loose.manifest["calibration"][fraction] > run.manifest["calibration"][fraction] + 0.05


# --------------------------------------------------------------------------- 5. no candidate left


@pytest.mark.parametrize(
    ("surface", "screen", "advice"),
    [
        # a closed forest has no pixel of NDVI <= 0.25 (anchors.hot_max_ndvi): nothing dry
        (Surface(0.85, 0.12, AIR_K + 1.0), "vegetation", "hot_max_ndvi"),
        # open water has no reliable residual: no pixel may hold either anchor
        (Surface(-0.25, 0.06, AIR_K - 4.0), "surface", "land-cover"),
    ],
    ids=["forest", "water"],
)
def test_no_candidate_left(tmp_path, surface, screen, advice):
    scene = S.blank((100, 100))
    S.paint(scene, np.ones((100, 100), dtype=bool), surface, np.random.default_rng(15))

    run = S.run(tmp_path, scene)
    output = run.result.output
    assert run.result.exit_code != 0, output
    lines = [line for line in output.splitlines() if line.strip()]
    assert len(lines) == 1, output
    assert f"the '{screen}' screen" in lines[0] and advice in lines[0], output
    assert not list((tmp_path / "out").rglob("*.tif")), output


# --------------------------------------------------------------------------- 6. after rain


def rain_table(path, acquired: dt.date, rain_days_before: dict[int, float]):
    """Daily rain and grass reference ET (6.5 mm d-1, a clear summer day) for the 40 days up to
    the scene's date; ``rain_days_before``: mm of rain by days before the scene."""
    lines = ["date,precipitation_mm,reference_et_mm"]
    for back in range(39, -1, -1):
        day = acquired - dt.timedelta(days=back)
        lines.append(f"{day.isoformat()},{rain_days_before.get(back, 0.0)},6.5")
    path.write_text("\n".join(lines) + "\n")
    return path


def test_hot_anchor_keeps_evaporation_after_rain(tmp_path):
    rng = np.random.default_rng(16)
    scene = S.blank((100, 100))
    irrigated = np.tile(np.arange(100) < 50, (100, 1))  # west half: an irrigated field
    S.paint(scene, irrigated, Surface(0.80, 0.20, AIR_K - 2.5), rng)
    # the day after a soaking rain the bare soil still evaporates and is only moderately hot
    S.paint(scene, ~irrigated, Surface(0.11, 0.22, AIR_K + 12.0), rng)
    dry = dataclasses.replace(scene, surface_temperature=scene.surface_temperature.copy())
    dry.surface_temperature[~irrigated] += 9.0  # after a month without rain: hot and dry
    date = S.ACQUIRED.date()

    def run(name: str, rain: dict[int, float], which: S.Scene) -> S.Outcome:
        table = rain_table(tmp_path / f"{name}.csv", date, rain)
        outcome = S.run(tmp_path / name, which, anchors={"hot_soil": {"table": str(table)}})
        assert outcome.result.exit_code == 0, outcome.result.output
        return outcome

    # 35 mm one day before the scene: the soil surface is wet and still in stage-1 drying, so
    # the hot anchor evaporates at a good part of the energy-limited rate (FAO-56 ch. 7)
    wet = run("rain", {1: 35.0}, scene)
    calibration = wet.manifest["calibration"]
    assert calibration["hot_evaporative_fraction"] > 0.1, calibration
    assert calibration["hot_anchor_basis"], calibration
    hot = wet.populations()[1]
    ef = wet.read("evaporative_fraction")
    assert hot.sum() >= 20 and (ef[hot] > 0.0).all(), wet.describe()

    # no rain for 30 days: the evaporating layer is past its total evaporable water, the hot
    # anchor is dry and its LE (near) zero
    parched = run("dry", {}, dry)
    assert parched.manifest["calibration"]["hot_evaporative_fraction"] < 0.02
