"""Recipe files (TOML): parsing and validation with precise, key-naming error messages.

A recipe holds a ``[run]`` table, an optional ``[defaults]`` table that every scene inherits (any
scene key), and one ``[[scene]]`` table per scene. Units sit in the key names (``_c``, ``_pct``,
``_m_s`` ...); the station's numbers become SI scene constants in ``scene.constants`` and gridded
weather rasters become SI quantities as they are read (``catalog.inputs``); nothing past those
two boundaries sees a recipe unit.
"""

from __future__ import annotations

import copy
import csv
import datetime as dt
import re
import tomllib
from pathlib import Path
from typing import Annotated, Any, Literal

from pydantic import (
    AfterValidator,
    BaseModel,
    ConfigDict,
    Field,
    ValidationError,
    field_validator,
    model_serializer,
    model_validator,
)

from .errors import RecipeError
from .methods import METHODS, get_method
from .methods.anchors import AnchorSettings
from .methods.base import refuse_bools
from .methods.edges import EdgeSettings
from .methods.ensemble import UncertaintySettings

Percent = Annotated[float, Field(ge=0.0, le=100.0)]


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)

    @model_validator(mode="before")
    @classmethod
    def _no_bools_for_numbers(cls, data: Any) -> Any:
        return refuse_bools(cls, data)


def _identifier(value: str) -> str:
    """An id that names a folder inside OUT: not ``.`` or ``..``, no separators."""
    if set(value) == {"."}:
        raise ValueError(f"{value!r} would name a folder outside the output; use letters or digits")
    return value


#: Scene, season and comparison ids: letters, digits, ``_ . -``, not only dots.
Identifier = Annotated[
    str,
    Field(pattern=r"^[A-Za-z0-9_.-]+$", min_length=1, max_length=120),
    AfterValidator(_identifier),
]


class RunSettings(_Strict):
    """``[run]``: where outputs go and how the work is chunked."""

    out: str = "out"
    # 512: as fast as 1024 on 2 cores and 440 MB instead of 1.2 GB peak at 4096 x 4096 (bench)
    chunk_size: int = Field(512, ge=64, le=16384)
    tile_size: int = Field(256, ge=16, le=16384)
    class_table: str = "builtin"
    write_components: bool = False
    quicklook: bool = True
    cog: bool = False  # rasters as Cloud Optimized GeoTIFFs (overviews), same names
    stac: bool = True  # a STAC Item per scene: <scene id>.stac.json (about 15 ms)
    zarr: bool = False  # also a Zarr store per scene: outputs.zarr
    compression: Literal["zstd", "deflate", "lzw", "none"] = "zstd"  # GeoTIFF codec (level 1)


class InputSpec(_Strict):
    """One input raster with optional overrides of its own metadata."""

    path: str
    scale: float | None = None  # overrides the file's scale factor
    offset: float | None = None  # overrides the file's offset
    nodata: float | None = None  # overrides the file's nodata value
    units: str | None = None  # albedo: "fraction" | "percent"; surface_temperature: "K" | "C"
    resampling: Literal["nearest", "bilinear", "cubic", "average"] | None = None
    remap: str | None = None  # land cover only: CSV or TOML table of your codes -> class codes
    band: int | None = Field(None, ge=1)  # the band to read of a multi-band file


class MaskSpec(_Strict):
    """A cloud or QA mask raster: pixels with a listed value or bit set are dropped."""

    path: str
    drop_values: list[int] = []
    drop_bits: list[Annotated[int, Field(ge=0, le=31)]] = []

    @model_validator(mode="after")
    def _something_to_drop(self) -> MaskSpec:
        if not self.drop_values and not self.drop_bits:
            raise ValueError("give drop_values and/or drop_bits: which mask values to drop")
        return self


UNITS = {"albedo": ("fraction", "percent"), "surface_temperature": ("K", "C")}


class SceneInputs(_Strict):
    """``[scene.inputs]``: raster paths (relative to the recipe file) or tables with overrides."""

    albedo: str | InputSpec | None = None  # or derived from [scene.product]
    surface_temperature: str | InputSpec | None = None  # or from [scene.product]
    land_cover: str | InputSpec | None = None  # or recognised from NDVI and albedo
    ndvi: str | InputSpec | None = None
    elevation: str | InputSpec | None = None
    cloud_mask: MaskSpec | None = None

    @model_validator(mode="after")
    def _units(self) -> SceneInputs:
        for role in ("albedo", "surface_temperature", "land_cover", "ndvi", "elevation"):
            spec = getattr(self, role)
            if isinstance(spec, InputSpec) and spec.remap is not None and role != "land_cover":
                raise ValueError(f"{role}.remap: only land_cover takes a remap table")
            if isinstance(spec, InputSpec) and spec.units is not None:
                allowed = UNITS.get(role)
                if allowed is None or spec.units not in allowed:
                    raise ValueError(
                        f"{role}.units = {spec.units!r} is not understood; "
                        + (
                            f"use one of {list(allowed)}"
                            if allowed
                            else "this input has no units option"
                        )
                    )
        return self

    def spec(self, role: str) -> InputSpec | None:
        """The input as an InputSpec (a plain path becomes one without overrides)."""
        value = getattr(self, role)
        if value is None or isinstance(value, InputSpec):
            return value
        return InputSpec(path=value)


