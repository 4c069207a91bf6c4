"""Property: whatever a recipe file holds, ``load_recipe`` returns a Recipe or raises a
RecipeError whose message is one line - never another exception, never a multi-line message.

Inputs: random TOML tables (random and recipe-like keys, values of every TOML type, nested
tables, arrays), random text and bytes, and random mutations of the demo recipes (keys deleted,
values replaced by text, switches, integers, floats, arrays, dates, huge and negative numbers).

The fuzz runs derandomized (the same examples on every run). The inputs it found breaking the
property when it was written (sections given as text or arrays, sun angles as text or huge
integers, dates at the ends of the calendar, a binary daily table, line breaks in keys, ids and
paths) are pinned below (``PINNED_CASES``) as regression cases; all hold since the fixes.
"""

from __future__ import annotations

import copy
import datetime as dt
import tomllib
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from rasterbudget.errors import RecipeError
from rasterbudget.recipe import Recipe, load_recipe

from .conftest import DEMO_RECIPE, TINY, demo_recipe_dict, write_toml

FUZZ = settings(
    max_examples=200,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture],
    derandomize=True,
    database=None,
)
WORKFLOWS = DEMO_RECIPE.parent


def load_or_refuse(path: Path) -> Recipe | None:
    """The property, checked on one file."""
    try:
        recipe = load_recipe(path)
    except RecipeError as err:
        message = str(err)
        assert message.strip(), "an empty RecipeError"
        assert not _line_break(message), f"a RecipeError of several lines:\n{message}"
        return None
    assert isinstance(recipe, Recipe)
    return recipe


# --------------------------------------------------------------------------------------------
# an exact TOML writer: quoted keys, escaped strings, every TOML type (conftest.write_toml is
# the project's minimal one; the tests use both)


def _string(text: str) -> str:
    out = []
    for ch in text:
        if ch in '"\\':
            out.append("\\" + ch)
        elif ord(ch) < 0x20 or ord(ch) == 0x7F:
            out.append(f"\\u{ord(ch):04x}")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'


def _value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return repr(value)  # nan, inf and -inf are TOML too
    if isinstance(value, dt.datetime | dt.date | dt.time):
        return value.isoformat()
    if isinstance(value, list):
        return "[" + ", ".join(_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{_string(k)} = {_value(v)}" for k, v in value.items()) + "}"
    return _string(str(value))


def exact_toml(data: dict) -> str:
    return "".join(f"{_string(k)} = {_value(v)}\n" for k, v in data.items())


def write_exact(data: dict, path: Path) -> Path:
    path.write_text(exact_toml(data), encoding="utf-8")
    return path


def test_the_exact_writer_round_trips_the_demo_recipe():
    data = demo_recipe_dict()
    assert tomllib.loads(exact_toml(data)) == data


# --------------------------------------------------------------------------------------------
# strategies

#: Keys a recipe knows (at some level), so that random tables reach the validators.
VOCABULARY = [
    "run", "defaults", "scene", "season", "zones", "compare", "comparison", "path", "out",
    "chunk_size", "tile_size", "class_table", "id", "acquired_utc", "acquired_date",
    "acquired_from", "inputs", "overpass", "daily", "daily_table", "product", "grid",
    "sensible_heat", "daily_scaling", "reference_et", "radiation", "anchors", "hot_soil",
    "edges", "residual", "uncertainty", "albedo", "surface_temperature", "land_cover", "ndvi",
    "elevation", "cloud_mask", "scale", "offset", "nodata", "units", "resampling", "remap",
    "band", "drop_values", "drop_bits", "station_elevation_m", "air_temperature_c",
    "relative_humidity_pct", "wind_speed_m_s", "wind_height_m", "shortwave_in_w_m2", "tmax_c",
    "tmin_c", "rh_max_pct", "rh_min_pct", "vapour_pressure_kpa", "shortwave_mj_m2", "kind",
    "metadata", "stac_item", "sensor", "bands", "blue", "red", "nir", "thermal", "pixel_qa",
    "sun_elevation_deg", "sun_azimuth_deg", "calibration", "atmosphere", "table", "start", "end",
    "scenes", "weather", "fraction", "crs", "resolution", "bounds", "members", "current",
    "previous", "baseline", "id_property", "method_tables",
]  # fmt: skip

