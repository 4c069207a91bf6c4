"""A matrix of bad inputs through the command line, in process, on the demo's first scene.

Every case damages one thing (a recipe key, an input raster, a product, a zone file, the output
folder, an earlier run's outputs or the weather) and checks the command's answer as a user meets
it: the exit status (2 refused, 1 some scenes or seasons of a batch failed, 0 done, 130
interrupted), exactly one line ``rasterbudget: error: ...`` naming the culprit, no traceback, and
nothing left behind (no ``*.partial`` under OUT, no output raster of the refused scene, no
``.rasterbudget.lock``).

Fifteen cases found gaps when the matrix was written (zone files crashing after the scene ran,
stale outputs presented as complete after a refused rerun, a season of an unknown scene
accepted, inspect not reading the zones, ...); they pass since the fixes.
"""

from __future__ import annotations

import copy
import datetime as dt
import json
import os
import shutil
import socket
import subprocess
import sys
import tomllib
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner

from rasterbudget.cli import main
from rasterbudget.demo import PRODUCT_FOLDER, PRODUCT_STEM
from rasterbudget.io.lock import LOCK_NAME
from rasterbudget.scene import blocks

from ..conftest import DEMO_RECIPE, TINY, demo_recipe_dict, write_toml

SCENE = "kessendry_20260614"
SECOND = "kessendry_20260823"
SEASON = "kessendry_summer_2026"
PRODUCT = TINY / PRODUCT_FOLDER
METADATA = PRODUCT / f"{PRODUCT_STEM}_MTL.txt"
ZONES = TINY / "zones.geojson"
WORKFLOWS = DEMO_RECIPE.parent
ERROR = "rasterbudget: error: "


# --------------------------------------------------------------------------------------------
# the case's workspace


@dataclass
class Ctx:
    """One case's folder: ``in/`` for damaged inputs, ``out/`` for outputs, the recipe dict."""

    tmp: Path
    data: dict = field(default_factory=dict)
    planted_lock: str | None = None  # a lock the case wrote that must survive untouched
    monkeypatch: pytest.MonkeyPatch | None = None

    def __post_init__(self) -> None:
        (self.tmp / "in").mkdir()
        self.data = demo_recipe_dict()
        self.data["scene"] = self.data["scene"][:1]
        self.data["run"]["out"] = str(self.out)

    @property
    def out(self) -> Path:
        return self.tmp / "out"

    @property
    def recipe(self) -> Path:
        return self.tmp / "recipe.toml"

    @property
    def scene(self) -> dict:
        return self.data["scene"][0]

    @property
    def inputs(self) -> dict:
        return self.scene["inputs"]

    def file(self, name: str) -> Path:
        return self.tmp / "in" / name

    def write(self) -> Path:
        return write_toml(self.data, self.recipe)

    def derive(self, role: str, fn: Callable, **profile) -> str:
        """Input ``role`` rewritten as ``in/<role>.tif`` with ``fn`` applied to its pixels (a
        3-D result gives a multi-band file) and ``profile`` over the source's profile."""
        source = self.inputs[role] if role != "elevation" else str(TINY / "elevation.tif")
        return derive_raster(Path(source), self.file(f"{role}.tif"), fn, **profile)


def derive_raster(src: Path, dst: Path, fn: Callable, **profile) -> str:
    with rasterio.open(src) as s:
        meta, pixels = s.profile, s.read(1)
    pixels = np.asarray(fn(pixels))
    meta.update(profile)
    meta["dtype"] = profile.get("dtype", pixels.dtype)
    if pixels.ndim == 3:
        meta["count"] = pixels.shape[0]
    if np.dtype(meta["dtype"]).kind in "iu":
        meta["predictor"] = 2  # the sources' floating-point predictor is for floats only
    with rasterio.open(dst, "w", **meta) as d:
        if pixels.ndim == 3:
            d.write(pixels.astype(meta["dtype"]))
        else:
            d.write(pixels.astype(meta["dtype"]), 1)
    return str(dst)


def season_dict(out: Path) -> dict:
    """``workflows/demo_season.toml`` with absolute paths, writing to ``out``, without zones."""
    data = tomllib.loads((WORKFLOWS / "demo_season.toml").read_text())
    data["defaults"]["inputs"]["elevation"] = str(TINY / "elevation.tif")
    for scene in data["scene"]:
        for key, value in scene["inputs"].items():
            scene["inputs"][key] = str((WORKFLOWS / value).resolve())
    for season in data["season"]:
        season["weather"] = str((WORKFLOWS / season["weather"]).resolve())
    del data["zones"]
    data["run"]["out"] = str(out)
    return data


def invoke(args: list[str]):
    return CliRunner().invoke(main, [str(a) for a in args])


def run_args(ctx: Ctx, *extra: str) -> list[str]:
    return ["run", ctx.write(), "--quiet", "--no-quicklook", *extra]


# --------------------------------------------------------------------------------------------
# the case and its checks