#: Overpass weather keys that may also be given as a raster path (gridded weather).
GRIDDED_WEATHER = (
    "air_temperature_c",
    "relative_humidity_pct",
    "wind_speed_m_s",
    "shortwave_in_w_m2",
)


class OverpassWeather(_Strict):
    """``[scene.overpass]``: weather at the acquisition time: station numbers, or raster paths
    (in the key's units) for the keys of ``GRIDDED_WEATHER``."""

    station_elevation_m: float = Field(ge=-500.0, le=9000.0)
    air_temperature_c: Annotated[float, Field(ge=-60.0, le=60.0)] | str
    relative_humidity_pct: Percent | str | None = None
    wind_speed_m_s: Annotated[float, Field(gt=0.0, le=60.0)] | str | None = None
    wind_height_m: float = Field(2.0, gt=0.5, le=100.0)
    shortwave_in_w_m2: Annotated[float, Field(gt=0.0, le=1400.0)] | str | None = None

    def gridded(self) -> dict[str, str]:
        """The keys given as raster paths, with their paths."""
        return {k: getattr(self, k) for k in GRIDDED_WEATHER if isinstance(getattr(self, k), str)}


class DailyWeather(_Strict):
    """``[scene.daily]``: daily weather for the FAO-56 daily net radiation."""

    tmax_c: float = Field(ge=-60.0, le=60.0)
    tmin_c: float = Field(ge=-60.0, le=60.0)
    vapour_pressure_kpa: float | None = Field(None, gt=0.0, le=10.0)
    rh_max_pct: Percent | None = None
    rh_min_pct: Percent | None = None
    shortwave_mj_m2: float | None = Field(None, gt=0.0, le=50.0)
    sunshine_hours: float | None = Field(None, ge=0.0, le=24.0)
    wind_speed_m_s: float | None = Field(None, gt=0.0, le=60.0)
    wind_height_m: float = Field(2.0, gt=0.5, le=100.0)

    @model_validator(mode="after")
    def _complete(self) -> DailyWeather:
        if self.tmin_c > self.tmax_c:
            raise ValueError(f"tmin_c ({self.tmin_c}) is above tmax_c ({self.tmax_c})")
        if self.vapour_pressure_kpa is None and (
            self.rh_max_pct is None or self.rh_min_pct is None
        ):
            raise ValueError("give vapour_pressure_kpa, or both rh_max_pct and rh_min_pct")
        if self.shortwave_mj_m2 is None and self.sunshine_hours is None:
            raise ValueError("give shortwave_mj_m2 (measured daily Rs) or sunshine_hours")
        return self


class RadiationOptions(_Strict):
    """``[scene.radiation]``: choices in the radiation and ground-heat steps."""

    longwave_in: Literal["auto", "bastiaanssen", "brutsaert"] = "auto"
    emissivity: Literal["class", "ndvi"] = "class"
    ground_heat: Literal["auto", "class"] = "auto"
    min_sun_elevation_deg: float = Field(10.0, ge=0.0, le=60.0)


class ReferenceEtSettings(_Strict):
    """``[scene.reference_et]``: FAO-56 / ASCE-EWRI standardized reference ET at the station."""

    surface: Literal["short", "tall"] = "tall"
    # the cold anchor's LE as a multiple of the hourly reference ET: "auto" = 1.05 where the
    # overpass weather gives the reference ET (common practice for the tall reference), else
    # anchors.cold_evaporative_fraction; "off" = always anchors.cold_evaporative_fraction
    cold_anchor_fraction: Annotated[float, Field(gt=0.0, le=1.5)] | Literal["auto", "off"] = "auto"
    # gridded reference ET of the recipe's surface, over the station's per pixel: the overpass
    # hour's [mm h-1] (the reference-ET fraction's divisor) and the day's [mm d-1]
    hourly_raster: str | None = None
    daily_raster: str | None = None


class ResidualSettings(_Strict):
    """``[scene.residual]``: limits on the energy-balance residual."""

    max_evaporative_fraction: float = Field(1.0, ge=1.0, le=1.3)


class BandCalibration(_Strict):
    """``[scene.product.calibration.<band>]``: a Level-1 band's calibration facts, stated here
    when the metadata lack them, or over the metadata's."""

    radiance_scale: float | None = Field(None, gt=0.0)  # L = scale x DN + offset
    radiance_offset: float | None = None
    lmin: float | None = None  # or the old layout's limits
    lmax: float | None = None
    qcalmin: float | None = None
    qcalmax: float | None = None
    solar_irradiance: float | None = Field(None, gt=0.0)  # ESUN [W m-2 um-1]
    k1: float | None = Field(None, gt=0.0)  # thermal constants [W m-2 sr-1 um-1], [K]
    k2: float | None = Field(None, gt=0.0)


