"""One scene end to end: the two passes of DESIGN.md and the writing of every output.

Pass 1 reads the inputs once and reduces every block to the anchor histograms (small arrays).
The anchors and the dT calibration are then found on scalars. Pass 2 reads the inputs a second
time, computes every flux per block, and in ONE ``dask.compute`` writes all GeoTIFFs (one lock per
file, temporary names) and computes the tile and class summaries from the same blocks.
"""

from __future__ import annotations

import ctypes
import dataclasses
import datetime as dt
import hashlib
import itertools
import json
import math
import os
import platform
import threading
import time
from dataclasses import asdict, dataclass, field
from functools import partial, reduce
from pathlib import Path

import numpy as np

from .. import __version__
from ..catalog.classes import ClassTable
from ..catalog.qa import QA, QA_DESCRIPTIONS
from ..errors import InputValueError, OutputError, RasterBudgetError, SunBelowHorizonError
from ..io.grid import (
    GDAL_OPTIONS,
    WEATHER_ROLES,
    Grid,
    InputSource,
    check_input,
    grid_from_settings,
    input_source,
    read_window,
    target_grid,
)
from ..io.paths import is_remote, local_size
from ..io.writers import (
    COMPONENT_OUTPUTS,
    ENSEMBLE_OUTPUTS,
    FLUX_OUTPUTS,
    QA_OUTPUT,
    REFERENCE_OUTPUTS,
    AtomicRaster,
    block_size_for,
    remove_stale_partials,
    write_text_atomic,
)
from ..methods import anchors as anchor_method
from ..methods import edges as edge_method
from ..methods.ensemble import Member, ensemble_percentiles, sample_members
from ..physics import partition, radiation, turbulence
from ..physics.constants import SECONDS_PER_HOUR
from ..physics.solar import (
    daylight_hours,
    extraterrestrial_radiation_daily,
    local_hour_angle,
    local_solar_day_of_year,
    solar_ephemeris,
    sun_direction,
    surface_normal,
)
from ..recipe import Recipe, Scene, resolve_path, resolve_raster_path
from ..surface import (
    ClassLookups,
    SceneConstants,
    kelvin,
    land_cover_codes,
    perturbed_air,
    surface_block,
)
from .summaries import (
    HISTOGRAM_RANGES,
    class_histograms,
    class_rows,
    rows_to_csv,
    tile_layout,
    tile_rows,
    tile_statistics,
    tiles_geojson,
)

CAUTION = (
    "These are model estimates with real uncertainty: field-scale errors of tens of percent are "
    "common, and results depend on input quality, weather data and anchor choice. They do not "
    "replace local regulations, licensed hydrologic or engineering judgement, or ground "
    "measurements in water-rights, irrigation or drought decisions."
)

OPTIONAL_INPUTS = ("ndvi", "elevation")
REQUIRED_INPUTS = ("albedo", "surface_temperature", "land_cover")


@dataclass
class RunSettings:
    """Chunking and output choices for one run (CLI options override the recipe)."""

    out_dir: Path
    chunk_size: int
    tile_size: int
    write_components: bool = False
    quicklook: bool = True
    progress: bool = False
    cog: bool = False  # rasters as Cloud Optimized GeoTIFFs (same names)
    stac: bool = True  # <scene id>.stac.json
    zarr: bool = False  # outputs.zarr, filled by the same compute as the GeoTIFFs
    compression: str = "zstd"  # GeoTIFF codec, a key of outputs.COMPRESSION


@dataclass
class SceneResult:
    scene_id: str
    out_dir: Path
    outputs: dict[str, Path]
    manifest: dict = field(repr=False)


def effective_chunk_size(requested: int) -> int:
    """Chunk edge rounded up to a multiple of 16, so GeoTIFF blocks never straddle chunks."""
    return int(math.ceil(requested / 16) * 16)


# ----------------------------------------------------------------------------- scene scalars


def with_weather_at_centre(scene: Scene, grid: Grid, paths: dict) -> tuple[Scene, dict]:
    """The scene with each gridded weather key replaced by its raster's value at the centre.

    Scene-wide scalars (the sun check, station reference ET, ...) then work unchanged; pixels
    still read their own values from the rasters.
    """
    import rasterio

    if not scene.overpass.gridded():
        return scene, {}
    with rasterio.Env(**GDAL_OPTIONS):
        values = _weather_at_centre(scene, grid, paths)
    overpass = scene.overpass.model_copy(update=values)
    return scene.model_copy(update={"overpass": overpass}), values


def _weather_at_centre(scene: Scene, grid: Grid, paths: dict) -> dict[str, float]:
    """Each gridded overpass weather raster's value at the target grid's centre pixel."""
    row, col = grid.height // 2, grid.width // 2
    values = {}
    for key in scene.overpass.gridded():
        source = input_source(paths[key], key, grid)
        value = float(read_window(source, slice(row, row + 1), slice(col, col + 1))[0, 0])
        if not np.isfinite(value):
            raise InputValueError(
                f"overpass.{key} raster {paths[key]} has no value at the scene centre; the "
                "weather grid must cover the scene."
            )
        values[key] = value
    return values


def metric_pixel_size(grid: Grid, latitude_deg: float) -> tuple[float, float]:
    """Pixel width and height in metres, for slopes.

    On a geographic grid, degrees become metres at the scene centre's latitude (one value for the
    whole scene, so slopes do not depend on chunking; the width is off by the cos(latitude)
    change across the scene, about 1.5 % per degree of latitude near 40 degrees).
    """
    dx, dy = grid.pixel_size
    if grid.crs.is_geographic:
        metres_per_degree = 111_320.0  # mean length of one degree of latitude (common practice)
        return dx * metres_per_degree * math.cos(math.radians(latitude_deg)), (
            dy * metres_per_degree
        )
    return dx, dy


def scene_centre_lonlat(grid: Grid) -> tuple[float, float]:
    from pyproj import Transformer

    left, bottom, right, top = grid.bounds
    t = Transformer.from_crs(grid.crs, "EPSG:4326", always_xy=True)
    lon, lat = t.transform(0.5 * (left + right), 0.5 * (bottom + top))
    return float(lon), float(lat)