@dataclass(frozen=True)
class Case:
    id: str
    setup: Callable[[Ctx], list | None]  # damages the workspace; argv, or None: run the recipe
    words: tuple[str, ...] = ()  # each must be in the error line (the culprit)
    exit: int = 2
    #: what OUT may hold of the scene: "nothing" (no raster of it), "done" (the scene itself was
    #: fine and finished: zones are read after it), "stale" (an earlier run's rasters remain and
    #: the manifest must disown them)
    scene: str = "nothing"
    check: Callable[[Ctx, object], None] | None = None  # further checks of this case
    failed: str = SCENE  # the scene at fault


def assert_one_error_line(result, words) -> str:
    """stderr is exactly one ``rasterbudget: error: `` line holding every word; returns it."""
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, f"expected one line on stderr, got:\n{result.output}"
    assert lines[0].startswith(ERROR), lines[0]
    for word in words:
        assert word in lines[0], f"{word!r} not named in: {lines[0]}"
    return lines[0]


def assert_no_crash(result) -> None:
    """No exception escaped the command (CliRunner would swallow its traceback)."""
    assert result.exception is None or isinstance(result.exception, SystemExit), (
        f"uncaught {type(result.exception).__name__}: {result.exception!r}"
    )
    assert "Traceback" not in result.output


def assert_nothing_left(ctx: Ctx, scene: str = "nothing", failed: str = SCENE) -> None:
    out = ctx.out
    if not out.exists():
        return
    partials = sorted(str(p.relative_to(out)) for p in out.rglob("*.partial"))
    assert partials == [], f"temporary files left: {partials}"
    lock = out / LOCK_NAME
    if ctx.planted_lock is None:
        assert not lock.exists(), "the output lock was left behind"
    else:
        assert lock.read_text() == ctx.planted_lock, "another run's lock was touched"
    folder = out / failed
    if scene == "nothing" and folder.is_dir():
        rasters = sorted(p.name for p in folder.rglob("*.tif"))
        assert rasters == [], f"outputs of the refused scene left: {rasters}"
    if scene == "stale":
        manifest = folder / "manifest.json"
        if manifest.exists():
            status = json.loads(manifest.read_text()).get("status")
            assert status == "failed", f"the folder still presents its older outputs as {status!r}"


# --------------------------------------------------------------------------------------------
# recipe


def _set(path: str, value) -> Callable[[Ctx], None]:
    """Set a dotted key of the one scene (``scene.`` prefix) or of the recipe."""

    def setup(ctx: Ctx) -> None:
        *parents, last = path.split(".")
        target = ctx.data
        for part in parents:
            target = ctx.scene if part == "scene" and target is ctx.data else target[part]
        target[last] = value

    return setup


def _drop(*paths: str, set_too: tuple[str, object] | None = None) -> Callable[[Ctx], None]:
    def setup(ctx: Ctx) -> None:
        for path in paths:
            *parents, last = path.split(".")
            target = ctx.data
            for part in parents:
                target = ctx.scene if part == "scene" and target is ctx.data else target[part]
            del target[last]
        if set_too is not None:
            _set(*set_too)(ctx)

    return setup


def _daily_table(ctx: Ctx) -> None:
    ctx.file("weather.csv").write_text("date,tmax_c\n2026-06-15,30\n")
    ctx.scene["daily_table"] = str(ctx.file("weather.csv"))


def _text_recipe(text: str | bytes) -> Callable[[Ctx], list]:
    def setup(ctx: Ctx) -> list:
        if isinstance(text, bytes):
            ctx.recipe.write_bytes(text)
        else:
            ctx.recipe.write_text(text)
        return ["run", ctx.recipe, "--quiet"]

    return setup


def _typo(ctx: Ctx) -> None:
    overpass = ctx.scene["overpass"]
    overpass["wind_sped_m_s"] = overpass.pop("wind_speed_m_s")


def _duplicate(ctx: Ctx) -> None:
    ctx.data["scene"].append(copy.deepcopy(ctx.scene))


def _comparison_to_run(ctx: Ctx) -> list:
    text = (
        "[compare]\n"
        f'out = "{ctx.out}"\n'
        "[[comparison]]\n"
        'id = "dry_year"\n'
        f'current = "{TINY / "albedo_20260823.tif"}"\n'
        f'previous = "{TINY / "albedo_20260614.tif"}"\n'
    )
    ctx.recipe.write_text(text)
    return ["run", ctx.recipe, "--quiet"]


def _run_recipe_to_compare(ctx: Ctx) -> list:
    return ["compare", ctx.write()]


def _placeholder_without_time(ctx: Ctx) -> None:
    del ctx.scene["acquired_utc"]
    ctx.inputs["ndvi"] = str(TINY / "ndvi_{date}.tif")


def _season_with(**season) -> Callable[[Ctx], None]:
    def setup(ctx: Ctx) -> None:
        ctx.data["season"] = [
            {
                "id": "summer",
                "start": "2026-06-01",
                "end": "2026-08-31",
                "scenes": [SCENE],
                "weather": str(TINY / "daily_weather_2026.csv"),
            }
            | season
        ]

    return setup