class ThermalAtmosphere(_Strict):
    """``[scene.product.atmosphere]``: the thermal band's path terms; each derived from the
    overpass weather (water vapour from humidity) unless given."""

    transmittance: float | None = Field(None, gt=0.0, le=1.0)
    upwelling_radiance: float | None = Field(None, ge=0.0, le=10.0)  # [W m-2 sr-1 um-1]
    downwelling_radiance: float | None = Field(None, ge=0.0, le=10.0)
    profile: Literal["tropical", "midlatitude_summer", "midlatitude_winter"] = "midlatitude_summer"
    precipitable_water_mm: float | None = Field(None, gt=0.0, le=100.0)  # else from humidity
    clearness: float = Field(1.0, ge=0.5, le=1.0)  # 1 clean air, 0.5 very turbid (Kt)


class ProductSettings(_Strict):
    """``[scene.product]``: a Landsat product as delivered, instead of ready albedo,
    surface-temperature and NDVI rasters (any of those given in [scene.inputs] wins).

    ``landsat_level2``: Collection 2 surface reflectance and temperature. ``landsat_level1``:
    digital numbers of any generation, corrected here (at-surface reflectance, single-channel
    surface temperature)."""

    kind: Literal["landsat_level2", "landsat_level1"] = "landsat_level2"
    metadata: str | None = None  # the product's MTL (.txt, .json or .xml); bands found beside it
    stac_item: str | None = None  # a STAC Item JSON whose assets are the bands (common names)
    sensor: Literal["TM", "ETM", "OLI_TIRS"] | None = None  # needed without metadata
    # band files by common name (blue, red, nir, swir1, swir2, thermal, pixel_qa), over the
    # metadata's file names
    bands: dict[str, str] = {}
    reflectance_scale: float | None = None  # over the metadata's (or the product default)
    reflectance_offset: float | None = None
    temperature_scale: float | None = None
    temperature_offset: float | None = None
    mask_clouds: bool = True  # drop fill, dilated cloud, cirrus, cloud and shadow (pixel QA bits)
    # Level-1 facts, stated here or over the metadata's
    sun_elevation_deg: float | None = Field(None, gt=0.0, le=90.0)
    sun_azimuth_deg: float | None = Field(None, ge=0.0, le=360.0)
    earth_sun_distance_au: float | None = Field(None, ge=0.98, le=1.02)
    thermal_gain: Literal["low", "high"] = "low"  # ETM+ band 6: low gain does not saturate
    calibration: dict[str, BandCalibration] = {}
    atmosphere: ThermalAtmosphere = ThermalAtmosphere()

    @model_validator(mode="after")
    def _findable(self) -> ProductSettings:
        if self.metadata is None and self.stac_item is None and self.sensor is None:
            raise ValueError(
                "give metadata (the product's MTL file), stac_item, or sensor and bands"
            )
        if self.metadata is not None and self.stac_item is not None:
            raise ValueError("give metadata or stac_item, not both")
        unknown = sorted(set(self.bands) - set(PRODUCT_BANDS))
        if unknown:
            raise ValueError(f"bands: {unknown} are not band names; use {list(PRODUCT_BANDS)}")
        unknown = sorted(set(self.calibration) - set(PRODUCT_BANDS[:-1]))
        if unknown:
            raise ValueError(
                f"calibration: {unknown} are not band names; use {list(PRODUCT_BANDS[:-1])}"
            )
        if self.kind == "landsat_level1" and self.stac_item is not None:
            raise ValueError("a Level-1 product is read from its metadata or bands, not stac_item")
        return self


#: Common names of the product bands a scene can use.
PRODUCT_BANDS = ("blue", "red", "nir", "swir1", "swir2", "thermal", "pixel_qa")


class GridSettings(_Strict):
    """``[scene.grid]``: an explicit target grid instead of the albedo raster's."""

    crs: str
    resolution: float = Field(gt=0.0)
    bounds: tuple[float, float, float, float] | None = None  # left, bottom, right, top in crs
    lonlat_bounds: tuple[float, float, float, float] | None = None  # west, south, east, north

    @model_validator(mode="after")
    def _one_extent(self) -> GridSettings:
        if (self.bounds is None) == (self.lonlat_bounds is None):
            raise ValueError("give exactly one of bounds (in the grid's CRS) or lonlat_bounds")
        left, bottom, right, top = self.bounds or self.lonlat_bounds
        if not (left < right and bottom < top):
            raise ValueError(
                "bounds must be [left, bottom, right, top] with left < right, bottom < top"
            )
        return self


def _get(model: BaseModel, dotted: str) -> Any:
    """The value of a dotted key ("overpass.wind_speed_m_s") of a model."""
    for part in dotted.split("."):
        model = getattr(model, part)
    return model