def scene_constants(scene: Scene, grid: Grid) -> tuple[SceneConstants, dict]:
    """Scene-wide scalars in SI units, and facts for the manifest. Refuses a sun below limits.

    The overpass geometry (declination, hour angle, Earth-Sun distance) comes from NREL SPA at
    the scene centre (``solar_ephemeris``); the daily terms (FAO-56) take the local solar date.
    """
    t = scene.acquired_utc
    utc_hour = t.hour + t.minute / 60 + t.second / 3600
    lon, lat = scene_centre_lonlat(grid)
    lat_rad = math.radians(lat)
    doy = local_solar_day_of_year(t, lon)
    sun = solar_ephemeris(t, lat, lon, scene.overpass.station_elevation_m)
    dr = sun.inverse_distance
    cos_z = math.cos(math.radians(sun.zenith))
    elevation_deg = 90.0 - sun.zenith
    limit = scene.radiation.min_sun_elevation_deg
    if elevation_deg < limit:
        where = "below the horizon" if elevation_deg <= 0 else f"only {elevation_deg:.1f}° high"
        raise SunBelowHorizonError(
            f"scene {scene.id}: at {t.isoformat()} the sun is {where} over the scene centre "
            f"({lat:.3f}° N, {lon:.3f}° E; elevation {elevation_deg:.1f}°, limit {limit}°); "
            "check acquired_utc is in UTC, or lower radiation.min_sun_elevation_deg."
        )
    ow, dw = scene.overpass, scene.daily
    ta = kelvin(ow.air_temperature_c)
    ea = None
    if ow.relative_humidity_pct is not None:
        ea = float(turbulence.vapour_pressure_from_relative_humidity(ta, ow.relative_humidity_pct))
    if scene.radiation.longwave_in == "brutsaert" and ea is None:
        raise RasterBudgetError(
            f"scene {scene.id}: radiation.longwave_in = 'brutsaert' needs "
            "overpass.relative_humidity_pct; give it or use 'bastiaanssen'."
        )
    longwave_in = scene.radiation.longwave_in
    if longwave_in == "auto":  # the sky's vapour when known (closer to towers, see README)
        longwave_in = "brutsaert" if ea is not None else "bastiaanssen"
    tau_station = None
    if ow.shortwave_in_w_m2 is not None:
        tau_station = ow.shortwave_in_w_m2 / (1367.0 * cos_z * dr)
        if not 0.2 <= tau_station <= 1.0:
            raise RasterBudgetError(
                f"scene {scene.id}: overpass.shortwave_in_w_m2 = {ow.shortwave_in_w_m2} implies a "
                f"transmissivity of {tau_station:.2f} (plausible 0.2-1.0) for a sun "
                f"{elevation_deg:.1f}° high; check the value and acquired_utc."
            )
    tmax, tmin = kelvin(dw.tmax_c), kelvin(dw.tmin_c)
    if dw.vapour_pressure_kpa is not None:
        ea_daily = dw.vapour_pressure_kpa
    else:
        ea_daily = float(
            turbulence.vapour_pressure_from_rh_extremes(tmin, tmax, dw.rh_max_pct, dw.rh_min_pct)
        )
    clearness = None
    if dw.shortwave_mj_m2 is not None:
        ra = float(extraterrestrial_radiation_daily(lat_rad, doy))
        rso = float(radiation.clear_sky_shortwave_daily(ra, ow.station_elevation_m))
        clearness = min(dw.shortwave_mj_m2 / rso, 1.0)
    constants = SceneConstants(
        day_of_year=doy,
        utc_hour=utc_hour,
        declination=sun.declination,
        greenwich_hour_angle=sun.greenwich_hour_angle,
        inverse_distance=dr,
        air_temperature=ta,
        station_elevation=ow.station_elevation_m,
        vapour_pressure=ea,
        station_transmissivity=tau_station,
        longwave_in_method=longwave_in,
        emissivity_method=scene.radiation.emissivity,
        ground_heat_method=scene.radiation.ground_heat,
        min_cos_incidence=math.sin(math.radians(limit)),
        tmax=tmax,
        tmin=tmin,
        vapour_pressure_daily=ea_daily,
        daily_clearness=clearness,
        sunshine_hours=dw.sunshine_hours,
        min_ndvi_cold=scene.anchors.cold_min_ndvi,
        max_ndvi_hot=scene.anchors.hot_max_ndvi,
        surface_lapse_rate=scene.anchors.surface_lapse_rate_k_per_km / 1000.0,
        anchor_elevation_range=scene.anchors.max_elevation_difference_m,
        daily_scaling=scene.daily_scaling,
        max_evaporative_fraction=scene.residual.max_evaporative_fraction,
        **station_reference_et(scene, lat_rad, lon, doy, utc_hour, cos_z, dr, ea, ea_daily),
    )
    facts = {
        "centre_lon": lon,
        "centre_lat": lat,
        "sun_elevation_deg_centre": elevation_deg,
        "sun_azimuth_deg_centre": sun.azimuth,
        "sun": {
            "algorithm": "NREL SPA (Reda & Andreas 2004) via pvlib, at the scene centre",
            "elevation_deg": elevation_deg,
            "azimuth_deg": sun.azimuth,
            "declination_deg": math.degrees(sun.declination),
            "equation_of_time_min": sun.equation_of_time,
            "earth_sun_distance_au": sun.inverse_distance**-0.5,
            "local_solar_day_of_year": doy,
        },
        "longwave_in": {
            "method": longwave_in,
            "asked": scene.radiation.longwave_in,
            "sky_emissivity": (
                "Brutsaert (1975), from overpass vapour pressure and air temperature"
                if longwave_in == "brutsaert"
                else "Bastiaanssen (1995), from shortwave transmissivity"
            ),
        },
    }
    return constants, facts


def station_reference_et(
    scene: Scene,
    lat_rad: float,
    lon: float,
    doy: int,
    utc_hour: float,
    cos_z: float,
    dr: float,
    ea: float | None,
    ea_daily: float,
) -> dict:
    """Hourly (overpass hour) and daily standardized reference ET at the station [mm].

    FAO-56 / ASCE-EWRI (2005) Penman-Monteith for the recipe's reference surface. Returns
    ``reference_et_hourly`` / ``reference_et_daily`` as None where the recipe lacks the weather
    they need, and refuses a recipe whose choices need them.
    """
    from ..physics import reference_et

    ow, dw, ref = scene.overpass, scene.daily, scene.reference_et
    hourly = daily = None
    ra_day = float(extraterrestrial_radiation_daily(lat_rad, doy))
    if dw.shortwave_mj_m2 is not None:
        rs_day = dw.shortwave_mj_m2
    else:
        n_max = daylight_hours(lat_rad, doy)
        rs_day = float(
            radiation.shortwave_daily_from_sunshine(
                ra_day, min(dw.sunshine_hours, float(n_max)), n_max
            )
        )
    # ASCE-EWRI (2005): with the sun below 0.3 rad at mid-hour, the hour's own Rs/Rso is not
    # trusted and the cloudiness of the last hour above it is carried. A scene has one hour, so
    # the day's Rs/Rso stands in for it.
    rso_day = float(radiation.clear_sky_shortwave_daily(ra_day, ow.station_elevation_m))
    low_sun_cloudiness = float(
        radiation.cloudiness_factor(
            radiation.relative_shortwave(rs_day, rso_day, radiation.MIN_CLEAR_SKY_SHORTWAVE_DAILY)
        )
    )
    missing_hourly = [
        k
        for k, v in (
            ("overpass.relative_humidity_pct", ow.relative_humidity_pct),
            ("overpass.wind_speed_m_s", ow.wind_speed_m_s),
        )
        if v is None
    ]
    if not missing_hourly:
        if ow.shortwave_in_w_m2 is not None:
            rs_hour = ow.shortwave_in_w_m2 * 0.0036  # W m-2 held for an hour -> MJ m-2 h-1
        else:  # clear-sky estimate at the station, as for the pixels (FAO-56 eq. 37 form)
            tau = float(radiation.clear_sky_transmissivity(ow.station_elevation_m))
            rs_hour = float(radiation.shortwave_in(cos_z, dr, tau)) * 0.0036
        hourly = float(
            reference_et.reference_et_hourly(
                kelvin(ow.air_temperature_c),
                float(turbulence.wind_speed_at_2m(ow.wind_speed_m_s, ow.wind_height_m)),
                rs_hour,
                lat_rad,
                lon,
                doy,
                utc_hour - 0.5,
                ow.station_elevation_m,
                vapour_pressure=ea,
                reference=ref.surface,
                low_sun_cloudiness=low_sun_cloudiness,
            )
        )
    missing_daily = [] if dw.wind_speed_m_s is not None else ["daily.wind_speed_m_s"]
    if not missing_daily:
        daily = float(
            reference_et.reference_et_daily(
                kelvin(dw.tmax_c),
                kelvin(dw.tmin_c),
                float(turbulence.wind_speed_at_2m(dw.wind_speed_m_s, dw.wind_height_m)),
                rs_day,
                lat_rad,
                doy,
                ow.station_elevation_m,
                vapour_pressure=ea_daily,
                reference=ref.surface,
            )
        )
    needs = []
    if scene.daily_scaling == "reference_et_fraction":
        needs += missing_hourly + missing_daily
    if ref.cold_anchor_fraction is not None:
        needs += missing_hourly
    if needs:
        raise RasterBudgetError(
            f"scene {scene.id}: reference ET is needed (daily_scaling = "
            f"'{scene.daily_scaling}', reference_et.cold_anchor_fraction = "
            f"{ref.cold_anchor_fraction}) but {', '.join(sorted(set(needs)))} "
            "is missing; add it to the recipe."
        )
    return {"reference_et_hourly": hourly, "reference_et_daily": daily}


# ----------------------------------------------------------------------------- per-block work

_local = threading.local()


def _transformer(crs_wkt: str):
    from pyproj import Transformer

    cache = getattr(_local, "transformers", None)
    if cache is None:
        cache = _local.transformers = {}
    if crs_wkt not in cache:
        cache[crs_wkt] = Transformer.from_crs(crs_wkt, "EPSG:4326", always_xy=True)
    return cache[crs_wkt]