RECIPE = [
    Case("recipe-unknown-key", _typo, ("overpass.wind_sped_m_s", "unknown key")),
    Case("recipe-unknown-table", _set("runs", {"out": "x"}), ("runs", "unknown key")),
    Case(
        "recipe-wrong-type",
        _set("scene.overpass.wind_height_m", "high"),
        ("wind_height_m", "'high'"),
    ),
    Case("recipe-bool-for-number", _set("scene.daily.tmax_c", True), ("tmax_c = true",)),
    Case("recipe-bool-for-run-number", _set("run.chunk_size", False), ("chunk_size = false",)),
    Case("recipe-missing-required-key", _drop("scene.daily.tmax_c"), ("daily.tmax_c", "missing")),
    Case(
        "recipe-missing-station-elevation",
        _drop("defaults.overpass.station_elevation_m"),
        ("station_elevation_m", "missing"),
    ),
    Case("recipe-missing-inputs-table", _drop("scene.inputs"), ("inputs", "missing")),
    Case("recipe-dotdot-scene-id", _set("scene.id", ".."), ("'..'", "outside the output")),
    Case("recipe-dot-scene-id", _set("scene.id", "."), ("'.'", "outside the output")),
    Case("recipe-slash-in-scene-id", _set("scene.id", "up/../x"), ("up/../x",)),
    Case("recipe-empty-scene-id", _set("scene.id", ""), ("().id", "at least 1 character")),
    Case("recipe-duplicate-ids", _duplicate, (SCENE, "used twice")),
    Case("recipe-bad-date", _set("scene.acquired_utc", "2026-13-45T17:52:00Z"), ("acquired_utc",)),
    Case("recipe-tmin-above-tmax", _set("scene.daily.tmin_c", 35.0), ("tmin_c (35.0)", "tmax_c")),
    Case("recipe-bad-toml-syntax", _text_recipe("[run\nout = 1\n"), ("not valid TOML", "line 1")),
    Case("recipe-empty-file", _text_recipe(""), ("no [[scene]]",)),
    Case("recipe-not-utf8", _text_recipe(b"\xff\xfe[run]\x80\n"), ("UTF-8",)),
    Case("recipe-duplicate-key", _text_recipe("[run]\nout = 'a'\nout = 'b'\n"), ("line 3",)),
    Case(
        "recipe-does-not-exist",
        lambda ctx: ["run", ctx.tmp / "absent.toml"],
        ("absent.toml", "does not exist"),
    ),
    Case("recipe-unknown-method", _set("scene.sensible_heat", "magic"), ("'magic'", "anchors")),
    Case(
        "recipe-unknown-daily-scaling",
        _set("scene.daily_scaling", "crop_coefficient"),
        ("daily_scaling", "crop_coefficient"),
    ),
    Case(
        "recipe-unknown-placeholder",
        _set("scene.inputs.ndvi", str(TINY / "ndvi_{month}.tif")),
        ("{month}", "inputs.ndvi"),
    ),
    Case(
        "recipe-placeholder-without-time",
        _placeholder_without_time,
        ("{date}", "acquired_utc"),
    ),
    Case(
        "recipe-comparison-recipe-given-to-run",
        _comparison_to_run,
        ("comparison recipe", "rasterbudget compare"),
    ),
    Case("recipe-run-recipe-given-to-compare", _run_recipe_to_compare, ("run recipe",)),
    Case("recipe-huge-chunk-size", _set("run.chunk_size", 10**30), ("chunk_size", "16384")),
    Case("recipe-negative-tile-size", _set("run.tile_size", -256), ("tile_size", "-256")),
    Case(
        "recipe-unknown-units",
        _set("scene.inputs.albedo", {"path": "a.tif", "units": "%"}),
        ("albedo.units", "'%'"),
    ),
    Case(
        "recipe-class-table-missing",
        lambda ctx: ctx.data["run"].update(class_table=str(ctx.file("classes.toml"))),
        ("classes.toml", "run.class_table"),
    ),
    Case(
        "recipe-season-end-before-start",
        _season_with(start="2026-08-31", end="2026-06-01"),
        ("season", "before start"),
    ),
    pytest.param(
        Case(
            "recipe-season-of-unknown-scene",
            _season_with(scenes=["kessendry_29990101"]),
            ("kessendry_29990101",),
        ),
    ),
]


# --------------------------------------------------------------------------------------------
# weather