class Scene(_Strict):
    """One ``[[scene]]``: a satellite acquisition with its inputs and weather."""

    id: Identifier
    acquired_utc: dt.datetime | None = None  # or from the product's metadata or sun angles
    acquired_from: str | None = None  # where acquired_utc came from, when not given
    acquired_date: dt.date | None = None  # the UTC date, when only the sun angles give the time
    inputs: SceneInputs
    overpass: OverpassWeather
    daily: DailyWeather
    daily_table: str | None = None  # CSV the daily weather was read from (row of the date)
    product: ProductSettings | None = None
    grid: GridSettings | None = None
    sensible_heat: str = "anchors"  # a registered method (methods.METHODS)
    daily_scaling: Literal["evaporative_fraction", "reference_et_fraction"] = "evaporative_fraction"
    reference_et: ReferenceEtSettings = ReferenceEtSettings()
    radiation: RadiationOptions = RadiationOptions()
    anchors: AnchorSettings = AnchorSettings()
    edges: EdgeSettings = EdgeSettings()
    residual: ResidualSettings = ResidualSettings()
    uncertainty: UncertaintySettings = UncertaintySettings()
    # settings tables of registered methods that are not fields above, by table name
    method_tables: dict[str, dict[str, Any]] = {}

    @model_validator(mode="before")
    @classmethod
    def _tables_of_added_methods(cls, data: Any) -> Any:
        """A registered method's ``[scene.<key>]`` table (not a field above) is kept apart."""
        if not isinstance(data, dict):
            return data
        keys = {
            m.settings_key
            for m in METHODS.values()
            if m.settings_key and m.settings_key not in cls.model_fields
        }
        tables = {k: data[k] for k in keys if k in data}
        if not tables:
            return data
        return {k: v for k, v in data.items() if k not in tables} | {"method_tables": tables}

    @model_serializer(mode="wrap")
    def _without_empty_tables(self, handler):
        dumped = handler(self)
        # left out when unused: manifests (and fingerprints) as before
        for key in ("method_tables", "product", "acquired_from", "acquired_date"):
            if not dumped.get(key):
                dumped.pop(key, None)
        return dumped

    def method_settings(self, key: str, model: type[BaseModel]) -> BaseModel:
        """The settings table ``[scene.<key>]`` of a method as its model (defaults filled)."""
        if key in type(self).model_fields:
            return getattr(self, key)
        return model.model_validate(self.method_tables.get(key, {}))

    @model_validator(mode="after")
    def _what_the_choices_need(self) -> Scene:
        """Rules between keys, checked before any pixel is read (run and inspect alike)."""
        method = get_method(self.sensible_heat)
        if self.acquired_utc is None:
            raise ValueError(
                "acquired_utc is missing; give it (e.g. 2026-06-14T17:52:00Z), or a "
                "[scene.product] whose metadata or sun angles state it"
            )
        for role in ("albedo", "surface_temperature"):
            if getattr(self.inputs, role) is None and self.product is None:
                raise ValueError(f"inputs.{role} is missing; give it, or a [scene.product]")
        if self.inputs.land_cover is None and self.inputs.ndvi is None and self.product is None:
            raise ValueError(
                "inputs.land_cover is missing; give it, or inputs.ndvi (surfaces are then "
                "recognised from NDVI and albedo), or a [scene.product]"
            )
        for table, values in self.method_tables.items():
            owner = next(m for m in METHODS.values() if m.settings_key == table)
            owner.settings_model.model_validate(values)  # errors name the table's keys
        for key, why in method.needs:
            if _get(self, key) is None:
                raise ValueError(f"sensible_heat = '{method.name}' needs {key} ({why})")
        for choice, keys in self._weather_needs():
            missing = [k for k in keys if _get(self, k) is None]
            if missing:
                raise ValueError(f"{choice} needs {', '.join(missing)}; add it or choose otherwise")
        if self.uncertainty.members and not method.ensemble:
            with_ensemble = sorted(n for n, m in METHODS.items() if m.ensemble)
            raise ValueError(
                f"uncertainty.members is implemented for sensible_heat = {with_ensemble} only; "
                "remove [scene.uncertainty] or change the method"
            )
        return self

    def _weather_needs(self) -> list[tuple[str, tuple[str, ...]]]:
        """Choices of the scene and the weather keys each needs."""
        hourly = ("overpass.relative_humidity_pct", "overpass.wind_speed_m_s")
        out = []
        if self.radiation.longwave_in == "brutsaert":
            out.append(("radiation.longwave_in = 'brutsaert'", hourly[:1]))
        if self.daily_scaling == "reference_et_fraction":  # hourly and daily reference ET
            out.append(
                ("daily_scaling = 'reference_et_fraction'", (*hourly, "daily.wind_speed_m_s"))
            )
        if self.anchors.hot_soil is not None:  # hourly grass reference ET
            out.append(("anchors.hot_soil", hourly))
        if isinstance(self.reference_et.cold_anchor_fraction, float):  # hourly reference ET
            out.append(("reference_et.cold_anchor_fraction", hourly))
        return out

    @field_validator("acquired_utc")
    @classmethod
    def _utc(cls, value: dt.datetime | None) -> dt.datetime | None:
        if value is None:
            return None
        if value.tzinfo is None:
            raise ValueError(
                "acquisition time needs a time zone; write it in UTC, e.g. 2026-06-14T17:52:00Z"
            )
        try:
            return value.astimezone(dt.UTC)
        except OverflowError:
            raise ValueError(f"{value.isoformat()} is out of the calendar's range") from None