#: Pixel-centre coordinates are projected exactly (pyproj) on a lattice of every LONLAT_STEP-th
#: pixel of the whole grid and interpolated bilinearly in between, at 1/256 of the projection cost.
#: Measured error: 4e-8 degrees on a 30 m UTM grid, 3e-5 degrees on a 250 m polar stereographic grid
#: near 75 S (tested) - 0.01 s of solar time, far below what the radiation terms resolve. The
#: lattice is global, so values do not depend on chunk boundaries.
LONLAT_STEP = 16


def _lattice_weights(start: int, stop: int, first_node: int) -> tuple[np.ndarray, np.ndarray]:
    index = np.arange(start, stop) - first_node
    return index // LONLAT_STEP, (index % LONLAT_STEP) / LONLAT_STEP


def pixel_lonlat(grid: Grid, rows: slice, cols: slice) -> tuple[np.ndarray, np.ndarray]:
    """Longitude [deg E] and latitude [rad] of the pixel centres of a window (pyproj)."""
    lon, lat, _ = pixel_geometry(grid, rows, cols)
    return lon, lat


def pixel_geometry(
    grid: Grid, rows: slice, cols: slice, constants: SceneConstants | None = None
) -> tuple[np.ndarray, np.ndarray, tuple[np.ndarray, ...] | None]:
    """Longitude [deg E], latitude [rad] and, given the scene constants, the unit vector towards
    the sun (east, north, up) of the pixel centres of a window.

    All are computed on a lattice of every ``LONLAT_STEP``-th pixel anchored at the grid origin
    (so blocks agree on shared nodes, whatever the chunking) and interpolated bilinearly. The
    sun's direction changes by about 1e-4 rad per km, so the interpolation error is far below
    1e-9; it saves the per-pixel trigonometry of the sun's position (profiled at a quarter of
    the surface-state time).
    """
    t = grid.transform
    step = LONLAT_STEP
    r_first, c_first = (rows.start // step) * step, (cols.start // step) * step
    r_nodes = np.arange(r_first, rows.stop + step, step)
    c_nodes = np.arange(c_first, cols.stop + step, step)
    xx, yy = np.meshgrid(t.c + (c_nodes + 0.5) * t.a, t.f + (r_nodes + 0.5) * t.e)
    lon_nodes, lat_nodes = _transformer(grid.crs.to_wkt()).transform(xx, yy)
    rk, rw = _lattice_weights(rows.start, rows.stop, r_first)
    ck, cw = _lattice_weights(cols.start, cols.stop, c_first)

    def interpolate(nodes: np.ndarray) -> np.ndarray:
        along_rows = nodes[rk] * (1 - rw)[:, None] + nodes[rk + 1] * rw[:, None]
        return along_rows[:, ck] * (1 - cw) + along_rows[:, ck + 1] * cw

    lon_nodes, lat_nodes = np.asarray(lon_nodes), np.asarray(lat_nodes)
    sun = None
    if constants is not None:
        omega = local_hour_angle(constants.greenwich_hour_angle, lon_nodes)
        sun_nodes = sun_direction(np.radians(lat_nodes), constants.declination, omega)
        sun = tuple(interpolate(component) for component in sun_nodes)
    return interpolate(lon_nodes), np.radians(interpolate(lat_nodes)), sun


@dataclass(frozen=True)
class BlockContext:
    """Everything a block function needs besides its location (small, picklable)."""

    grid: Grid
    constants: SceneConstants
    lookups: ClassLookups
    sources: tuple[InputSource, ...]
    method: str = "anchors"
    remap: tuple[tuple[int, int], ...] = ()  # user land-cover code -> class code
    metric_pixel_size: tuple[float, float] = (1.0, 1.0)  # for slopes [m]
    wind_profile: tuple[float, float, float] | None = None  # wind height, z0m station, z blend
    blending_wind_speed: float = float("nan")  # station wind carried to the blending height
    mask_values: tuple[int, ...] = ()  # cloud/QA mask values to drop
    mask_bits: tuple[int, ...] = ()  # cloud/QA mask bits to drop
    member_air_offsets: tuple[float, ...] = ()  # ensemble members' air-temperature offsets [K]


def _state(
    ctx: BlockContext,
    rows: slice,
    cols: slice,
    daily: bool = True,
    candidates_only: bool = False,
) -> dict[str, np.ndarray]:
    """Read one window of every input and compute its surface state.

    ``daily``: with the daily net radiation (pass 1 does not need it). ``candidates_only``: the
    state of the pixels whose class may serve as an anchor only, as 1-D arrays, with their
    row-major index in the window as ``window_index`` (pass 1 of the anchor method: the other
    pixels never enter its histograms, and skipping them halved pass 1's time).
    """
    data = {}
    normal = None
    for source in ctx.sources:
        if source.role == "elevation":
            # one-pixel halo for the slope; edge pixels repeat beyond the grid
            haloed = read_window(source, rows, cols, halo=1)
            dx, dy = ctx.metric_pixel_size
            normal = tuple(n[1:-1, 1:-1] for n in surface_normal(haloed, dx, dy))
            data["elevation"] = haloed[1:-1, 1:-1]
        else:
            data[source.role] = read_window(source, rows, cols)
    stats = {role: _input_stats(role, values) for role, values in data.items()}
    if ctx.remap:
        data["land_cover"], stats["land_cover_unmapped"] = remap_codes(
            data["land_cover"], dict(ctx.remap)
        )
    masked = None
    if "cloud_mask" in data:
        masked = mask_pixels(data.pop("cloud_mask"), ctx.mask_values, ctx.mask_bits)
    lon, lat, sun = pixel_geometry(ctx.grid, rows, cols, ctx.constants)
    window_index = None
    if candidates_only:
        codes = land_cover_codes(data["land_cover"])
        keep = (ctx.lookups.cold_anchor | ctx.lookups.hot_anchor)[codes] & np.isfinite(
            data["land_cover"]
        )
        window_index = np.flatnonzero(keep)

        def pick(values):
            return values.reshape(-1)[window_index]

        data = {k: pick(v) for k, v in data.items()}
        lon, lat, sun = pick(lon), pick(lat), tuple(pick(s) for s in sun)
        normal = None if normal is None else tuple(pick(n) for n in normal)
        masked = None if masked is None else pick(masked)
    state = surface_block(
        ctx.constants,
        ctx.lookups,
        data["albedo"],
        data["surface_temperature"],
        data["land_cover"],
        lat,
        lon,
        ndvi=data.get("ndvi"),
        elevation=data.get("elevation"),
        normal=normal,
        sun=sun,
        daily=daily,
        masked=masked,
        weather={k: data[k] for k in WEATHER_ROLES if k in data and k != "wind_speed_m_s"},
    )
    state["input_stats"] = stats
    # wind at the blending height, per pixel from a wind grid or the station's one value
    if "wind_speed_m_s" in data and ctx.wind_profile is not None:
        height, station_roughness, blending_height = ctx.wind_profile
        state["blending_wind_speed"] = anchor_method.wind_at_blending_height(
            data["wind_speed_m_s"], height, station_roughness, blending_height
        )
    else:
        state["blending_wind_speed"] = np.full(state["qa"].shape, ctx.blending_wind_speed)
    if window_index is not None:
        state["window_index"] = window_index
    return state


#: Per input and block: valid pixels, all pixels, min, max, and a unit-suspicion count
#: (albedo above 1.5, surface temperature below 100 K).
def _input_stats(role: str, values: np.ndarray) -> np.ndarray:
    finite = values[np.isfinite(values)]
    if role == "albedo":
        suspicious = np.count_nonzero(finite > 1.5)
    elif role == "surface_temperature":
        suspicious = np.count_nonzero(finite < 100.0)
    else:
        suspicious = 0
    low = finite.min() if finite.size else np.inf
    high = finite.max() if finite.size else -np.inf
    return np.array([finite.size, values.size, low, high, suspicious], dtype=np.float64)


def remap_codes(codes: np.ndarray, mapping: dict[int, int]) -> tuple[np.ndarray, dict]:
    """Map a user's land-cover codes to class codes; count the codes the table leaves unmapped."""
    finite = np.isfinite(codes)
    values = codes[finite].astype(np.int64)
    present, counts = np.unique(values, return_counts=True)
    unmapped = {int(v): int(n) for v, n in zip(present, counts, strict=True) if v not in mapping}
    out = np.full(codes.shape, np.nan)
    keys = np.array(sorted(mapping), dtype=np.int64)
    targets = np.array([mapping[k] for k in keys], dtype=np.float64)
    where = np.searchsorted(keys, values).clip(0, keys.size - 1)
    hit = keys[where] == values
    mapped = np.full(values.shape, np.nan)
    mapped[hit] = targets[where[hit]]
    out[finite] = mapped
    return out, unmapped


def _merge_stats(a: dict, b: dict) -> dict:
    out = {}
    for role in a:
        if role == "land_cover_unmapped":
            merged = dict(a[role])
            for code, n in b[role].items():
                merged[code] = merged.get(code, 0) + n
            out[role] = merged
            continue
        x, y = a[role], b[role]
        out[role] = np.array(
            [x[0] + y[0], x[1] + y[1], min(x[2], y[2]), max(x[3], y[3]), x[4] + y[4]]
        )
    return out


def check_input_values(stats: dict, sources: tuple[InputSource, ...]) -> dict:
    """Refuse inputs that are all nodata or hold values in the wrong units; return a summary."""
    summary = {}
    unmapped = stats.get("land_cover_unmapped")
    if unmapped:
        listed = ", ".join(f"{code} ({n} pixels)" for code, n in sorted(unmapped.items())[:20])
        raise InputValueError(
            f"land-cover codes not in the remap table: {listed}; add them to the table named "
            "by inputs.land_cover.remap."
        )
    for source in sources:
        n_valid, n_total, low, high, suspicious = stats[source.role]
        where = f"inputs.{source.role}"
        if n_valid == 0 and source.role != "cloud_mask":
            raise InputValueError(
                f"{source.role} raster {source.path} holds no valid pixel on the albedo grid "
                f"(all nodata); check the file and its nodata value ({where})."
            )
        if source.role == "albedo" and suspicious > 0.5 * n_valid:
            raise InputValueError(
                f"albedo raster {source.path} has values up to {high:.3g} (most above 1.5): it "
                f'looks like percent; set {where} = {{ path = "...", units = "percent" }}, '
                "or a scale factor."
            )
        if source.role == "surface_temperature" and suspicious > 0.5 * n_valid:
            raise InputValueError(
                f"surface temperature raster {source.path} has a median below 100 (values "
                f"{low:.1f} to {high:.1f}): it looks like degrees Celsius; set {where} = "
                f'{{ path = "...", units = "C" }}, or a scale/offset.'
            )
        summary[source.role] = {
            "valid_fraction": n_valid / n_total if n_total else 0.0,
            "min": low,
            "max": high,
        }
    return summary


def mask_pixels(mask: np.ndarray, values: tuple[int, ...], bits: tuple[int, ...]) -> np.ndarray:
    """True where the cloud/QA mask holds a value to drop or has any of the given bits set.

    Pixels outside the mask raster (nodata) are kept: the mask only removes what it flags.
    """
    finite = np.isfinite(mask)
    codes = np.where(finite, mask, 0).astype(np.int64)
    drop = np.isin(codes, values) if values else np.zeros(mask.shape, dtype=bool)
    for bit in bits:
        drop |= (codes >> bit) & 1 == 1
    return drop & finite


def pass1_block(ctx: BlockContext, location):
    """Pass 1 for one block: read, surface state, then the method's histograms."""
    (r0, r1), (c0, c1) = location
    if ctx.method == "edges":
        state = _state(ctx, slice(r0, r1), slice(c0, c1), daily=False)
        return edge_method.scatter_histogram_block(state), state["input_stats"]
    state = _state(ctx, slice(r0, r1), slice(c0, c1), daily=False, candidates_only=True)
    # global row-major index of each candidate pixel (ties between blocks go to the lowest)
    row, col = np.divmod(state["window_index"], c1 - c0)
    flat = (row + r0).astype(np.float64) * ctx.grid.width + (col + c0)
    members = [perturbed_air(ctx.constants, state, dt) for dt in ctx.member_air_offsets]
    histograms = anchor_method.anchor_histograms_block(state, flat, members)
    return histograms, state["input_stats"]


def _ensemble_block(ctx, p, state, valid, lam, lam_daily, length) -> dict[str, np.ndarray]:
    """Daily ET of every ensemble member on one block, reduced to per-pixel percentiles."""
    c = ctx.constants
    ts = np.where(valid, state["surface_temperature"], np.nan)
    daily = np.empty((len(p.members), *ts.shape))
    for m, (member, calibration) in enumerate(p.members):
        available, rho = perturbed_air(c, state, member.air_temperature_offset)
        available = np.where(valid, available, np.nan)
        # start from the central run's stability: members differ little, so 2-4 iterations do
        h, _ = anchor_method.sensible_heat_block(
            ts,
            state["roughness_length"],
            rho,
            calibration,
            p.blending_height,
            p.max_iterations,
            datum_surface_temperature=state["datum_surface_temperature"],
            initial_inverse_length=length,
            blending_wind_speed=state["blending_wind_speed"] * member.wind_factor,
        )
        le = partition.clip_latent_heat(available - h, c.max_evaporative_fraction * available)
        if c.daily_scaling == "reference_et_fraction":
            et_hourly = partition.et_depth(le, lam, SECONDS_PER_HOUR)
            daily[m] = et_hourly / c.reference_et_hourly * c.reference_et_daily
        else:
            ef = partition.evaporative_fraction(le, available)
            daily[m] = partition.et_daily_from_evaporative_fraction(
                ef, np.maximum(state["net_radiation_daily"], 0.0), lam_daily
            )
    low, high = ensemble_percentiles(daily)
    return {"et_daily_p10": low, "et_daily_p90": high}


@dataclass(frozen=True)
class Pass2Parameters:
    """What pass 2 needs from pass 1: the anchor calibration or the fitted edges."""

    variables: tuple[str, ...]
    calibration: anchor_method.Calibration | None = None
    cold: anchor_method.Anchor | None = None
    hot: anchor_method.Anchor | None = None
    explicit_cold: bool = False
    explicit_hot: bool = False
    blending_height: float = 200.0
    max_iterations: int = 30
    edges: edge_method.Edges | None = None
    members: tuple[tuple[Member, anchor_method.Calibration], ...] = ()
    stability_start: anchor_method.StabilityStart | None = None


def pass2_block(ctx: BlockContext, p: Pass2Parameters, location) -> np.ndarray:
    """Pass 2 for one block: read, all fluxes and QA, stacked along a leading variable axis."""
    (r0, r1), (c0, c1) = location
    state = _state(ctx, slice(r0, r1), slice(c0, c1))
    qa = state["qa"]
    valid = state["valid"]
    ts = state["surface_temperature"]
    rn, g, available = state["net_radiation"], state["ground_heat_flux"], state["available_energy"]

    inverse_length = np.zeros(ts.shape)
    if p.edges is not None:
        # H is what the edges leave of the available energy: (1 - EF) (Rn - G), unclipped here
        ef_edges = edge_method.evaporative_fraction_block(
            state["albedo"], state["datum_surface_temperature"], p.edges
        )
        h = np.where(valid, (1.0 - ef_edges) * available, np.nan)
        converged = np.ones(ts.shape, dtype=bool)
    else:
        h, converged = anchor_method.sensible_heat_block(
            np.where(valid, ts, np.nan),
            state["roughness_length"],
            state["air_density"],
            p.calibration,
            p.blending_height,
            p.max_iterations,
            datum_surface_temperature=state["datum_surface_temperature"],
            inverse_length_out=inverse_length,
            blending_wind_speed=state["blending_wind_speed"],
            start=p.stability_start,
        )
    le_raw = partition.latent_heat_residual(rn, g, h)
    # LE may exceed Rn - G only by max_evaporative_fraction (advection: H < 0); default 1
    ceiling = ctx.constants.max_evaporative_fraction * available
    le = partition.clip_latent_heat(le_raw, ceiling)
    with np.errstate(invalid="ignore"):
        clipped_low = valid & (le_raw < 0)
        clipped_high = valid & (le_raw > np.maximum(ceiling, 0.0))
    h = available - le  # closure Rn = G + H + LE holds after clipping
    ef = partition.evaporative_fraction(le, available)
    lam = turbulence.latent_heat_of_vaporization(ts)
    lam_daily = turbulence.latent_heat_of_vaporization(
        0.5 * (ctx.constants.tmax + ctx.constants.tmin)
    )
    et_hourly = partition.et_depth(le, lam, SECONDS_PER_HOUR)
    # A negative daily net radiation (snow, some nights-dominated days) evaporates nothing.
    et_daily = partition.et_daily_from_evaporative_fraction(
        ef, np.maximum(state["net_radiation_daily"], 0.0), lam_daily
    )

    def bit(mask, flag):
        return np.where(mask, np.uint16(flag), np.uint16(0))

    qa = qa | bit(clipped_low, QA.LATENT_HEAT_CLIPPED_AT_ZERO)
    qa |= bit(clipped_high, QA.LATENT_HEAT_CLIPPED_AT_AVAILABLE)
    qa |= bit(valid & ~converged, QA.STABILITY_NOT_CONVERGED)
    anchor_bits = (
        ()
        if p.calibration is None
        else (
            (p.cold, p.explicit_cold, QA.COLD_ANCHOR, state["cold_candidate"]),
            (p.hot, p.explicit_hot, QA.HOT_ANCHOR, state["hot_candidate"]),
        )
    )
    for anchor, explicit, flag, candidates in anchor_bits:
        if explicit:
            if r0 <= anchor.row < r1 and c0 <= anchor.col < c1:
                qa[anchor.row - r0, anchor.col - c0] |= np.uint16(flag)
        else:
            low, high = anchor.ts_range
            datum = state["datum_surface_temperature"]
            with np.errstate(invalid="ignore"):
                qa |= bit(candidates & (datum >= low) & (datum < high), flag)

    c = ctx.constants
    ensemble = {}
    if p.members:
        ensemble = _ensemble_block(ctx, p, state, valid, lam, lam_daily, length=inverse_length)
    if c.reference_et_hourly is not None and c.reference_et_hourly > 0:
        fraction = et_hourly / c.reference_et_hourly  # ET at overpass / hourly reference ET
    else:
        fraction = np.full(ts.shape, np.nan)
    if c.daily_scaling == "reference_et_fraction":
        et_daily = fraction * c.reference_et_daily

    values = {
        **ensemble,
        "reference_et_fraction": fraction,
        "net_radiation": rn,
        "ground_heat_flux": g,
        "sensible_heat_flux": h,
        "latent_heat_flux": le,
        "evaporative_fraction": ef,
        "et_hourly": et_hourly,
        "et_daily": et_daily,
        "shortwave_in": state["shortwave_in"],
        "longwave_in": state["longwave_in"],
        "longwave_out": state["longwave_out"],
        "net_radiation_daily": state["net_radiation_daily"],
        QA_OUTPUT: qa,
        "land_cover_code": state["codes"],
    }
    out = np.stack([np.asarray(values[v], dtype=np.float32) for v in p.variables])
    return out


# ----------------------------------------------------------------------------- helpers


def sha256_of(path: Path) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as f:
        for chunk in iter(lambda: f.read(1 << 20), b""):
            digest.update(chunk)
    return digest.hexdigest()


def _tree_reduce(items: list, combine, split_every: int = 8):
    import dask

    level = list(items)
    while len(level) > 1:
        level = [
            dask.delayed(lambda *xs: reduce(combine, xs))(*level[i : i + split_every])
            for i in range(0, len(level), split_every)
        ]
    return level[0]


def _combine_summaries(a, b):
    hists = dict(a[0])
    for key, hist in b[0].items():
        hists[key] = hist.merge(hists.get(key))
    moments = a[1].copy()
    moments[..., :3] += b[1][..., :3]
    moments[..., 3] = np.minimum(a[1][..., 3], b[1][..., 3])
    moments[..., 4] = np.maximum(a[1][..., 4], b[1][..., 4])
    return hists, moments, a[2] + b[2], {**a[3], **b[3]}, {**a[4], **b[4]}


def _decimated(block: np.ndarray, index: list[int], step: int, r0: int, c0: int) -> np.ndarray:
    """The block's pixels on the scene-wide lattice of every ``step``-th row and column."""
    return block[index, (-r0) % step :: step, (-c0) % step :: step].astype(np.float32)


def _block_summary(
    block: np.ndarray,
    variables: tuple[str, ...],
    class_codes: list[int],
    thumbnail: tuple[list[int], int, int, int] | None = None,
    tiles: tuple[list[int], int, int, int] | None = None,
):
    """Per-class histograms and moments of one pass-2 block, its pixels per QA bit and, given
    ``thumbnail = (variable indices, step, r0, c0)``, its quick-look pixels keyed by (r0, c0);
    given ``tiles = (variable indices, tile, r0, c0)`` with tiles that lie inside blocks, the
    statistics of its tiles keyed by (tile row, tile col).

    Quick-look pixels and tile statistics come from this task rather than tasks of their own: as
    separate leaf tasks dask ran them late and held the pass-2 blocks until then (+350 MB at
    1024 blocks for the quick-look; the peak grew with the block count).
    """
    values = {name: block[variables.index(name)] for name in HISTOGRAM_RANGES if name in variables}
    codes = block[variables.index("land_cover_code")].astype(np.intp)
    qa = block[variables.index(QA_OUTPUT)].astype(np.uint16)
    qa_counts = np.array([np.count_nonzero(qa & np.uint16(b)) for b in QA], dtype=np.int64)
    thumbs = {}
    if thumbnail is not None:
        index, step, r0, c0 = thumbnail
        thumbs[r0, c0] = _decimated(block, index, step, r0, c0)
    stats = {}
    if tiles is not None:
        index, tile, r0, c0 = tiles
        summarised = block[index]
        for tr in range(0, block.shape[1], tile):
            for tc in range(0, block.shape[2], tile):
                part = summarised[:, tr : tr + tile, tc : tc + tile]
                stats[(r0 + tr) // tile, (c0 + tc) // tile] = tile_statistics(part)
    return (*class_histograms(values, codes, class_codes), qa_counts, thumbs, stats)


def release_free_memory() -> None:
    """Hand the heap pages freed by a pass back to the operating system (glibc's malloc_trim).

    After pass 2 glibc kept the blocks' freed memory (about 200 MB at chunk 512); the summaries,
    quick-look and manifest that follow then set the run's peak on top of it.
    """
    try:
        ctypes.CDLL("libc.so.6").malloc_trim(0)
    except (OSError, AttributeError):  # not glibc: nothing to do
        pass


def _pass2_write_block(ctx: BlockContext, p: Pass2Parameters, location, summary_args, targets):
    """Pass 2 of one block, its windows written to every target, and its summary returned.

    ``targets``: (variable index, data type, target) with targets that take
    ``target[rows, cols] = values`` (GeoTIFF writers, Zarr arrays); ``summary_args``: the
    arguments of :func:`_block_summary` after the block.
    """
    block = pass2_block(ctx, p, location)
    (r0, r1), (c0, c1) = location
    window = (slice(r0, r1), slice(c0, c1))
    for k, dtype, target in targets:
        target[window] = block[k].astype(dtype, copy=False)  # float32 outputs: no copy
    return _block_summary(block, *summary_args)


def versions() -> dict[str, str]:
    import dask
    import pyproj
    import rasterio

    return {
        "rasterbudget": __version__,
        "python": platform.python_version(),
        "numpy": np.__version__,
        "dask": dask.__version__,
        "rasterio": rasterio.__version__,
        "gdal": rasterio.__gdal_version__,
        "pyproj": pyproj.__version__,
        "proj": pyproj.proj_version_str,
    }


# ----------------------------------------------------------------------------- the scene


def _calibrate_anchors(
    scene: Scene, grid: Grid, ctx: BlockContext, histogram, scene_gridded: dict
) -> tuple:
    """Choose (or read) both anchors and fit dT = a + b Ts; return pass-2 parameters and facts."""
    import rasterio

    s = scene.anchors
    if scene.overpass.wind_speed_m_s is None:
        raise RasterBudgetError(
            f"scene {scene.id}: anchor calibration needs overpass.wind_speed_m_s; add it, or "
            "set sensible_heat = 'edges', which needs no wind."
        )
    chosen = {}
    explicit = {}
    pixel_states: dict[str, dict] = {}
    percentiles = {"cold": s.cold_percentile, "hot": s.hot_percentile}
    for r, (role, xy) in enumerate((("cold", s.cold_xy), ("hot", s.hot_xy))):
        explicit[role] = xy is not None
        if xy is None:
            chosen[role] = anchor_method.select_anchor(
                anchor_method.dense_histogram(histogram[r]),
                role,
                percentiles[role],
                s.percentile_band,
                s.min_candidates,
                grid.width,
            )
            continue
        row, col = rasterio.transform.rowcol(grid.transform, *xy)
        if not (0 <= row < grid.height and 0 <= col < grid.width):
            raise RasterBudgetError(
                f"scene {scene.id}: anchors.{role}_xy = {list(xy)} lies outside the scene "
                f"grid {tuple(round(b) for b in grid.bounds)}; give map coordinates in "
                f"{grid.crs.to_string()}."
            )
        state = _state(ctx, slice(row, row + 1), slice(col, col + 1))
        pixel_states[role] = state
        chosen[role] = anchor_method.anchor_from_pixel(state, role, row, col, (0, 0))
    u_blend = anchor_method.wind_at_blending_height(
        scene.overpass.wind_speed_m_s,
        scene.overpass.wind_height_m,
        s.station_roughness_m,
        s.blending_height_m,
    )
    k_ref = scene.reference_et.cold_anchor_fraction
    gridded_wind = "wind_speed_m_s" in scene_gridded

    def cold_condition(cold: anchor_method.Anchor, factor: float = 1.0) -> float:
        """The cold anchor's imposed EF: given, or k ETr(hour) expressed as a flux over Rn - G."""
        if k_ref is None:
            return min(factor * s.cold_evaporative_fraction, 1.2)
        lam = float(turbulence.latent_heat_of_vaporization(cold.surface_temperature))
        cold_le = factor * k_ref * ctx.constants.reference_et_hourly * lam / SECONDS_PER_HOUR
        return min(cold_le / cold.available_energy, 1.2)

    cold_fraction = cold_condition(chosen["cold"])
    calibration = anchor_method.calibrate(
        chosen["cold"],
        chosen["hot"],
        u_blend,
        s.blending_height_m,
        cold_fraction,
        s.hot_evaporative_fraction,
        s.max_iterations,
        s.tolerance_k,
        gridded_wind=gridded_wind,
    )
    params = {
        "calibration": calibration,
        "cold": chosen["cold"],
        "hot": chosen["hot"],
        "explicit_cold": explicit["cold"],
        "explicit_hot": explicit["hot"],
        "blending_height": s.blending_height_m,
        "max_iterations": s.max_iterations,
        # where each pixel's stability iteration starts: the anchors' mean air density
        "stability_start": anchor_method.stability_start(
            calibration,
            ctx.lookups.roughness_length,
            0.5 * (chosen["cold"].air_density + chosen["hot"].air_density),
            s.blending_height_m,
        ),
    }
    facts = {
        "anchors": {k: v.as_dict() | _anchor_xy(grid, v) for k, v in chosen.items()},
        "calibration": calibration.as_dict() | {"cold_evaporative_fraction": cold_fraction},
    }
    # ---- ensemble members: the same pass-1 histograms, perturbed choices and weather
    members = []
    dense = [
        anchor_method.dense_histogram(histogram[r], len(ctx.member_air_offsets)) for r in range(2)
    ]
    for m, member in enumerate(sample_members(scene.uncertainty)):
        anchors_m = {}
        for r, role in enumerate(anchor_method.ROLES):
            if explicit[role]:
                st = pixel_states[role]
                available, rho = perturbed_air(ctx.constants, st, member.air_temperature_offset)
                anchors_m[role] = dataclasses.replace(
                    chosen[role],
                    available_energy=float(available[0, 0]),
                    air_density=float(rho[0, 0]),
                )
            else:
                pct = member.cold_percentile if role == "cold" else member.hot_percentile
                anchors_m[role] = anchor_method.select_anchor(
                    anchor_method.member_histogram(dense[r], m),
                    role,
                    pct,
                    s.percentile_band,
                    s.min_candidates,
                    grid.width,
                )
        fraction_m = cold_condition(anchors_m["cold"], member.cold_anchor_factor)
        calibration_m = anchor_method.calibrate(
            anchors_m["cold"],
            anchors_m["hot"],
            u_blend * member.wind_factor,
            s.blending_height_m,
            fraction_m,
            s.hot_evaporative_fraction,
            s.max_iterations,
            s.tolerance_k,
            gridded_wind=gridded_wind,
            wind_factor=member.wind_factor,
        )
        members.append((member, calibration_m))
    if members:
        params["members"] = tuple(members)
        facts["ensemble"] = [
            m.as_dict() | {"a": c.a, "b": c.b, "converged": c.converged} for m, c in members
        ]
    return params, facts


def run_scene(
    recipe: Recipe,
    scene: Scene,
    table: ClassTable,
    settings: RunSettings,
    fingerprint: str | None = None,
) -> SceneResult:
    """Run one scene end to end and return where its outputs are."""
    import dask
    import dask.array as da
    import rasterio

    from ..io.progress import TaskProgress

    started = time.perf_counter()
    timings: dict[str, float] = {}
    chunk = effective_chunk_size(settings.chunk_size)
    block = block_size_for(chunk)
    if settings.zarr:
        from ..io.cloud import require_zarr

        require_zarr()  # before any pass, not after minutes of work

    paths, specs = {}, {}
    for role in REQUIRED_INPUTS + OPTIONAL_INPUTS:
        spec = scene.inputs.spec(role)
        if spec is not None:
            paths[role] = resolve_raster_path(recipe, spec.path)
            specs[role] = spec
    if scene.inputs.cloud_mask is not None:
        paths["cloud_mask"] = resolve_raster_path(recipe, scene.inputs.cloud_mask.path)
    for key, value in scene.overpass.gridded().items():
        paths[key] = resolve_raster_path(recipe, value)
    remap = {}
    if specs["land_cover"].remap is not None:
        from ..catalog.classes import load_remap

        remap = load_remap(resolve_path(recipe, specs["land_cover"].remap), table)
    with rasterio.Env(**GDAL_OPTIONS):
        grid = target_grid(paths["albedo"])  # refuses an albedo without CRS, in any case
        if scene.grid is not None:
            grid = grid_from_settings(scene.grid)
        described = {role: check_input(path, role, grid) for role, path in paths.items()}
    if scene.uncertainty.members and scene.sensible_heat != "anchors":
        raise RasterBudgetError(
            f"scene {scene.id}: uncertainty.members is implemented for sensible_heat = "
            "'anchors' only; remove [scene.uncertainty] or use the anchors method."
        )
    # Gridded weather: scene-wide scalars (reference ET, the sun check, ...) take each raster's
    # value at the scene centre; pixels use their own values (surface_block, anchors, pass 2).
    gridded_keys = scene.overpass.gridded()
    scene, centre_values = with_weather_at_centre(scene, grid, paths)
    constants, facts = scene_constants(scene, grid)
    facts["gridded_weather_at_centre"] = centre_values
    lookups = ClassLookups.from_table(table)

    out_dir = settings.out_dir / scene.id
    out_dir.mkdir(parents=True, exist_ok=True)
    remove_stale_partials(out_dir)

    env = rasterio.Env(**GDAL_OPTIONS)
    env.__enter__()
    writers: list[AtomicRaster] = []
    zarr_store = None
    try:
        sources = tuple(
            input_source(path, role, grid, specs.get(role)) for role, path in paths.items()
        )
        ctx = BlockContext(
            grid=grid,
            constants=constants,
            lookups=lookups,
            sources=sources,
            method=scene.sensible_heat,
            remap=tuple(sorted(remap.items())),
            metric_pixel_size=metric_pixel_size(grid, facts["centre_lat"]),
            wind_profile=(
                scene.overpass.wind_height_m,
                scene.anchors.station_roughness_m,
                scene.anchors.blending_height_m,
            ),
            blending_wind_speed=float("nan")
            if scene.overpass.wind_speed_m_s is None
            else (
                anchor_method.wind_at_blending_height(
                    scene.overpass.wind_speed_m_s,
                    scene.overpass.wind_height_m,
                    scene.anchors.station_roughness_m,
                    scene.anchors.blending_height_m,
                )
            ),
            mask_values=tuple(
                scene.inputs.cloud_mask.drop_values if scene.inputs.cloud_mask else ()
            ),
            mask_bits=tuple(scene.inputs.cloud_mask.drop_bits if scene.inputs.cloud_mask else ()),
            member_air_offsets=tuple(
                m.air_temperature_offset for m in sample_members(scene.uncertainty)
            ),
        )
        ctx_task = dask.delayed(ctx)  # one graph key shared by every block task
        row_edges = [*range(0, grid.height, chunk), grid.height]
        col_edges = [*range(0, grid.width, chunk), grid.width]
        locations = [
            [((r0, r1), (c0, c1)) for c0, c1 in itertools.pairwise(col_edges)]
            for r0, r1 in itertools.pairwise(row_edges)
        ]

        # ---------------- pass 1: anchor histograms. Each task reads its own windows, so input
        # blocks are never read far ahead of their use.
        t0 = time.perf_counter()
        partials = [dask.delayed(pass1_block)(ctx_task, loc) for row in locations for loc in row]
        combine = (
            edge_method.combine_histograms
            if scene.sensible_heat == "edges"
            else anchor_method.combine_histograms
        )
        total = _tree_reduce(partials, lambda a, b: (combine(a[0], b[0]), _merge_stats(a[1], b[1])))
        with TaskProgress(f"{scene.id} pass 1", settings.progress):
            ((histogram, input_stats),) = dask.compute(total)
        value_summary = check_input_values(input_stats, sources)
        if scene.sensible_heat == "edges":
            e = scene.edges
            fitted = edge_method.fit_edges(
                histogram,
                e.dry_percentile,
                e.wet_percentile,
                e.min_pixels_per_bin,
                e.min_bins,
                e.wet_edge,
            )
            method_params = {"edges": fitted}
            method_facts = {"edges": fitted.as_dict()}
        else:
            method_params, method_facts = _calibrate_anchors(
                scene, grid, ctx, histogram, gridded_keys
            )
        timings["pass1_s"] = time.perf_counter() - t0

        # ---------------- pass 2: fluxes, GeoTIFFs and summaries in one compute
        t0 = time.perf_counter()
        written = list(FLUX_OUTPUTS) + (
            list(COMPONENT_OUTPUTS) if settings.write_components else []
        )
        if constants.reference_et_hourly is not None:
            written.append("reference_et_fraction")
        if method_params.get("members"):
            written += list(ENSEMBLE_OUTPUTS)
        variables = (*written, QA_OUTPUT, "land_cover_code")
        params = Pass2Parameters(variables=variables, **method_params)
        params_task = dask.delayed(params)
        descriptions = {
            **FLUX_OUTPUTS,
            **COMPONENT_OUTPUTS,
            **REFERENCE_OUTPUTS,
            **ENSEMBLE_OUTPUTS,
        }
        tags = {
            "scene_id": scene.id,
            "acquired_utc": scene.acquired_utc.isoformat(),
            "software": f"rasterbudget {__version__}",
        }
        targets = []  # (variable index, data type, GeoTIFF writer or Zarr array)
        for k, name in enumerate(written):
            units, text = descriptions[name]
            writer = AtomicRaster(
                out_dir / f"{name}.tif",
                grid,
                "float32",
                np.nan,
                block,
                name,
                units,
                text,
                tags,
                cog=settings.cog,
                compression=settings.compression,
            )
            writers.append(writer)
            targets.append((k, "float32", writer))
        qa_writer = AtomicRaster(
            out_dir / f"{QA_OUTPUT}.tif",
            grid,
            "uint16",
            None,  # no nodata: 0 means "no flag", and GIS tools would hide such pixels
            block,
            QA_OUTPUT,
            "bitmask",
            "QA flags, bits in the README",
            tags,
            cog=settings.cog,
            compression=settings.compression,
        )
        writers.append(qa_writer)
        targets.append((variables.index(QA_OUTPUT), "uint16", qa_writer))
        if settings.zarr:
            from ..io.cloud import ZARR_NAME, AtomicZarr

            zarr_vars = {n: ("float32", *descriptions[n]) for n in written}
            zarr_vars[QA_OUTPUT] = ("uint16", "1", "QA flags, bits in the README")
            zarr_store = AtomicZarr(out_dir / ZARR_NAME, grid, chunk, zarr_vars, tags)
            # The same blocks as the GeoTIFFs': each block is computed once and written to both.
            for array, (k, dtype, _) in zip(zarr_store.arrays.values(), list(targets), strict=True):
                targets.append((k, dtype, array))

        tile = settings.tile_size
        flux_names = [n for n in HISTOGRAM_RANGES if n in variables]  # summarised variables
        index = [variables.index(n) for n in flux_names]
        # Tiles inside blocks are summarised by the block's own task; others need a rechunk.
        tiles_in_blocks = chunk % tile == 0
        # Every n-th pixel of the quick-look variables comes from the same blocks, in the summary
        # task (reading the written outputs back cost about 1 s at 4096 x 4096).
        from .quicklook import PANELS, decimation_factor

        panel_names = [name for name, *_ in PANELS] if settings.quicklook else []
        step = decimation_factor(grid.width, grid.height)
        panel_index = [variables.index(name) for name in panel_names]
        class_codes = table.codes
        tile_stats = []
        if tiles_in_blocks:
            # One task per block computes it, writes its windows and returns only its summary:
            # no block outlives its task, so memory does not grow with the number of blocks.
            write_block = partial(_pass2_write_block, targets=targets)
            summary_parts = [
                dask.delayed(write_block, pure=False)(
                    ctx_task,
                    params_task,
                    loc,
                    (
                        variables,
                        class_codes,
                        (panel_index, step, loc[0][0], loc[1][0]) if panel_names else None,
                        (index, tile, loc[0][0], loc[1][0]),
                    ),
                )
                for row in locations
                for loc in row
            ]
            store = None
        else:
            stacked = da.block(
                [
                    [
                        da.from_delayed(
                            dask.delayed(pass2_block)(ctx_task, params_task, loc),
                            shape=(len(variables), loc[0][1] - loc[0][0], loc[1][1] - loc[1][0]),
                            dtype=np.float32,
                            meta=np.empty((0, 0, 0), np.float32),
                        )
                        for loc in row
                    ]
                    for row in locations
                ]
            )
            # A lock per file: GDAL handles are not thread-safe, but different files may be
            # written at once (AtomicRaster.__setitem__ holds its own lock, so lock=False here).
            arrays = [stacked[k].astype(dtype) for k, dtype, _ in targets]
            store = da.store(arrays, [t for *_, t in targets], lock=False, compute=False)
            tiled = stacked[index].rechunk((len(flux_names), tile, tile))
            tile_delayed = tiled.to_delayed(optimize_graph=False)[0]
            tile_stats = [[dask.delayed(tile_statistics)(b) for b in row] for row in tile_delayed]
            block_grid = stacked.to_delayed(optimize_graph=False)[0]
            summary_parts = [
                dask.delayed(_block_summary)(
                    b,
                    variables,
                    class_codes,
                    (panel_index, step, r0, c0) if panel_names else None,
                )
                for row, r0 in zip(block_grid, row_edges[:-1], strict=True)
                for b, c0 in zip(row, col_edges[:-1], strict=True)
            ]
        summary_total = _tree_reduce(summary_parts, _combine_summaries)
        with TaskProgress(f"{scene.id} pass 2", settings.progress):
            _, tile_stats, summary = dask.compute(store, tile_stats, summary_total)
        class_hist, class_moments, qa_bit_counts, thumbs, block_tiles = summary
        if tiles_in_blocks:
            tile_rows_count = -(-grid.height // tile)
            tile_cols_count = -(-grid.width // tile)
            tile_stats = [
                [block_tiles[i, j] for j in range(tile_cols_count)] for i in range(tile_rows_count)
            ]
        panels = {}
        if panel_names:
            thumbnails = np.block(
                [[thumbs[r0, c0] for c0 in col_edges[:-1]] for r0 in row_edges[:-1]]
            )
            panels = dict(zip(panel_names, thumbnails, strict=True))
        timings["pass2_s"] = time.perf_counter() - t0
        release_free_memory()
        t0 = time.perf_counter()
        _finish_all(writers)  # with cog: converted; all still under temporary names
        if settings.cog:
            timings["cog_s"] = time.perf_counter() - t0
        raster_info = {w.path.stem: (w.units, w.description, w.dtype, w.nodata) for w in writers}
        outputs = {w.path.stem: w.commit() for w in writers}
        writers = []
        if zarr_store is not None:
            outputs[zarr_store.path.name] = zarr_store.commit()
            zarr_store = None
    except RasterBudgetError:
        raise
    except OSError as err:
        # Input windows raise InputRasterError themselves; what is left is writing outputs.
        message = str(err).splitlines()[0] if str(err) else type(err).__name__
        raise OutputError(
            f"scene {scene.id}: writing outputs to {out_dir} failed ({message}); check free disk "
            "space and write permission, then run again (nothing incomplete was kept)."
        ) from err
    finally:
        for w in writers:
            w.abort()
        if zarr_store is not None:
            zarr_store.abort()
        env.__exit__(None, None, None)

    # ---------------- summaries, quick-look, manifest (small, written atomically)
    t0 = time.perf_counter()
    tile_stats = np.array([[np.asarray(s) for s in row] for row in tile_stats])
    tile_info = tile_layout(grid, tile)
    tiles = tile_rows(tile_stats, flux_names, tile_info)
    outputs["tiles.csv"] = write_text_atomic(out_dir / "tiles.csv", rows_to_csv(tiles))
    outputs["tiles.geojson"] = write_text_atomic(
        out_dir / "tiles.geojson", tiles_geojson(tiles, grid.crs.to_string())
    )
    pixel_area = abs(grid.transform.a * grid.transform.e)
    classes = class_rows(flux_names, class_hist, class_moments, table, class_codes, pixel_area)
    classes = [c for c in classes if c["valid_pixels"] > 0]
    outputs["classes.csv"] = write_text_atomic(out_dir / "classes.csv", rows_to_csv(classes))
    if settings.quicklook:
        from .quicklook import write_quicklook

        outputs["quicklook.png"] = write_quicklook(
            panels,
            out_dir / "quicklook.png",
            f"{scene.id}  {scene.acquired_utc:%Y-%m-%d %H:%M} UTC",
        )
    if scene.sensible_heat == "edges":
        picture = out_dir / "edges.png"
        edge_method.scatter_picture(
            histogram,
            method_params["edges"],
            picture.with_name(picture.name + ".partial"),
            f"{scene.id}: surface temperature against albedo",
        )
        outputs["edges.png"] = picture.with_name(picture.name + ".partial").replace(picture)
    timings["summaries_s"] = time.perf_counter() - t0
    if settings.stac:
        t0 = time.perf_counter()
        outputs[f"{scene.id}.stac.json"] = _write_stac(
            scene, grid, raster_info, outputs, out_dir, settings.cog
        )
        timings["stac_s"] = time.perf_counter() - t0
    timings["total_s"] = time.perf_counter() - started

    qa_counts = {b.name: int(n) for b, n in zip(QA, qa_bit_counts, strict=True)}
    manifest = {
        "scene_id": scene.id,
        "status": "complete",
        "fingerprint": fingerprint,
        "written_utc": dt.datetime.now(dt.UTC).isoformat(timespec="seconds"),
        "caution": CAUTION,
        "inputs": {
            role: {
                **info,
                # Remote inputs are not fetched a third time just to size and hash them.
                "bytes": local_size(info["path"]),
                "sha256": None if is_remote(info["path"]) else sha256_of(Path(info["path"])),
                "values_on_grid": value_summary.get(role),
            }
            for role, info in described.items()
        },
        "class_table": table.source,
        "grid": {
            "crs": grid.crs.to_string(),
            "transform": list(grid.transform)[:6],
            "width": grid.width,
            "height": grid.height,
        },
        "chunking": {"chunk_size": chunk, "tile_size": tile, "geotiff_block": block},
        "formats": {"cog": settings.cog, "stac": settings.stac, "zarr": settings.zarr},
        "parameters": json.loads(scene.model_dump_json()),
        "scene_constants": asdict(constants),
        "scene_facts": facts,
        "sensible_heat_method": scene.sensible_heat,
        "daily_scaling": scene.daily_scaling,
        "reference_et": {
            "surface": scene.reference_et.surface,
            "hourly_mm": constants.reference_et_hourly,
            "daily_mm": constants.reference_et_daily,
        },
        **method_facts,
        "qa_bits": {
            f"bit {int(math.log2(b))}": {
                "name": b.name,
                "meaning": QA_DESCRIPTIONS[b],
                "pixels": qa_counts.get(b.name, 0),
            }
            for b in QA
        },
        "scene_means_all": {
            name: (
                float(class_moments[:, v, 1].sum() / class_moments[:, v, 0].sum())
                if class_moments[:, v, 0].sum()
                else None
            )
            for v, name in enumerate(flux_names)
        },
        "scene_means": {c["name"]: {v: c.get(f"{v}_mean") for v in flux_names} for c in classes},
        "outputs": {k: str(v.relative_to(out_dir)) for k, v in outputs.items()},
        "timings_s": timings,
        "versions": versions(),
    }
    outputs["manifest.json"] = write_text_atomic(
        out_dir / "manifest.json", json.dumps(manifest, indent=2, default=_json_default)
    )
    return SceneResult(scene_id=scene.id, out_dir=out_dir, outputs=outputs, manifest=manifest)


def _finish_all(writers: list[AtomicRaster]) -> None:
    """Close every writer; COG conversions run side by side (GDAL works outside the GIL)."""
    from concurrent.futures import ThreadPoolExecutor

    if not any(w.cog for w in writers):
        for w in writers:
            w.finish()
        return
    with ThreadPoolExecutor(max_workers=min(len(writers), os.cpu_count() or 1)) as pool:
        list(pool.map(AtomicRaster.finish, writers))  # re-raises the first failure


def _write_stac(
    scene: Scene,
    grid: Grid,
    raster_info: dict[str, tuple],
    outputs: dict[str, Path],
    out_dir: Path,
    cog: bool,
) -> Path:
    """The scene's STAC Item: the committed outputs, and the manifest written right after it."""
    from ..io.cloud import stac_item, write_stac_item

    files = [p.name for p in outputs.values() if p.suffix != ".tif"] + ["manifest.json"]
    item = stac_item(
        scene.id, scene.acquired_utc, grid, raster_info, files, cog, dt.datetime.now(dt.UTC)
    )
    return write_stac_item(item, out_dir / f"{scene.id}.stac.json")


def _anchor_xy(grid: Grid, anchor: anchor_method.Anchor) -> dict:
    x, y = _map_xy(grid, anchor.row + 0.5, anchor.col + 0.5)
    return {"x": x, "y": y}


def _map_xy(grid: Grid, row: float, col: float) -> tuple[float, float]:
    """Map coordinates of a (fractional) pixel position on a north-up grid."""
    t = grid.transform
    return t.c + col * t.a, t.f + row * t.e


def _json_default(value):
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, Path):
        return str(value)
    if isinstance(value, dt.datetime):
        return value.isoformat()
    raise TypeError(f"cannot serialise {type(value).__name__}")