WEATHER = [
    Case(
        "weather-rh-above-100",
        _set("scene.overpass.relative_humidity_pct", 130.0),
        ("relative_humidity_pct", "100"),
    ),
    Case("weather-wind-zero", _set("scene.overpass.wind_speed_m_s", 0.0), ("wind_speed_m_s",)),
    Case("weather-wind-negative", _set("scene.overpass.wind_speed_m_s", -2.0), ("-2.0",)),
    Case(
        "weather-air-temperature-nan",
        _set("scene.overpass.air_temperature_c", float("nan")),
        ("air_temperature_c", "nan"),
    ),
    Case(
        "weather-sun-below-horizon",
        _set("scene.acquired_utc", dt.datetime(2026, 6, 14, 5, 0, tzinfo=dt.UTC)),
        ("below the horizon", "acquired_utc"),
    ),
    Case(
        "weather-acquired-utc-without-time-zone",
        _set("scene.acquired_utc", dt.datetime(2026, 6, 14, 17, 52)),
        ("acquired_utc", "time zone"),
    ),
    Case(
        "weather-daily-without-humidity",
        _drop("scene.daily.rh_max_pct", "scene.daily.rh_min_pct"),
        ("vapour_pressure_kpa", "rh_min_pct"),
    ),
    Case(
        "weather-reference-scaling-without-daily-wind",
        _drop(
            "scene.daily.wind_speed_m_s", set_too=("scene.daily_scaling", "reference_et_fraction")
        ),
        ("daily.wind_speed_m_s",),
    ),
    Case(
        "weather-gridded-raster-missing",
        _set("scene.overpass.air_temperature_c", "warm_air.tif"),
        ("warm_air.tif", "overpass.air_temperature_c"),
    ),
    Case("weather-daily-table-without-the-day", _daily_table, ("weather.csv", "2026-06-14")),
]


# --------------------------------------------------------------------------------------------
# inputs


def _input(role: str, fn: Callable, as_table: dict | None = None, **profile) -> Callable:
    def setup(ctx: Ctx) -> None:
        path = ctx.derive(role, fn, **profile)
        value = {"path": path, **as_table} if as_table else path
        if role == "elevation":
            ctx.data["defaults"]["inputs"]["elevation"] = value
        else:
            ctx.inputs[role] = value

    return setup


def _missing(ctx: Ctx) -> None:
    ctx.inputs["albedo"] = str(ctx.tmp / "nowhere" / "albedo.tif")


def _off_grid(shift_px_x: int, shift_px_y: int) -> Callable:
    """The land cover moved so that it overlaps the grid by the given remainder of pixels."""

    def setup(ctx: Ctx) -> None:
        with rasterio.open(ctx.inputs["land_cover"]) as src:
            t = src.transform
        moved = rasterio.Affine(t.a, 0, t.c + shift_px_x * t.a, 0, t.e, t.f + shift_px_y * t.e)
        ctx.inputs["land_cover"] = ctx.derive("land_cover", lambda a: a, transform=moved)

    return setup