class SeasonSettings(_Strict):
    """``[[season]]``: a season total from some of the recipe's scenes."""

    id: Identifier
    start: dt.date
    end: dt.date
    scenes: list[str] = Field(min_length=1)
    weather: str | None = None  # CSV daily weather table, relative to the recipe
    # or daily reference ET rasters [mm d-1]: one per day, a path with {date} (YYYYMMDD), one
    # multi-band file whose band descriptions are the dates (YYYY-MM-DD), or a NetCDF file or
    # Zarr store with a time axis
    reference_et_rasters: str | None = None
    # in a NetCDF file or Zarr store: the variable (else the one variable with a time axis)
    reference_et_variable: str | None = None
    fraction: str = "reference_et_fraction"  # the scene raster interpolated between scenes
    reference: Literal["short", "tall"] = "tall"
    station_elevation_m: float | None = None

    @field_validator("fraction")
    @classmethod
    def _a_fraction_of_reference_et(cls, value: str) -> str:
        if value != "reference_et_fraction":
            raise ValueError(
                f"{value!r} cannot be carried between scenes: a season multiplies the fraction "
                "by each day's reference ET, so it must be a fraction of reference ET "
                "(evaporative fraction is a share of available energy, and gave totals about 30 % "
                "off); use 'reference_et_fraction'"
            )
        return value

    @model_validator(mode="after")
    def _ordered(self) -> SeasonSettings:
        if (self.weather is None) == (self.reference_et_rasters is None):
            raise ValueError(
                "give weather (a daily table) or reference_et_rasters (one raster per day), "
                "one of them"
            )
        if self.end < self.start:
            raise ValueError(f"end ({self.end}) is before start ({self.start})")
        return self


class ZoneSettings(_Strict):
    """``[zones]``: polygons (GeoJSON) for per-zone ET depth and volume."""

    path: str
    id_property: str = "zone_id"
    # on request: ET of flagged cells (water, snow, built-up) as this multiple of the run's
    # reference ET, in columns of its own (FAO-56 Table 12, shallow open water: Kc 1.05 of the
    # grass reference, about 0.85 of the tall one; from memory, common practice)
    flagged_substitute: float | None = Field(None, gt=0.0, le=1.5)


class Recipe(_Strict):
    """A whole recipe: run settings and scenes (defaults already merged into each scene)."""

    run: RunSettings = RunSettings()
    scene: list[Scene] = Field(min_length=1)
    season: list[SeasonSettings] = []
    zones: ZoneSettings | None = None
    path: Path | None = None

    @model_validator(mode="after")
    def _seasons_name_scenes_of_the_recipe(self) -> Recipe:
        ids = {s.id for s in self.scene}
        for season in self.season:
            unknown = [i for i in season.scenes if i not in ids]
            if unknown:
                raise ValueError(f"season {season.id}: scene id(s) {unknown} are not in the recipe")
        return self


class ComparisonZones(_Strict):
    """``[compare.zones]``: polygons (GeoJSON) for per-zone comparison tables."""

    path: str
    id_property: str = "zone_id"


class CompareSettings(_Strict):
    """``[compare]``: where comparison outputs go and how they are chunked and tiled."""

    out: str = "compare"
    chunk_size: int = Field(512, ge=64, le=16384)
    tile_size: int = Field(256, ge=16, le=16384)
    zones: ComparisonZones | None = None


class Comparison(_Strict):
    """One ``[[comparison]]``: a raster against a previous one and/or a baseline stack."""

    id: Identifier
    current: str
    previous: str | None = None
    baseline: list[str] = []

    @model_validator(mode="after")
    def _something_to_compare(self) -> Comparison:
        if self.previous is None and len(self.baseline) < 2:
            raise ValueError(
                "give previous (for a difference) and/or at least two baseline rasters "
                "(for a standardized anomaly)"
            )
        return self


class CompareRecipe(_Strict):
    """A comparison recipe: ``[compare]`` settings and one or more ``[[comparison]]``."""

    compare: CompareSettings = CompareSettings()
    comparison: list[Comparison] = Field(min_length=1)
    path: Path | None = None


def _read_toml(path: Path) -> dict[str, Any]:
    if not path.is_file():
        raise RecipeError(f"recipe {path} does not exist; give the path of a .toml recipe file.")
    try:
        return tomllib.loads(path.read_text("utf-8"))
    except tomllib.TOMLDecodeError as err:
        raise RecipeError(f"recipe {path} is not valid TOML: {err}.") from None
    except UnicodeDecodeError:
        raise RecipeError(f"recipe {path} is not a UTF-8 text file.") from None


def load_compare_recipe(path: str | Path) -> CompareRecipe:
    """Read and validate a comparison recipe (TOML); paths stay relative to the file."""
    path = Path(path)
    data = _read_toml(path)
    if "scene" in data:
        raise RecipeError(
            f"recipe {path} holds [[scene]] tables: that is a run recipe; give it to "
            "'rasterbudget run', and to 'rasterbudget compare' a recipe of [[comparison]] tables."
        )
    try:
        recipe = CompareRecipe(**data, path=path.resolve())
    except ValidationError as err:
        raise RecipeError(_format_errors(err, str(path), [])) from None
    ids = [c.id for c in recipe.comparison]
    repeated = sorted({i for i in ids if ids.count(i) > 1})
    if repeated:
        raise RecipeError(f"recipe {path}: comparison id(s) {repeated} used twice.")
    return recipe