#: Values that mean something to a recipe: paths of real files of every kind, placeholders.
MEANINGFUL_TEXT = [
    str(TINY / "albedo_20260614.tif"),
    str(TINY / "land_cover.tif"),
    str(TINY / "daily_weather_2026.csv"),
    str(TINY / "zones.geojson"),
    str(TINY / "product_l2" / "KB07_L2SP_033032_20260614_DEMO_MTL.txt"),
    str(TINY / "product_l2" / "KB07_L2SP_033032_20260614_DEMO_stac.json"),
    str(TINY),
    str(TINY / "absent.tif"),
    "albedo_{date}.tif",
    "{year}/{doy}/{id}.tif",
    "{month}.tif",
    "{",
    "}{",
    "https://example.invalid/a.tif",
    "/vsizip/none.zip/a.tif",
    "..",
    ".",
    "",
    "anchors",
    "edges",
    "reference_et_fraction",
    "percent",
    "C",
    "ETM",
    "2026-06-14T17:52:00Z",
    "2026-06-14",
    "EPSG:32613",
    "auto",
    "off",
]

offsets = st.integers(-23 * 60 - 59, 23 * 60 + 59).map(
    lambda m: dt.timezone(dt.timedelta(minutes=m))
)
datetimes = st.datetimes(
    min_value=dt.datetime(1, 1, 1), timezones=st.none() | st.just(dt.UTC) | offsets
)
scalars = st.one_of(
    st.text(max_size=12),
    st.sampled_from(MEANINGFUL_TEXT),
    st.booleans(),
    st.integers(),
    st.sampled_from([0, -1, 1, 2**63 - 1, -(2**63), 10**30, -(10**30)]),
    st.floats(),
    st.sampled_from([1e308, -1e308, 5e-324, float("nan"), float("inf"), -0.0]),
    st.dates(),
    datetimes,
    st.times(),
)
keys = st.sampled_from(VOCABULARY) | st.text(max_size=10)
values = st.recursive(
    scalars,
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(keys, inner, max_size=5),
    max_leaves=10,
)
tables = st.dictionaries(keys, values, max_size=5)


def _line_break(text: str) -> bool:
    return "\n" in text or "\r" in text


def _paths(node, prefix=()):
    """Every (path, value) below ``node`` (dict keys and list indices)."""
    items = node.items() if isinstance(node, dict) else enumerate(node)
    for key, value in items:
        yield (*prefix, key), value
        if isinstance(value, dict | list):
            yield from _paths(value, (*prefix, key))


def _season_recipe() -> dict:
    data = tomllib.loads((WORKFLOWS / "demo_season.toml").read_text())
    data["defaults"]["inputs"]["elevation"] = str(TINY / "elevation.tif")
    for scene in data["scene"]:
        for key, value in scene["inputs"].items():
            scene["inputs"][key] = str((WORKFLOWS / value).resolve())
    data["season"][0]["weather"] = str(TINY / "daily_weather_2026.csv")
    data["zones"]["path"] = str(TINY / "zones.geojson")
    return data


def _product_recipe() -> dict:
    """The demo's first scene from its Level-2 product, the time from the sun angles."""
    data = demo_recipe_dict()
    scene = data["scene"][0]
    data["scene"] = [scene]
    for role in ("albedo", "surface_temperature", "ndvi"):
        del scene["inputs"][role]
    del scene["acquired_utc"]
    scene["acquired_date"] = dt.date(2026, 6, 14)
    folder = TINY / "product_l2"
    scene["product"] = {
        "sensor": "ETM",
        "sun_elevation_deg": 67.57,
        "sun_azimuth_deg": 133.0,
        "bands": {
            name: str(folder / f"KB07_L2SP_033032_20260614_DEMO_{suffix}.TIF")
            for name, suffix in (("red", "SR_B3"), ("nir", "SR_B4"), ("thermal", "ST_B6"))
        },
    }
    return data


BASES = {"demo": demo_recipe_dict, "season": _season_recipe, "product": _product_recipe}


@st.composite
def mutated_recipes(draw) -> dict:
    data = copy.deepcopy(BASES[draw(st.sampled_from(sorted(BASES)))]())
    for _ in range(draw(st.integers(1, 4))):
        paths = list(_paths(data))
        if not paths:
            break
        path, _ = draw(st.sampled_from(paths))
        *parents, last = path
        holder = data
        for part in parents:
            holder = holder[part]
        action = draw(st.sampled_from(["delete", "replace", "replace", "add"]))
        if action == "delete":
            del holder[last]
        elif action == "replace":
            holder[last] = draw(values)
        else:  # a new key in the nearest table
            target = holder[last] if isinstance(holder[last], dict) else holder
            if isinstance(target, dict):
                target[draw(keys)] = draw(values)
    return data