def _truncated(ctx: Ctx) -> None:
    payload = Path(ctx.inputs["surface_temperature"]).read_bytes()
    ctx.file("ts.tif").write_bytes(payload[: len(payload) // 2])
    ctx.inputs["surface_temperature"] = str(ctx.file("ts.tif"))


def _corrupt_tiles(ctx: Ctx) -> None:
    """Header and directory intact, compressed tile bytes scrambled: fails while reading."""
    payload = bytearray(Path(ctx.inputs["surface_temperature"]).read_bytes())
    for i in range(2000, len(payload) // 2):
        payload[i] = (payload[i] * 7 + 13) % 256
    ctx.file("ts.tif").write_bytes(bytes(payload))
    ctx.inputs["surface_temperature"] = str(ctx.file("ts.tif"))


def _directory(ctx: Ctx) -> None:
    ctx.file("ndvi.tif").mkdir()
    ctx.inputs["ndvi"] = str(ctx.file("ndvi.tif"))


def _text_as_raster(ctx: Ctx) -> None:
    ctx.file("land_cover.tif").write_text("class codes, honest\n")
    ctx.inputs["land_cover"] = str(ctx.file("land_cover.tif"))


def _three_bands(a):
    return np.stack([a, a, a])


INPUTS = [
    Case("input-missing-file", _missing, ("nowhere/albedo.tif", "does not exist", "albedo")),
    Case(
        "input-without-crs",
        _input("albedo", lambda a: a, crs=None),
        ("in/albedo.tif", "has no CRS"),
    ),
    Case("input-does-not-overlap", _off_grid(2000, 0), ("in/land_cover.tif", "overlap")),
    Case("input-overlaps-by-one-pixel", _off_grid(399, 299), ("in/land_cover.tif", "covers")),
    Case(
        "input-all-nodata",
        _input("ndvi", lambda a: np.full_like(a, np.nan)),
        ("in/ndvi.tif", "no valid pixel"),
    ),
    Case(
        "input-albedo-in-percent-without-units",
        _input("albedo", lambda a: a * 100.0),
        ("in/albedo.tif", "percent", 'units = "percent"'),
    ),
    Case(
        "input-ts-in-celsius-without-units",
        _input("surface_temperature", lambda t: t - 273.15),
        ("in/surface_temperature.tif", "Celsius", 'units = "C"'),
    ),
    Case(
        "input-ts-kelvin-x100-integers-without-scale",
        _input(
            "surface_temperature",
            lambda t: np.where(np.isfinite(t), np.round(t * 100.0), 0),
            dtype="uint16",
            nodata=0,
        ),
        ("in/surface_temperature.tif", "scaled integers", "scale"),
    ),
    Case(
        "input-three-band-albedo-without-band",
        _input("albedo", _three_bands),
        ("in/albedo.tif", "3 bands", "band = 1"),
    ),
    Case(
        "input-band-beyond-the-file",
        _input("albedo", _three_bands, {"band": 5}),
        ("in/albedo.tif", "not band 5"),
    ),
    Case(
        "input-float-land-cover",
        _input("land_cover", lambda a: np.where(a > 0, a + 0.7, 0), dtype="float32"),
        ("in/land_cover.tif", "not whole numbers"),
    ),
    Case(
        "input-land-cover-of-unknown-codes",
        _input("land_cover", lambda a: np.where(a > 0, 200, 0), dtype="uint8"),
        ("in/land_cover.tif", "no code of the class table", "remap"),
    ),
    Case(
        "input-elevation-holding-1e30",
        _input(
            "elevation",
            lambda z: np.where(np.arange(z.size).reshape(z.shape) % 7 == 0, 1e30, z),
            dtype="float32",
        ),
        ("in/elevation.tif", "1e+30", "nodata"),
    ),
    Case("input-truncated-geotiff", _truncated, ("in/ts.tif", "cannot be read")),
    Case("input-corrupt-tile-data", _corrupt_tiles, ("in/ts.tif", "truncated or corrupt")),
    Case("input-directory-as-raster", _directory, ("in/ndvi.tif", "ndvi")),
    Case("input-text-file-as-raster", _text_as_raster, ("in/land_cover.tif", "cannot be read")),
    Case(
        "input-remap-table-missing",
        lambda ctx: ctx.inputs.update(
            land_cover={"path": ctx.inputs["land_cover"], "remap": str(ctx.file("codes.csv"))}
        ),
        ("codes.csv", "remap"),
    ),
    Case(
        "input-cloud-mask-dropping-nothing",
        lambda ctx: ctx.inputs.update(cloud_mask={"path": ctx.inputs["albedo"]}),
        ("cloud_mask", "drop_values"),
    ),
    pytest.param(
        Case(
            "input-missing-file-without-quiet",
            lambda ctx: (_missing(ctx), ["run", ctx.write()])[1],
            ("nowhere/albedo.tif",),
            check=lambda ctx, result: _assert_single_line_output(result),
        ),
    ),
    # inspect: "fails with the run's own message where a run would" (README)
    Case(
        "input-inspect-missing-file",
        lambda ctx: (_missing(ctx), ["inspect", ctx.write()])[1],
        ("nowhere/albedo.tif", "does not exist"),
    ),
    Case(
        "input-inspect-albedo-in-percent",
        lambda ctx: (
            _input("albedo", lambda a: a * 100.0)(ctx),
            ["inspect", ctx.write()],
        )[1],
        ("in/albedo.tif", "percent"),
    ),
    pytest.param(
        Case(
            "input-inspect-land-cover-of-unknown-codes",
            lambda ctx: (
                _input("land_cover", lambda a: np.where(a > 0, 200, 0), dtype="uint8")(ctx),
                ["inspect", ctx.write()],
            )[1],
            ("in/land_cover.tif", "no code of the class table"),
        ),
    ),
]


def _assert_single_line_output(result) -> None:
    assert len(result.output.strip().splitlines()) == 1, result.output


# --------------------------------------------------------------------------------------------
# products


def _product(product: dict | Callable[[Ctx], dict], **scene) -> Callable[[Ctx], None]:
    def setup(ctx: Ctx) -> None:
        for role in ("albedo", "surface_temperature", "ndvi"):
            del ctx.inputs[role]
        ctx.scene["product"] = product(ctx) if callable(product) else product
        ctx.scene.update(scene)

    return setup


def _product_without(band_file: str) -> Callable[[Ctx], dict]:
    def product(ctx: Ctx) -> dict:
        folder = ctx.file("product")
        shutil.copytree(PRODUCT, folder)
        (folder / band_file).unlink()
        return {"metadata": str(folder / METADATA.name)}

    return product


def _stac_without_swir1(ctx: Ctx) -> dict:
    item = json.loads((PRODUCT / f"{PRODUCT_STEM}_stac.json").read_text())
    del item["assets"]["swir16"]
    for asset in item["assets"].values():
        asset["href"] = str(PRODUCT / asset["href"])
    ctx.file("item.json").write_text(json.dumps(item))
    return {"stac_item": str(ctx.file("item.json"))}


PRODUCTS = [
    Case(
        "product-missing-band",
        _product(_product_without(f"{PRODUCT_STEM}_SR_B4.TIF")),
        ("SR_B4.TIF does not exist", "product.bands.nir"),
    ),
    Case(
        "product-metadata-of-another-day",
        _product(
            {"metadata": str(METADATA)},
            acquired_utc=dt.datetime(2026, 8, 23, 17, 52, tzinfo=dt.UTC),
        ),
        ("is of 2026-06-14", "acquired 2026-08-23"),
    ),
    Case(
        "product-wrong-sensor",
        _product({"metadata": str(METADATA), "sensor": "OLI_TIRS"}),
        ("sensor ETM", "product.sensor = 'OLI_TIRS'"),
    ),
    Case(
        "product-stac-item-without-a-band",
        _product(_stac_without_swir1),
        ("item.json", "['swir1']"),
    ),
    Case(
        "product-unscaled-integers-as-reflectance",
        _product({"metadata": str(METADATA), "reflectance_scale": 1.0, "reflectance_offset": 0.0}),
        ("not reflectances", "product.reflectance_scale"),
    ),
    Case(
        "product-metadata-missing",
        _product({"metadata": "no_such_MTL.txt"}),
        ("no_such_MTL.txt", "not found"),
    ),
    Case(
        "product-without-metadata-or-sensor",
        _product({"bands": {"red": "red.tif"}}),
        ("give metadata", "scene[0]"),
    ),
]


# --------------------------------------------------------------------------------------------
# zones (read after the scenes: the scene itself is fine and may finish)


def _zones(damage: Callable[[dict], object], command: str = "run") -> Callable[[Ctx], list]:
    """Write the demo zones damaged by ``damage`` (its result, when text, replaces the file;
    "absent": no file at all) and point the recipe, ``inspect`` or ``compare`` at them."""

    def setup(ctx: Ctx) -> list:
        collection = json.loads(ZONES.read_text())
        path = ctx.file("zones.geojson")
        text = damage(collection)
        if text != "absent":
            path.write_text(text if isinstance(text, str) else json.dumps(collection))
        if command == "compare":
            return [
                "compare",
                TINY / "albedo_20260823.tif",
                "--previous",
                TINY / "albedo_20260614.tif",
                "--zones",
                path,
                "--out",
                ctx.out,
            ]
        ctx.data["zones"] = {"path": str(path), "id_property": "zone_id"}
        return run_args(ctx) if command == "run" else ["inspect", ctx.write()]

    return setup


def _no_geometry(collection: dict) -> None:
    del collection["features"][0]["geometry"]


def _null_geometry(collection: dict) -> None:
    collection["features"][0]["geometry"] = None


def _text_coordinate(collection: dict) -> None:
    collection["features"][0]["geometry"]["coordinates"][0][1][0] = "483300.0"


def _feature_as_text(collection: dict) -> None:
    collection["features"][1] = "field_B"


def _no_zone_id(collection: dict) -> None:
    del collection["features"][1]["properties"]["zone_id"]


ZONE_CASES = [
    pytest.param(
        Case(
            "zones-feature-without-geometry", _zones(_no_geometry), ("zones.geojson",), scene="done"
        ),
    ),
    pytest.param(
        Case(
            "zones-feature-with-null-geometry",
            _zones(_null_geometry),
            ("zones.geojson",),
            scene="done",
        ),
    ),
    pytest.param(
        Case("zones-text-coordinate", _zones(_text_coordinate), ("zones.geojson",), scene="done"),
    ),
    pytest.param(
        Case(
            "zones-feature-that-is-text", _zones(_feature_as_text), ("zones.geojson",), scene="done"
        ),
    ),
    Case(
        "zones-file-does-not-exist",
        _zones(lambda c: "absent"),
        ("zones.geojson", "does not exist", "zones.path"),
        scene="done",
    ),
    Case(
        "zones-invalid-json",
        _zones(lambda c: '{"type": "FeatureCollection", "features": [ {'),
        ("zones.geojson", "not a GeoJSON FeatureCollection"),
        scene="done",
    ),
    Case(
        "zones-feature-without-its-id",
        _zones(_no_zone_id),
        ("zones.geojson", "feature 1", "'zone_id'"),
        scene="done",
    ),
    pytest.param(
        Case(
            "zones-refused-before-the-passes",
            _zones(lambda c: "absent"),
            ("zones.geojson", "does not exist"),
        ),
    ),
    pytest.param(
        Case(
            "zones-invalid-json-found-by-inspect",
            _zones(lambda c: "{", command="inspect"),
            ("zones.geojson",),
        ),
    ),
    Case(
        "zones-compare-file-does-not-exist",
        _zones(lambda c: "absent", command="compare"),
        ("zones.geojson", "does not exist"),
    ),
    pytest.param(
        Case(
            "zones-compare-feature-without-geometry",
            _zones(_no_geometry, command="compare"),
            ("zones.geojson",),
        ),
    ),
]


# --------------------------------------------------------------------------------------------
# file system and the output lock


def _out_is_a_file(ctx: Ctx) -> None:
    ctx.out.write_text("not a folder\n")


def _out_under_a_file(ctx: Ctx) -> None:
    ctx.file("plain").write_text("not a folder\n")
    ctx.data["run"]["out"] = str(ctx.file("plain") / "out")


def _scene_folder_is_a_file(ctx: Ctx) -> None:
    ctx.out.mkdir()
    (ctx.out / SCENE).write_text("not a folder\n")


def _read_only_out(ctx: Ctx) -> None:
    if os.geteuid() == 0:
        pytest.skip("running as root: chmod cannot make a folder read-only for this process")
    ctx.out.mkdir()
    ctx.out.chmod(0o555)


def _lock(ctx: Ctx, pid: int, host: str) -> None:
    ctx.out.mkdir(exist_ok=True)
    text = json.dumps({"pid": pid, "host": host, "started_utc": "2026-06-14T18:00:00+00:00"})
    (ctx.out / LOCK_NAME).write_text(text)
    ctx.planted_lock = text


def _garbled_lock(ctx: Ctx) -> None:
    ctx.out.mkdir()
    (ctx.out / LOCK_NAME).write_text("{garbled")
    ctx.planted_lock = "{garbled"


def _dead_pid() -> int:
    child = subprocess.Popen([sys.executable, "-c", "pass"])
    child.wait()
    return child.pid


def _produced_outputs(ctx: Ctx, result) -> None:
    assert (ctx.out / SCENE / "et_daily.tif").is_file()
    manifest = json.loads((ctx.out / SCENE / "manifest.json").read_text())
    assert manifest["status"] == "complete"
    assert not (ctx.out / LOCK_NAME).exists()


def _stale_lock(ctx: Ctx) -> list:
    _lock(ctx, _dead_pid(), socket.gethostname())
    ctx.planted_lock = None  # taken over: it must be gone after the run
    return run_args(ctx)


def _demo_under_a_file(ctx: Ctx) -> list:
    ctx.file("plain").write_text("not a folder\n")
    return ["demo", "--out", ctx.file("plain") / "demo"]


FILE_SYSTEM = [
    Case("fs-out-is-a-file", _out_is_a_file, ("/out: a file of that name",)),
    Case("fs-out-under-a-file", _out_under_a_file, ("plain/out", "output folder")),
    Case("fs-scene-folder-taken-by-a-file", _scene_folder_is_a_file, (SCENE, "a file")),
    Case("fs-read-only-out", _read_only_out, ("out", "permission")),
    Case(
        "fs-lock-held-by-a-live-run",
        lambda ctx: _lock(ctx, os.getpid(), socket.gethostname()),
        (LOCK_NAME, "another rasterbudget run", str(os.getpid())),
    ),
    Case(
        "fs-lock-held-on-another-host",
        lambda ctx: _lock(ctx, 1, "field-station-7"),
        (LOCK_NAME, "field-station-7"),
    ),
    Case("fs-unreadable-lock", _garbled_lock, (LOCK_NAME, "process ?")),
    Case("fs-stale-lock-is-taken-over", _stale_lock, exit=0, scene="done", check=_produced_outputs),
    pytest.param(
        Case("fs-demo-out-under-a-file", _demo_under_a_file, ("plain/demo",)),
    ),
    Case(
        "fs-compare-raster-missing",
        lambda ctx: [
            "compare",
            ctx.file("et_season.tif"),
            "--previous",
            TINY / "albedo_20260614.tif",
            "--out",
            ctx.out,
        ],
        ("in/et_season.tif", "does not exist"),
    ),
    Case(
        "fs-compare-rasters-on-two-grids",
        lambda ctx: [
            "compare",
            TINY / "albedo_20260614.tif",
            "--previous",
            TINY / "mixed" / "surface_temperature_90m.tif",
            "--out",
            ctx.out,
        ],
        ("surface_temperature_90m.tif", "not on the grid"),
    ),
]


# --------------------------------------------------------------------------------------------
# staleness, batches and interruption


def _first_run_then(damage: Callable[[Ctx], None]) -> Callable[[Ctx], list]:
    """Run the scene from a private albedo copy, then damage that copy and rerun."""

    def setup(ctx: Ctx) -> list:
        shutil.copy(ctx.inputs["albedo"], ctx.file("albedo.tif"))
        ctx.inputs["albedo"] = str(ctx.file("albedo.tif"))
        first = invoke(run_args(ctx))
        assert first.exit_code == 0, first.output
        damage(ctx)
        return run_args(ctx)

    return setup


def _delete_albedo(ctx: Ctx) -> None:
    ctx.file("albedo.tif").unlink()


def _albedo_to_percent(ctx: Ctx) -> None:
    with rasterio.open(ctx.file("albedo.tif"), "r+") as dst:
        dst.write(dst.read(1) * 100.0, 1)


def _truncate_albedo(ctx: Ctx) -> None:
    payload = ctx.file("albedo.tif").read_bytes()
    ctx.file("albedo.tif").write_bytes(payload[: len(payload) // 2])


def _season_then(damage: Callable[[Ctx], None]) -> Callable[[Ctx], list]:
    """Run the demo season (both scenes, one season), damage the second scene's albedo, rerun."""

    def setup(ctx: Ctx) -> list:
        ctx.data = season_dict(ctx.out)
        shutil.copy(ctx.data["scene"][1]["inputs"]["albedo"], ctx.file("albedo.tif"))
        ctx.data["scene"][1]["inputs"]["albedo"] = str(ctx.file("albedo.tif"))
        first = invoke(run_args(ctx))
        assert first.exit_code == 0, first.output
        assert (ctx.out / SEASON / "et_season.tif").is_file()
        damage(ctx)
        return run_args(ctx)

    return setup


def _season_reported_failed(ctx: Ctx, result) -> None:
    lines = result.stderr.strip().splitlines()
    assert any(line.startswith(f"{SECOND}: FAILED: ") for line in lines), result.output
    assert any(line.startswith(f"{SEASON}: FAILED: ") for line in lines), (
        f"the season was not reported failed:\n{result.output}"
    )
    assert "Traceback" not in result.output
    assert (ctx.out / SCENE / "et_daily.tif").is_file()  # the sound scene stays done
    folder = ctx.out / SECOND
    status = json.loads((folder / "manifest.json").read_text())["status"]
    assert status == "failed", status


def _batch_second_scene_broken(ctx: Ctx) -> list:
    ctx.data = demo_recipe_dict()
    ctx.data["run"]["out"] = str(ctx.out)
    ctx.data["scene"][1]["inputs"]["ndvi"] = str(ctx.file("ndvi_20260823.tif"))
    return run_args(ctx)


def _one_failed_one_done(ctx: Ctx, result) -> None:
    lines = result.stderr.strip().splitlines()
    assert lines[0].startswith(f"{SECOND}: FAILED: ") and "ndvi_20260823.tif" in lines[0]
    assert lines[-1].startswith("rasterbudget: 1 of 2 scenes failed"), result.output
    assert "Traceback" not in result.output
    assert (ctx.out / SCENE / "et_daily.tif").is_file()
    assert not list((ctx.out / SECOND).glob("*.tif"))
    rows = (ctx.out / "batch.csv").read_text().splitlines()
    assert any(row.startswith(f"{SECOND},failed,") for row in rows), rows


def _interrupt_pass2(ctx: Ctx) -> list:
    original, calls = blocks.pass2_block, {"n": 0}

    def interrupted(*args):
        calls["n"] += 1
        if calls["n"] == 2:
            raise KeyboardInterrupt
        return original(*args)

    ctx.monkeypatch.setattr(blocks, "pass2_block", interrupted)
    return run_args(ctx)


def _interrupted_line(ctx: Ctx, result) -> None:
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("rasterbudget: interrupted"), result.output
    assert "Traceback" not in result.output


STALENESS = [
    pytest.param(
        Case(
            "stale-rerun-with-a-missing-input",
            _first_run_then(_delete_albedo),
            ("in/albedo.tif", "does not exist"),
            scene="stale",
        ),
    ),
    pytest.param(
        Case(
            "stale-rerun-with-a-truncated-input",
            _first_run_then(_truncate_albedo),
            ("in/albedo.tif", "cannot be read"),
            scene="stale",
        ),
    ),
    Case(
        "stale-rerun-with-an-input-in-percent",
        _first_run_then(_albedo_to_percent),
        ("in/albedo.tif", "percent"),
        scene="stale",
    ),
    pytest.param(
        Case(
            "stale-season-over-a-scene-that-now-fails-early",
            _season_then(_delete_albedo),
            exit=1,
            scene="stale",
            check=_season_reported_failed,
            failed=SECOND,
        ),
    ),
    Case(
        "stale-season-over-a-scene-that-now-fails-in-pass-1",
        _season_then(_albedo_to_percent),
        exit=1,
        scene="stale",
        check=_season_reported_failed,
        failed=SECOND,
    ),
    Case(
        "batch-one-of-two-scenes-fails",
        _batch_second_scene_broken,
        exit=1,
        check=_one_failed_one_done,
        failed=SECOND,
    ),
    Case("interrupted-in-pass-2", _interrupt_pass2, exit=130, check=_interrupted_line),
]


# --------------------------------------------------------------------------------------------
# the test


CASES = RECIPE + WEATHER + INPUTS + PRODUCTS + ZONE_CASES + FILE_SYSTEM + STALENESS


def _params():
    for case in CASES:
        if isinstance(case, Case):
            yield pytest.param(case, id=case.id)
        else:  # already a pytest.param with marks
            (inner,) = case.values
            yield pytest.param(inner, id=inner.id, marks=case.marks)


@pytest.mark.parametrize("case", list(_params()))
def test_bad_input(case: Case, tmp_path, monkeypatch):
    ctx = Ctx(tmp_path, monkeypatch=monkeypatch)
    args = case.setup(ctx)
    if args is None:
        args = run_args(ctx)
    try:
        result = invoke(args)
    finally:
        if ctx.out.exists():  # let pytest clean up a folder a case made read-only
            ctx.out.chmod(0o755)
    assert result.exit_code == case.exit, f"exit {result.exit_code}:\n{result.output}"
    assert_no_crash(result)
    if case.exit == 2:
        assert_one_error_line(result, case.words)
        if case.scene != "done":
            assert result.stdout.strip() == "" or args[0] == "inspect", result.output
    assert_nothing_left(ctx, case.scene, case.failed)
    if case.check is not None:
        case.check(ctx, result)


def test_the_matrix_covers_every_kind():
    ids = [c.id if isinstance(c, Case) else c.values[0].id for c in CASES]
    assert len(ids) == len(set(ids)) >= 60
    kinds = {i.split("-")[0] for i in ids}
    assert {"recipe", "weather", "input", "product", "zones", "fs", "stale"} <= kinds