def _deep_merge(base: dict, override: dict) -> dict:
    merged = copy.deepcopy(base)
    for key, value in override.items():
        if isinstance(value, dict) and isinstance(merged.get(key), dict):
            merged[key] = _deep_merge(merged[key], value)
        else:
            merged[key] = copy.deepcopy(value)
    return merged


#: Names pydantic gives the branches of a union (e.g. "number or raster path"): not recipe keys.
_UNION_BRANCHES = {
    "str",
    "float",
    "int",
    "constrained-float",
    "InputSpec",
    "MaskSpec",
    "tuple[float, float, float, float]",
}


def _clean_errors(err: ValidationError) -> list[dict]:
    """Errors with union-branch names dropped from their paths, one per key (the most telling)."""
    cleaned: dict[tuple, dict] = {}
    for e in err.errors():
        loc = tuple(p for p in e["loc"] if p not in _UNION_BRANCHES)
        previous = cleaned.get(loc)
        # for "number or path" keys prefer the number's complaint over "not a string"
        if previous is None or previous["type"] in ("string_type", "model_type", "dict_type"):
            cleaned[loc] = {**e, "loc": loc}
    # "not a string" for a key whose table form has its own, deeper complaint is noise
    return [
        e
        for loc, e in cleaned.items()
        if not (
            e["type"] == "string_type"
            and any(other[: len(loc)] == loc and other != loc for other in cleaned)
        )
    ]


def _format_errors(err: ValidationError, source: str, scene_ids: list[str]) -> str:
    parts = []
    errors = _clean_errors(err)
    for e in errors[:5]:
        loc = list(e["loc"])
        if len(loc) >= 2 and loc[0] == "scene" and isinstance(loc[1], int):
            label = scene_ids[loc[1]] if loc[1] < len(scene_ids) else str(loc[1])
            loc = [f"scene[{loc[1]}] ({label})", *loc[2:]]
        key = ".".join(str(p) for p in loc) or "(top level)"
        message = e["msg"]
        if e["type"] == "extra_forbidden":
            message = "unknown key; check its spelling against the README's recipe reference"
        elif e["type"] == "missing":
            message = "required key is missing"
        value = e.get("input")
        shown = (
            ""
            if e["type"] in ("missing", "extra_forbidden") or isinstance(value, dict)
            else (f" (got {value!r})")
        )
        parts.append(f"{key}: {message}{shown}")
    more = len(errors) - 5
    tail = f"; and {more} more" if more > 0 else ""
    return f"recipe {source}: " + "; ".join(parts) + tail


#: ``{name}`` placeholders that input paths and ``daily_table`` may hold, filled per scene.
PLACEHOLDERS = {
    "date": lambda when, sid: when.strftime("%Y%m%d"),
    "year": lambda when, sid: f"{when.year:04d}",
    "doy": lambda when, sid: f"{when.timetuple().tm_yday:03d}",
    "id": lambda when, sid: sid,
}
_PLACEHOLDER = re.compile(r"\{([^{}]*)\}")


def _acquired(scene: dict) -> dt.datetime | None:
    value = scene.get("acquired_utc")
    if isinstance(value, str):
        try:
            value = dt.datetime.fromisoformat(value)
        except ValueError:
            return None  # the model reports the bad time
    if not isinstance(value, dt.datetime) or value.tzinfo is None:
        return None
    try:
        return value.astimezone(dt.UTC)
    except OverflowError:
        return None  # the model reports it


def _fill(text: str, key: str, scene: dict, source: str) -> str:
    """``text`` with its placeholders filled from the scene's acquisition time and id."""
    if "{" not in text:
        return text
    when, sid = _acquired(scene), str(scene.get("id", ""))

    def one(match: re.Match) -> str:
        name = match.group(1)
        if name not in PLACEHOLDERS:
            raise RecipeError(
                f"recipe {source}: scene {sid or '?'}, {key} = {text!r}: unknown placeholder "
                f"{{{name}}}; use {', '.join('{' + p + '}' for p in PLACEHOLDERS)}."
            )
        if when is None and name != "id":
            raise RecipeError(
                f"recipe {source}: scene {sid or '?'}, {key} uses {{{name}}} but the scene has "
                "no valid acquired_utc (e.g. 2026-06-14T17:52:00Z)."
            )
        return PLACEHOLDERS[name](when, sid)

    return _PLACEHOLDER.sub(one, text)