def _writable_by_write_toml(node) -> bool:
    """conftest.write_toml needs bare keys and arrays either all of tables or of none."""
    if isinstance(node, dict):
        return all(
            isinstance(k, str) and k.replace("_", "a").isalnum() and k.isascii() for k in node
        ) and all(_writable_by_write_toml(v) for v in node.values())
    if isinstance(node, list):
        dicts = [isinstance(v, dict) for v in node]
        return (all(dicts) or not any(dicts)) and all(_writable_by_write_toml(v) for v in node)
    return True


def _write(data: dict, path: Path, with_write_toml: bool) -> Path:
    if with_write_toml and _writable_by_write_toml(data):
        return write_toml(data, path)
    return write_exact(data, path)


# --------------------------------------------------------------------------------------------
# the property on random tables


@st.composite
def random_recipes(draw) -> dict:
    """Random tables, with recipe-shaped top-level keys often present."""
    data = draw(tables)
    for key in ("run", "defaults", "season", "zones"):
        if draw(st.booleans()):
            data[key] = draw(tables if key != "season" else st.lists(tables, max_size=1))
    if draw(st.integers(0, 3)):
        data["scene"] = draw(st.lists(tables, min_size=1, max_size=2))
    return data


@FUZZ
@given(data=random_recipes())
def test_random_tables(tmp_path, data):
    load_or_refuse(write_exact(data, tmp_path / "recipe.toml"))


@FUZZ
@given(
    text=st.text(max_size=200)
    | st.lists(
        st.sampled_from(
            [
                "[run]",
                "[[scene]]",
                "[scene.inputs]",
                "[defaults]",
                "[[season]]",
                'id = "a"',
                "id = 1",
                "x = 1",
                "=",
                "[",
                "]]",
                '"',
                "'''",
                "a.b.c = 2",
                "acquired_utc = 2026-06-14T17:52:00Z",
                "acquired_utc = 2026-06-14T17:52:00",
                "scene = 5",
                "\\u0000",
                "\t",
            ]
        ),
        max_size=12,
    ).map("\n".join)
)
def test_random_text_loads_or_refuses(tmp_path, text):
    path = tmp_path / "recipe.toml"
    path.write_text(text, encoding="utf-8")
    load_or_refuse(path)


@FUZZ
@given(payload=st.binary(max_size=200))
def test_random_bytes_load_or_refuse(tmp_path, payload):
    path = tmp_path / "recipe.toml"
    path.write_bytes(payload)
    load_or_refuse(path)


# --------------------------------------------------------------------------------------------
# the property on the demo recipes, mutated


@pytest.mark.parametrize("base", sorted(BASES))
def test_the_unmutated_bases_load(tmp_path, base):
    # conftest.write_toml quotes dates: the product base's acquired_date would become text
    writers = (False,) if base == "product" else (True, False)
    for with_write_toml in writers:
        recipe = load_or_refuse(_write(BASES[base](), tmp_path / "recipe.toml", with_write_toml))
        assert recipe is not None


@FUZZ
@given(data=mutated_recipes(), with_write_toml=st.booleans())
def test_mutated_demo_recipes(tmp_path, data, with_write_toml):
    load_or_refuse(_write(data, tmp_path / "recipe.toml", with_write_toml))


# --------------------------------------------------------------------------------------------
# inputs that break the property today (library gaps), each pinned


def _demo_with(change) -> dict:
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    change(data, data["scene"][0])
    return data


def _product_with(change) -> dict:
    data = _product_recipe()
    change(data, data["scene"][0])
    return data


def _gap(case_id: str, data, what_happened: str):
    """An input that once broke the property (``what_happened``), kept as a regression case."""
    return pytest.param(data, id=case_id)