def _acquired_from_product(scene: dict, source: str, base: Path) -> dict:
    """A scene without ``acquired_utc`` takes its product's: the metadata's scene-centre time,
    else the instant NREL SPA puts the sun at the stated elevation and azimuth over the first
    band's centre on ``acquired_date`` (the metadata's date). ``acquired_from`` says which."""
    product = scene.get("product")
    if scene.get("acquired_utc") is not None or not isinstance(product, dict):
        return scene
    sid = scene.get("id", "?")
    where = f"recipe {source}: scene {sid}"
    metadata = None
    text = product.get("metadata")
    if isinstance(text, str) and "{" not in text:
        from .io.landsat_metadata import read_landsat_metadata

        path = Path(text).expanduser()
        path = path if path.is_absolute() else (base / path).resolve()
        try:
            metadata = read_landsat_metadata(path)
        except (OSError, ValueError) as err:
            raise RecipeError(f"{where}: product.metadata {path}: {err}") from None
        if metadata.acquisition_time is not None:
            time_source = metadata.source_of("acquisition_time").describe()
            return scene | {
                "acquired_utc": metadata.acquisition_time,
                "acquired_from": f"product metadata {time_source}",
            }
    elevation = product.get("sun_elevation_deg", getattr(metadata, "sun_elevation", None))
    azimuth = product.get("sun_azimuth_deg", getattr(metadata, "sun_azimuth", None))
    day = scene.get("acquired_date", getattr(metadata, "acquisition_date", None))
    if isinstance(day, str):
        try:
            day = dt.date.fromisoformat(day)
        except ValueError:
            return scene  # the model reports the bad date
    bands = product.get("bands")
    band = next(iter(bands.values()), None) if isinstance(bands, dict) else None
    if metadata is not None and band is None:
        first = next((b for b in metadata.bands.values() if b.file_name), None)
        band = None if first is None else str(Path(metadata.path).parent / first.file_name)
    angles_ok = all(
        isinstance(v, int | float) and not isinstance(v, bool) and 0.0 <= v <= 360.0
        for v in (elevation, azimuth)
    )
    if (
        not angles_ok
        or not isinstance(day, dt.date)
        or isinstance(day, dt.datetime)
        or not 1900 <= day.year <= 2200
        or not isinstance(band, str)
    ):
        return scene  # the model asks for acquired_utc, or reports the bad value
    from .io.paths import is_remote

    path = Path(band).expanduser()
    if not is_remote(band):
        path = path if path.is_absolute() else (base / path).resolve()
    latitude, longitude = _raster_centre_lonlat(band if is_remote(band) else path, where)
    from .physics.solar import time_from_sun_angles

    instant, mismatch = time_from_sun_angles(
        day, latitude, longitude, float(elevation), float(azimuth)
    )
    return scene | {
        "acquired_utc": instant,
        "acquired_from": (
            f"solved from the sun elevation {elevation} and azimuth {azimuth} deg on {day} at "
            f"{latitude:.4f} N, {longitude:.4f} E (centre of {path.name}) by NREL SPA; the "
            f"solved sun is {mismatch:.2f} deg from the stated one"
        ),
    }


def _tables_from(base: Path, scene: dict) -> dict:
    """Table paths of a scene made absolute (relative to the recipe's folder), so that the
    steps that read them need not know the recipe."""
    anchors = scene.get("anchors")
    hot_soil = anchors.get("hot_soil") if isinstance(anchors, dict) else None
    if isinstance(hot_soil, dict) and isinstance(hot_soil.get("table"), str):
        path = Path(hot_soil["table"]).expanduser()
        hot_soil["table"] = str(path if path.is_absolute() else (base / path).resolve())
    return scene


def _raster_centre_lonlat(path: Path | str, where: str) -> tuple[float, float]:
    """Latitude and longitude of a raster's centre [degrees]."""
    import rasterio
    from rasterio.warp import transform as transform_points

    try:
        with rasterio.open(path) as src:
            if src.crs is None:
                raise RecipeError(f"{where}: {path} has no CRS; assign one to the band files.")
            x, y = src.xy(src.height / 2.0 - 0.5, src.width / 2.0 - 0.5)
            lon, lat = transform_points(src.crs, "EPSG:4326", [x], [y])
    except rasterio.errors.RasterioIOError as err:
        raise RecipeError(f"{where}: {path} cannot be read ({err}).") from None
    return float(lat[0]), float(lon[0])


def _with_placeholders(scene: dict, source: str) -> dict:
    """Fill placeholders in a merged scene's input paths, gridded weather paths and daily table."""
    scene = copy.deepcopy(scene)
    inputs = scene.get("inputs")
    if isinstance(inputs, dict):
        for role, value in inputs.items():
            if isinstance(value, str):
                inputs[role] = _fill(value, f"inputs.{role}", scene, source)
            elif isinstance(value, dict):
                for sub in ("path", "remap"):
                    if isinstance(value.get(sub), str):
                        value[sub] = _fill(value[sub], f"inputs.{role}.{sub}", scene, source)
    overpass = scene.get("overpass")
    if isinstance(overpass, dict):
        for k in GRIDDED_WEATHER:
            if isinstance(overpass.get(k), str):
                overpass[k] = _fill(overpass[k], f"overpass.{k}", scene, source)
    product = scene.get("product")
    if isinstance(product, dict):
        for key in ("metadata", "stac_item"):
            if isinstance(product.get(key), str):
                product[key] = _fill(product[key], f"product.{key}", scene, source)
        bands = product.get("bands")
        for name, value in (bands if isinstance(bands, dict) else {}).items():
            if isinstance(value, str):
                product["bands"][name] = _fill(value, f"product.bands.{name}", scene, source)
    if isinstance(scene.get("daily_table"), str):
        scene["daily_table"] = _fill(scene["daily_table"], "daily_table", scene, source)
    anchors = scene.get("anchors")
    hot_soil = anchors.get("hot_soil") if isinstance(anchors, dict) else None
    if isinstance(hot_soil, dict) and isinstance(hot_soil.get("table"), str):
        hot_soil["table"] = _fill(hot_soil["table"], "anchors.hot_soil.table", scene, source)
    return scene


_DAILY_COLUMNS = tuple(DailyWeather.model_fields)


def _daily_from_table(scene: dict, source: str, base: Path, cache: dict) -> dict:
    """Fill ``daily`` from the ``daily_table`` CSV row of the scene's (UTC) date.

    Keys given in the scene's own ``[scene.daily]`` win over the table's columns.
    """
    table = scene.get("daily_table")
    if not isinstance(table, str):
        return scene
    sid = scene.get("id", "?")
    path = Path(table).expanduser()
    path = path if path.is_absolute() else (base / path).resolve()
    if path not in cache:
        if not path.is_file():
            raise RecipeError(
                f"recipe {source}: scene {sid}, daily_table {path} does not exist; give a CSV "
                "with a 'date' column (YYYY-MM-DD) and the [scene.daily] keys as columns."
            )
        try:
            with path.open(newline="", encoding="utf-8") as f:
                cache[path] = {row.get("date", ""): row for row in csv.DictReader(f)}
        except (UnicodeDecodeError, csv.Error, OSError) as err:
            raise RecipeError(
                f"recipe {source}: scene {sid}, daily_table {path} cannot be read as a CSV "
                f"text file ({type(err).__name__}); give a UTF-8 CSV with a 'date' column."
            ) from None
    when = _acquired(scene)
    if when is None:
        return scene  # the model reports the missing or bad acquired_utc
    row = cache[path].get(when.date().isoformat())
    if row is None:
        raise RecipeError(
            f"recipe {source}: scene {sid}: daily_table {path} has no row for "
            f"{when.date().isoformat()} (the scene's UTC date); add it or give [scene.daily]."
        )
    values: dict[str, float] = {}
    for column in _DAILY_COLUMNS:
        text = (row.get(column) or "").strip()
        if not text:
            continue
        try:
            values[column] = float(text)
        except ValueError:
            raise RecipeError(
                f"recipe {source}: scene {sid}: daily_table {path}, {when.date()}, column "
                f"{column} = {text!r} is not a number."
            ) from None
    own = scene.get("daily")
    scene = dict(scene)
    scene["daily"] = _deep_merge(values, own) if isinstance(own, dict) else values
    return scene


def parse_recipe(
    data: dict[str, Any], source: str = "<recipe>", path: Path | None = None
) -> Recipe:
    """Validate a recipe dictionary, merging ``[defaults]`` into each scene."""
    data = dict(data)
    defaults = data.pop("defaults", {}) or {}
    if not isinstance(defaults, dict):
        raise RecipeError(f"recipe {source}: [defaults] must be a table.")
    scenes = data.get("scene")
    if scenes is None and "comparison" in data:
        raise RecipeError(
            f"recipe {source} holds [[comparison]] tables: that is a comparison recipe; give it "
            "to 'rasterbudget compare'."
        )
    if scenes is None:
        raise RecipeError(f"recipe {source}: no [[scene]] table; add at least one scene.")
    if not isinstance(scenes, list):
        raise RecipeError(f"recipe {source}: 'scene' must be an array of tables ([[scene]]).")
    base = path.parent if path is not None else Path.cwd()
    tables: dict[Path, dict] = {}
    data["scene"] = [
        _tables_from(
            base,
            _daily_from_table(
                _with_placeholders(
                    _acquired_from_product(_deep_merge(defaults, s), source, base), source
                ),
                source,
                base,
                tables,
            ),
        )
        if isinstance(s, dict)
        else s
        for s in scenes
    ]
    scene_ids = [str(s.get("id", "?")) if isinstance(s, dict) else "?" for s in data["scene"]]
    try:
        recipe = Recipe(**data, path=path)
    except ValidationError as err:
        raise RecipeError(_format_errors(err, source, scene_ids)) from None
    except TypeError as err:
        raise RecipeError(f"recipe {source}: {err}.") from None
    ids = [s.id for s in recipe.scene]
    repeated = sorted({i for i in ids if ids.count(i) > 1})
    if repeated:
        raise RecipeError(
            f"recipe {source}: scene id(s) {repeated} used twice; ids must be unique."
        )
    return recipe


def load_recipe(path: str | Path) -> Recipe:
    """Read a TOML recipe file and validate it."""
    path = Path(path)
    data = _read_toml(path)
    return parse_recipe(data, source=str(path), path=path.resolve())


def resolve_path(recipe: Recipe | CompareRecipe, value: str) -> Path:
    """Resolve a path from the recipe relative to the recipe file's folder."""
    p = Path(value).expanduser()
    if p.is_absolute() or recipe.path is None:
        return p
    return (recipe.path.parent / p).resolve()


def resolve_raster_path(recipe: Recipe, value: str) -> Path | str:
    """An input raster's location: a local path as :func:`resolve_path`, a remote one unchanged.

    URLs and GDAL virtual paths (``https://``, ``s3://``, ``/vsicurl/`` ...) are handed to GDAL as
    written; turning them into a ``Path`` would fold their ``//`` and break them.
    """
    from .io.paths import is_remote

    return value if is_remote(value) else resolve_path(recipe, value)