PINNED_CASES = [
    _gap(
        "anchors-as-text",
        _demo_with(lambda d, s: s.update(anchors="auto")),
        "AttributeError: 'str' object has no attribute 'get' (recipe._with_placeholders)",
    ),
    _gap(
        "anchors-as-array",
        _demo_with(lambda d, s: s.update(anchors=[5, 95])),
        "AttributeError: 'list' object has no attribute 'get' (recipe._with_placeholders)",
    ),
    _gap(
        "product-bands-as-array",
        _product_with(lambda d, s: s["product"].update(bands=["red.tif", "nir.tif"])),
        "AttributeError: 'list' object has no attribute 'values' (recipe._acquired_from_product)",
    ),
    _gap(
        "product-band-as-number",
        _product_with(lambda d, s: s["product"].update(bands={"red": 3})),
        "TypeError: expected str, bytes or os.PathLike object, not int "
        "(recipe._acquired_from_product)",
    ),
    _gap(
        "product-sun-elevation-as-text",
        _product_with(lambda d, s: s["product"].update(sun_elevation_deg="67.6")),
        "TypeError: ufunc 'radians' not supported for the input types ... "
        "(physics.solar.time_from_sun_angles via recipe._acquired_from_product)",
    ),
    _gap(
        "daily-table-that-is-not-text",
        _demo_with(lambda d, s: s.update(daily_table=str(TINY / "albedo_20260614.tif"))),
        "UnicodeDecodeError: 'utf-8' codec can't decode byte ... (recipe._daily_from_table "
        "reads the CSV without catching it)",
    ),
    _gap(
        "acquired-utc-at-the-start-of-the-calendar",
        _demo_with(
            lambda d, s: s.update(
                acquired_utc=dt.datetime(1, 1, 1, tzinfo=dt.timezone(dt.timedelta(hours=1)))
            )
        ),
        "OverflowError: date value out of range (Scene._utc: astimezone(UTC) raised inside a "
        "pydantic validator, which only turns ValueError into a validation error)",
    ),
    _gap(
        "acquired-utc-at-the-end-of-the-calendar-with-a-placeholder",
        _demo_with(
            lambda d, s: (
                s.update(
                    acquired_utc=dt.datetime(
                        9999, 12, 31, 23, 0, tzinfo=dt.timezone(dt.timedelta(hours=-12))
                    )
                ),
                s["inputs"].update(ndvi=str(TINY / "ndvi_{date}.tif")),
            )
        ),
        "OverflowError: date value out of range (recipe._acquired)",
    ),
    _gap(
        "acquired-date-outside-the-pandas-range",
        _product_with(lambda d, s: s.update(acquired_date=dt.date(1500, 6, 14))),
        "pandas OutOfBoundsDatetime: Cannot cast 1500-06-14 00:00:00+00:00 to unit='ns' "
        "without overflow (physics.solar.time_from_sun_angles via "
        "recipe._acquired_from_product)",
    ),
    _gap(
        "product-sun-azimuth-huge-integer",
        _product_with(lambda d, s: s["product"].update(sun_azimuth_deg=10**30)),
        "TypeError: loop of ufunc does not support argument 0 of type int which has no "
        "callable radians method (physics.solar.time_from_sun_angles)",
    ),
    _gap(
        "line-break-in-a-placeholder",
        _demo_with(lambda d, s: s["inputs"].update(ndvi="ndvi_{da\nte}.tif")),
        "RecipeError of two lines: 'unknown placeholder {da' / 'te}; use ...' (the name is "
        "quoted raw)",
    ),
    _gap(
        "line-break-in-a-daily-table-path",
        _demo_with(lambda d, s: s.update(daily_table="weather\n2026.csv")),
        "RecipeError of two lines: 'daily_table .../weather' / '2026.csv does not exist; ...' "
        "(the path is quoted raw)",
    ),
    _gap(
        "carriage-return-in-a-key",
        _demo_with(lambda d, s: s["daily"].update({"tmax\rc": 30.0})),
        "RecipeError holding a raw carriage return: 'scene[0] (...).daily.tmax\\rc: unknown "
        "key' (a terminal overprints the line)",
    ),
    _gap(
        "line-break-in-a-key",
        _demo_with(lambda d, s: s["overpass"].update({"wind_speed\nm_s": 3.0})),
        "RecipeError of two lines: the unknown key is quoted raw in the message",
    ),
    _gap(
        "line-break-in-a-scene-id",
        _demo_with(lambda d, s: s.update(id="kessendry\n20260614")),
        "RecipeError of several lines: the id is quoted raw in 'scene[0] (<id>)' labels",
    ),
]


@pytest.mark.parametrize("data", PINNED_CASES)
def test_pinned_cases(tmp_path, data):
    load_or_refuse(write_exact(data, tmp_path / "recipe.toml"))
