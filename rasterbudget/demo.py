"""Deterministic generator of the tiny demo rasters.

The demo scene is an invented region, the "Kessendry Basin": a valley floor at about 1550 m with
irrigated and rainfed fields, fallow land, a dry wash, a reservoir and a small town, rising to a
mountain in the north-east corner (about 3300 m) with forest on its slopes and snow on its top.
No real place is depicted; the map coordinates (UTM zone 13N, about 40 deg N, 105.2 deg W) only set
the sun's geometry for the overpass time.

:func:`make_tiny_rasters` writes, for two summer dates, broadband albedo, land-surface temperature
and NDVI, plus land cover and elevation, as tiled, deflate-compressed GeoTIFFs. The same seed
always gives the same bytes: every random number comes from one ``numpy.random.default_rng(seed)``
drawn in a fixed order, and no time-dependent metadata is written. (Across platforms, last-bit
differences in floating-point library functions could in rare cases flip a rounded value.)

Deliberate defects for the quality-assurance code paths:

- a patch of 30 missing (NaN) pixels in the early-summer albedo;
- a stripe of 20 missing (NaN) pixels, one row, in the late-summer surface temperature;
- 20 pixels in one grassland field with albedo about 0.40, above the grassland ``albedo_max``.

Land cover changes between the dates only where snow melted: late-summer snow is a subset of the
early-summer snow, the rest became bare rock or alpine grassland. ``land_cover.tif`` holds the
early-summer map, ``land_cover_20260823.tif`` the late-summer one.
"""

from __future__ import annotations

import datetime as _dt
import math
import os
import pathlib
import secrets
import tomllib
from dataclasses import dataclass
from importlib import resources

import numpy as np
import rasterio
from rasterio.crs import CRS
from rasterio.transform import Affine
from rasterio.warp import transform as _transform_coords
from scipy import ndimage

from .errors import ClassTableError

__all__ = [
    "DEMO_DATES",
    "DEMO_OVERPASS_UTC",
    "DEMO_REGION",
    "make_tiny_rasters",
]

DEMO_REGION = "Kessendry Basin (invented)"
"""Value of the ``DEMO_REGION`` dataset tag written into every demo raster."""

DEMO_DATES = ("2026-06-14", "2026-08-23")
"""Scene dates (early and late summer), ISO format."""

DEMO_OVERPASS_UTC = "17:50"
"""Overpass time of both scenes [UTC, HH:MM]; late morning local solar time."""

_ROWS, _COLS = 300, 400
_PIXEL_SIZE = 30.0  # [m]
_ORIGIN_X, _ORIGIN_Y = 480_000.0, 4_430_000.0  # upper-left corner [m]
_EPSG = 32613  # WGS 84 / UTM zone 13N
_TRANSFORM = Affine(_PIXEL_SIZE, 0.0, _ORIGIN_X, 0.0, -_PIXEL_SIZE, _ORIGIN_Y)

_VALLEY_ELEVATION = 1550.0  # [m] reference elevation of the valley floor
_LAPSE_RATE = 6.5e-3  # [K m-1] decrease of surface temperature with elevation
_SNOW_CAP = 273.5  # [K] snow surface temperature never exceeds this (melting snow)
_ELEVATION_NODATA = -9999.0
_SNOW_LINE = (3050.0, 3170.0)  # [m] mean snow line on the two dates


@dataclass(frozen=True)
class _ClassLook:
    """Typical surface values of one land-cover class on the two dates, and their spread.

    albedo, ndvi, lst: typical value on (early, late) summer date [-], [-], [K] at the valley floor.
    albedo_sd: albedo decrease per unit of the "darkness" field [-].
    ndvi_sd: NDVI decrease per unit of the "dryness" field [-].
    lst_dry, lst_dark: LST increase per unit of the dryness and darkness fields [K].
    slope_gain: LST increase per unit of (cos incidence - cos zenith) on sloping ground [K].
    """

    albedo: tuple[float, float]
    ndvi: tuple[float, float]
    lst: tuple[float, float]
    albedo_sd: float
    ndvi_sd: float
    lst_dry: float
    lst_dark: float
    slope_gain: float


# Invented but plausible summer values for a semi-arid basin at 1.5-3.3 km elevation.
# Typical values on (early, late) summer date: albedo [-], NDVI [-], LST at the valley floor [K].
# Snow temperature is set near the snow line (not the valley floor), capped at _SNOW_CAP.
_TYPICAL: dict[str, tuple[tuple[float, float], ...]] = {
    "irrigated_crop": ((0.19, 0.20), (0.80, 0.78), (297.0, 299.0)),
    "rainfed_crop": ((0.20, 0.24), (0.60, 0.30), (303.0, 313.0)),
    "grassland": ((0.19, 0.22), (0.45, 0.28), (305.0, 312.0)),
    "shrubland": ((0.21, 0.22), (0.25, 0.22), (312.0, 316.0)),
    "bare_soil": ((0.28, 0.30), (0.10, 0.10), (322.0, 327.0)),
    "open_water": ((0.06, 0.06), (-0.25, -0.25), (291.0, 294.0)),
    "built_up": ((0.165, 0.165), (0.15, 0.15), (311.0, 315.0)),
    "forest": ((0.11, 0.11), (0.75, 0.75), (295.0, 297.0)),
    "snow_ice": ((0.75, 0.60), (-0.05, -0.05), (272.0, 272.3)),
}
# Spread: albedo_sd, ndvi_sd, lst_dry, lst_dark, slope_gain (see _ClassLook).
_SPREAD: dict[str, tuple[float, float, float, float, float]] = {
    "irrigated_crop": (0.008, 0.035, 1.5, 0.6, 4.0),
    "rainfed_crop": (0.009, 0.06, 2.0, 0.7, 6.0),
    "grassland": (0.009, 0.05, 2.0, 0.7, 8.0),
    "shrubland": (0.009, 0.03, 2.0, 0.8, 10.0),
    "bare_soil": (0.012, 0.02, 2.5, 1.0, 12.0),
    "open_water": (0.004, 0.015, 0.4, 0.1, 0.0),
    "built_up": (0.012, 0.03, 1.5, 0.8, 6.0),
    "forest": (0.006, 0.03, 1.0, 0.5, 6.0),
    "snow_ice": (0.04, 0.015, 0.4, 0.2, 1.0),
}
_LOOKS = {name: _ClassLook(*_TYPICAL[name], *_SPREAD[name]) for name in _TYPICAL}

# Drought response (series only): NDVI loss and surface warming [K] in a dry year (drought = 1).
# Irrigated fields lose little (curtailed deliveries); rainfed crops and rangeland lose most.
_DROUGHT_RESPONSE: dict[str, tuple[float, float]] = {
    "irrigated_crop": (0.03, 1.5),
    "rainfed_crop": (0.15, 8.0),
    "grassland": (0.12, 7.0),
    "shrubland": (0.06, 6.0),
    "bare_soil": (0.0, 1.0),
    "open_water": (0.0, 0.3),
    "built_up": (0.0, 1.0),
    "forest": (0.03, 2.5),
    "snow_ice": (0.0, 0.0),
}

_FALLOW_ALBEDO = (0.24, 0.25)  # fallow fields are darker than the dry wash and the rock [-]
_FALLOW_WARMING = 40.0  # [K per unit albedo] darker fallow soil runs hotter than bright sand
_ROAD_EFFECT = (-0.01, -0.05, 2.0)  # road pixels in town: albedo, NDVI, LST offsets
_OUTLIER_ALBEDO = 0.40  # planted out-of-range grassland albedo [-]


@dataclass(frozen=True)
class _ClassRow:
    code: int
    albedo_min: float
    albedo_max: float


def _load_classes() -> dict[str, _ClassRow]:
    """Read codes and albedo ranges from the package's default class table."""
    text = resources.files("rasterbudget").joinpath("data/classes.toml").read_text("utf-8")
    table = tomllib.loads(text)
    rows = {
        entry["name"]: _ClassRow(
            int(entry["code"]), float(entry["albedo_min"]), float(entry["albedo_max"])
        )
        for entry in table["class"]
    }
    missing = sorted(set(_LOOKS) - set(rows))
    if missing:
        raise ClassTableError(
            f"The package class table classes.toml lacks the demo classes {missing}; "
            "restore the default table shipped with rasterbudget."
        )
    return rows


# --------------------------------------------------------------------------- random fields


def _smooth(rng: np.random.Generator, sigma: float) -> np.ndarray:
    """Gaussian-smoothed white noise with zero mean and unit standard deviation."""
    field = ndimage.gaussian_filter(rng.standard_normal((_ROWS, _COLS)), sigma, mode="reflect")
    return (field - field.mean()) / field.std()


def _unit(field: np.ndarray) -> np.ndarray:
    return (field - field.mean()) / field.std()


# --------------------------------------------------------------------------- terrain


def _elevation(rng: np.random.Generator) -> np.ndarray:
    """Valley floor in the south and centre, a mountain in the north-east, hills in the west [m]."""
    row, col = np.mgrid[0:_ROWS, 0:_COLS].astype(float)
    # Mountain: a slightly elongated dome peaking near the north-east corner.
    warp = 12.0 * _smooth(rng, 25)
    dist = np.hypot((row - 18.0) * 1.1, (col - 382.0) * 0.95) + warp
    mountain = 1700.0 * np.exp(-((np.maximum(dist, 0.0) / 95.0) ** 2.2))
    ridges = 50.0 * _smooth(rng, 6) * np.clip(mountain / 900.0, 0.0, 1.0)
    # Western hills, a low shrub-covered rise.
    hills = 360.0 / (1.0 + np.exp((col - 45.0 + 15.0 * _smooth(rng, 20)) / 12.0))
    hills += 40.0 * _smooth(rng, 8) * (hills / 360.0)
    # Valley floor: gentle slope down to the south-west, a few metres of relief.
    floor = 1542.0 + 0.05 * (_ROWS - 1 - row) + 0.02 * col + 2.0 * _smooth(rng, 10)
    return floor + mountain + ridges + hills


def _sun_vector(date: str, lat: float, lon: float) -> np.ndarray:
    """Unit vector towards the sun (east, north, up) at the overpass, FAO-56 eqs 24, 31-33.

    Allen, R. G., Pereira, L. S., Raes, D., Smith, M. (1998) Crop evapotranspiration, FAO
    Irrigation and Drainage Paper 56. Good enough for the demo's slope illumination effect.
    """
    day = _dt.date.fromisoformat(date).timetuple().tm_yday
    hour, minute = (int(part) for part in DEMO_OVERPASS_UTC.split(":"))
    decl = 0.409 * math.sin(2 * math.pi * day / 365 - 1.39)  # eq 24
    b = 2 * math.pi * (day - 81) / 364  # eq 33
    sc = 0.1645 * math.sin(2 * b) - 0.1255 * math.cos(b) - 0.025 * math.sin(b)  # eq 32
    solar_time = hour + minute / 60 + lon / 15 + sc  # [h]; longitude east positive
    omega = math.pi / 12 * (solar_time - 12)  # eq 31
    phi = math.radians(lat)
    east = -math.cos(decl) * math.sin(omega)
    north = math.sin(decl) * math.cos(phi) - math.cos(decl) * math.sin(phi) * math.cos(omega)
    up = math.sin(decl) * math.sin(phi) + math.cos(decl) * math.cos(phi) * math.cos(omega)
    return np.array([east, north, up])


def _illumination(elevation: np.ndarray, sun: np.ndarray) -> np.ndarray:
    """cos(incidence) - cos(zenith) for each pixel: positive on slopes facing the sun [-]."""
    z = ndimage.gaussian_filter(elevation, 1.5, mode="nearest")
    dz_drow, dz_dcol = np.gradient(z, _PIXEL_SIZE)
    normal = np.stack([-dz_dcol, dz_drow, np.ones_like(z)])  # rows run southwards
    normal /= np.linalg.norm(normal, axis=0)
    cos_i = np.tensordot(sun, normal, axes=1)
    return cos_i - sun[2]


# --------------------------------------------------------------------------- land cover


@dataclass
class _Layout:
    """Land cover of both dates plus the bits the value generator needs."""

    codes: tuple[np.ndarray, np.ndarray]  # early and late summer land cover
    field_id: np.ndarray  # 0 outside fields, 1.. inside; lets each field get its own state
    n_fields: int
    fallow: np.ndarray  # bool, bare-soil fields
    road: np.ndarray  # bool, town streets
    outliers: np.ndarray  # bool, planted out-of-range albedo pixels
    albedo_gap: np.ndarray  # bool, missing early-summer albedo
    lst_gap: np.ndarray  # bool, missing late-summer surface temperature
    snow_lines: tuple[np.ndarray, np.ndarray]  # [m] snow line fields on the two dates
    melt_to_rock: np.ndarray  # bool, melted snow becomes rock (else alpine grassland)


def _layout(
    rng: np.random.Generator, elevation: np.ndarray, classes: dict[str, _ClassRow]
) -> tuple[_Layout, np.ndarray]:
    """Build the land cover; returns the layout and the (slightly edited) elevation."""
    code = {name: row.code for name, row in classes.items()}
    row, col = np.mgrid[0:_ROWS, 0:_COLS]
    elevation = elevation.copy()

    # Natural cover by elevation, with noisy class boundaries.
    patch = _smooth(rng, 7)
    clearing = _smooth(rng, 5)
    forest_low = 2300.0 + 60.0 * _smooth(rng, 10)
    forest_high = 3000.0 + 40.0 * _smooth(rng, 10)
    snow_line_june = _SNOW_LINE[0] + 30.0 * _smooth(rng, 6)
    snow_line_august = _SNOW_LINE[1] + 30.0 * _smooth(rng, 6)
    melt_to_rock = _smooth(rng, 4) > -0.2

    lc = np.full((_ROWS, _COLS), code["shrubland"], dtype=np.uint8)
    lc[patch > 0.9] = code["grassland"]
    forest = (elevation >= forest_low) & (elevation < forest_high)
    lc[forest] = code["forest"]
    lc[forest & (clearing > 1.6)] = code["grassland"]
    alpine = elevation >= forest_high
    lc[alpine] = np.where(patch[alpine] > 0.3, code["bare_soil"], code["grassland"])
    lc[elevation >= snow_line_june] = code["snow_ice"]

    # Dry wash: a meandering sandy channel from the foothills to the southern edge.
    wash_rows = np.arange(95, _ROWS)
    wash_col = (
        250.0
        - 0.95 * (wash_rows - 95)
        + 9.0 * np.sin(wash_rows / 11.0)
        + 4.0 * np.sin(wash_rows / 4.3 + 1.0)
    )
    wash = np.zeros((_ROWS, _COLS), dtype=bool)
    for r, c in zip(wash_rows.tolist(), wash_col.tolist(), strict=True):
        half = 1.6 + 0.8 * math.sin(r / 7.0)
        wash[r, max(round(c - half), 0) : round(c + half) + 1] = True
    wash = ndimage.binary_closing(wash, iterations=1) | wash

    # Fields on the valley floor: a grid of rectangles, 1-pixel grass margins between them.
    farmland = (elevation < 1640.0) & (col > 62) & ~ndimage.binary_dilation(wash, iterations=2)
    field_id = np.zeros((_ROWS, _COLS), dtype=np.int32)
    fallow = np.zeros((_ROWS, _COLS), dtype=bool)
    grass_fields: list[tuple[int, int, int, int]] = []
    n_fields = 0
    r0 = 95
    while r0 < _ROWS:
        height = int(rng.choice([20, 27, 27, 34]))
        c0 = 60
        while c0 < _COLS:
            width = int(rng.choice([20, 27, 27, 34]))
            kind = float(rng.random())
            pivot_draw = float(rng.random())
            corner_draw = float(rng.random())
            r1, c1 = min(r0 + height, _ROWS), min(c0 + width, _COLS)
            inner = (slice(r0 + 1, r1), slice(c0 + 1, c1))
            if (r1 - r0) > 10 and (c1 - c0) > 10 and farmland[r0:r1, c0:c1].all():
                lc[r0:r1, c0:c1] = code["grassland"]  # margins
                n_fields += 1
                field_id[inner] = n_fields
                if kind < 0.34:
                    lc[inner] = code["irrigated_crop"]
                    square = abs((r1 - r0) - (c1 - c0)) <= 2 and (r1 - r0) >= 27
                    if square and pivot_draw < 0.7:
                        rr, cc = row[inner], col[inner]
                        radius = (min(r1 - r0, c1 - c0) - 1) / 2.0
                        centre_r, centre_c = (r0 + 1 + r1 - 1) / 2.0, (c0 + 1 + c1 - 1) / 2.0
                        outside = np.hypot(rr - centre_r, cc - centre_c) > radius
                        corner = code["rainfed_crop"] if corner_draw < 0.5 else code["grassland"]
                        block = lc[inner]
                        block[outside] = corner
                elif kind < 0.68:
                    lc[inner] = code["rainfed_crop"]
                elif kind < 0.84:
                    lc[inner] = code["bare_soil"]
                    fallow[inner] = True
                else:
                    lc[inner] = code["grassland"]
                    grass_fields.append((r0 + 1, r1, c0 + 1, c1))
            c0 += width
        r0 += height

    lc[wash] = code["bare_soil"]  # fields keep clear of the wash; shrubs line its banks
    elevation[wash] -= 2.5

    # Reservoir with a ragged shore, a flat water surface.
    lake = (np.hypot((row - 182.0) / 10.0, (col - 318.0) / 15.0) + 0.08 * _smooth(rng, 3)) < 1.0
    lake = ndimage.binary_opening(lake, iterations=1)
    lc[lake] = code["open_water"]
    fallow[lake] = False
    field_id[lake] = 0
    elevation[lake] = np.floor(elevation[lake].min()) - 1.0

    # Town: blocks with a street every sixth row and column, and two roads out of town.
    town = (slice(196, 224), slice(150, 181))
    lc[town] = code["built_up"]
    road = np.zeros((_ROWS, _COLS), dtype=bool)
    tr, tc = row[town], col[town]
    road[town] = ((tr - 196) % 6 == 0) | ((tc - 150) % 6 == 0)
    lc[210, 181:_COLS] = code["built_up"]  # road east, along the field margins
    road[210, 181:_COLS] = True
    lc[224:_ROWS, 165] = code["built_up"]  # road south
    road[224:_ROWS, 165] = True
    for mask in (town, (210, slice(181, _COLS)), (slice(224, _ROWS), 165)):
        fallow[mask] = False
        field_id[mask] = 0
    lc[lake] = code["open_water"]  # the road does not cross the reservoir
    road &= lc == code["built_up"]

    # Late summer: snow above the higher snow line; melted snow becomes rock or meadow.
    lc_august = lc.copy()
    melted = (lc == code["snow_ice"]) & (elevation < snow_line_august)
    lc_august[melted] = np.where(melt_to_rock[melted], code["bare_soil"], code["grassland"])

    # Planted defects. Out-of-range albedo: a 4 x 5 block inside the largest grassland field.
    outliers = np.zeros((_ROWS, _COLS), dtype=bool)
    for gr0, gr1, gc0, gc1 in sorted(grass_fields, key=lambda f: (f[0] - f[1]) * (f[3] - f[2])):
        orow, ocol = (gr0 + gr1) // 2 - 2, (gc0 + gc1) // 2 - 2
        block = (slice(orow, orow + 4), slice(ocol, ocol + 5))
        if (lc[block] == code["grassland"]).all():
            outliers[block] = True
            break
    # Missing albedo: a 5 x 6 patch in the valley; missing LST: one row of 20 pixels.
    albedo_gap = np.zeros((_ROWS, _COLS), dtype=bool)
    albedo_gap[251:256, 231:237] = True
    lst_gap = np.zeros((_ROWS, _COLS), dtype=bool)
    lst_gap[164, 110:130] = True

    layout = _Layout(
        codes=(lc, lc_august),
        field_id=field_id,
        n_fields=n_fields,
        fallow=fallow,
        road=road,
        outliers=outliers,
        albedo_gap=albedo_gap,
        lst_gap=lst_gap,
        snow_lines=(snow_line_june, snow_line_august),
        melt_to_rock=melt_to_rock,
    )
    return layout, elevation


# --------------------------------------------------------------------------- surface values


def _between(pair: tuple[float, float], phase: float) -> float:
    """Value at season phase ``phase`` (0 early summer, 1 late summer; exact at both ends)."""
    return (1.0 - phase) * pair[0] + phase * pair[1]


def _scene_values(
    rng: np.random.Generator,
    layout: _Layout,
    elevation: np.ndarray,
    classes: dict[str, _ClassRow],
    lc: np.ndarray,
    phase: float,
    field_state: np.ndarray,
    illumination: np.ndarray,
    drought: float = 0.0,
) -> dict[str, np.ndarray]:
    """Albedo, NDVI and LST of one date, consistent with land cover and terrain.

    ``phase`` places the date in the season (0 early, 1 late summer; values between and a little
    beyond interpolate the class looks linearly); ``drought`` (0 normal, 1 a dry year) lowers
    NDVI and warms the surface by each class's ``_DROUGHT_RESPONSE``.
    """
    # Latent fields: "dry" (less water, lower NDVI, hotter) and "dark" (lower albedo, hotter).
    dry = _unit(
        0.55 * _smooth(rng, 12)
        + 0.45 * field_state[layout.field_id]
        + 0.35 * rng.standard_normal(lc.shape)
    )
    dark = _unit(0.6 * _smooth(rng, 6) + 0.8 * rng.standard_normal(lc.shape))
    albedo_noise = 0.003 * rng.standard_normal(lc.shape)
    ndvi_noise = 0.01 * rng.standard_normal(lc.shape)
    lst_noise = 0.3 * rng.standard_normal(lc.shape)

    albedo = np.empty(lc.shape)
    ndvi = np.empty(lc.shape)
    lst = np.empty(lc.shape)
    above_floor = elevation - _VALLEY_ELEVATION
    for name, look in _LOOKS.items():
        mask = lc == classes[name].code
        typical_albedo = _between(look.albedo, phase)
        base_albedo = np.full(lc.shape, typical_albedo)
        base_lst = np.full(lc.shape, _between(look.lst, phase))
        if name == "bare_soil":
            base_albedo[layout.fallow] = _between(_FALLOW_ALBEDO, phase)
            base_lst += _FALLOW_WARMING * (typical_albedo - base_albedo)
        ndvi_loss, warming = _DROUGHT_RESPONSE[name]
        albedo[mask] = base_albedo[mask] - look.albedo_sd * dark[mask] + albedo_noise[mask]
        ndvi[mask] = (
            _between(look.ndvi, phase) - look.ndvi_sd * dry[mask] + ndvi_noise[mask]
        ) - ndvi_loss * drought
        lst[mask] = (
            base_lst[mask]
            + look.lst_dry * dry[mask]
            + look.lst_dark * dark[mask]
            + look.slope_gain * illumination[mask]
            + lst_noise[mask]
        ) + warming * drought
        if name == "snow_ice":
            # Lapse from 100 m above the snow line, then a smooth cap just above melting point.
            snow_line = _between(_SNOW_LINE, phase)
            raw = lst[mask] - _LAPSE_RATE * (elevation[mask] - snow_line - 100.0)
            width = 0.5
            lst[mask] = _SNOW_CAP - width * np.logaddexp(0.0, (_SNOW_CAP - raw) / width)
        else:
            lst[mask] -= _LAPSE_RATE * above_floor[mask]
        lo, hi = classes[name].albedo_min, classes[name].albedo_max
        albedo[mask] = np.clip(albedo[mask], lo, hi)

    d_albedo, d_ndvi, d_lst = _ROAD_EFFECT
    albedo[layout.road] += d_albedo
    ndvi[layout.road] += d_ndvi
    lst[layout.road] += d_lst
    built = classes["built_up"]
    albedo[layout.road] = np.clip(albedo[layout.road], built.albedo_min, built.albedo_max)

    albedo[layout.outliers] = _OUTLIER_ALBEDO + albedo_noise[layout.outliers]
    ndvi = np.clip(ndvi, -1.0, 1.0)

    albedo = np.round(albedo, 3).astype(np.float32)
    ndvi = np.round(ndvi, 3).astype(np.float32)
    lst = np.round(lst, 2).astype(np.float32)
    return {"albedo": albedo, "surface_temperature": lst, "ndvi": ndvi}


# --------------------------------------------------------------------------- writing


def _write_geotiff(
    path: pathlib.Path,
    array: np.ndarray,
    *,
    nodata: float,
    description: str,
    units: str,
    tags: dict[str, str],
    transform: Affine = _TRANSFORM,
    block: int = 256,
) -> None:
    """Write one band to a temporary file in the target folder, then rename it into place."""
    is_float = np.issubdtype(array.dtype, np.floating)
    profile = {
        "driver": "GTiff",
        "height": array.shape[0],
        "width": array.shape[1],
        "count": 1,
        "dtype": array.dtype.name,
        "crs": CRS.from_epsg(_EPSG),
        "transform": transform,
        "nodata": nodata,
        "tiled": True,
        "blockxsize": block,
        "blockysize": block,
        "compress": "deflate",
        "predictor": 3 if is_float else 2,
    }
    # A unique hidden name in the same folder, so os.replace is atomic; GDAL creates the file
    # itself, so it gets the usual permissions.
    tmp = path.with_name(f".{path.name}.{os.getpid()}-{secrets.token_hex(4)}.partial")
    try:
        with rasterio.open(tmp, "w", **profile) as dst:
            dst.write(array, 1)
            dst.set_band_description(1, description)
            dst.update_tags(DEMO_REGION=DEMO_REGION, **tags)
            dst.update_tags(1, units=units)
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise


DEMO_SEED = 20260612
"""Seed of the demo region (terrain, land cover, fields)."""


def _region(
    seed: int,
) -> tuple[dict[str, _ClassRow], np.random.Generator, _Layout, np.ndarray, tuple[float, float]]:
    """Classes, the generator after the layout draws, layout, elevation [m] and centre lon/lat."""
    classes = _load_classes()
    rng = np.random.default_rng(seed)
    elevation = _elevation(rng)
    layout, elevation = _layout(rng, elevation, classes)
    elevation = np.round(elevation, 1).astype(np.float32)
    centre_x = _ORIGIN_X + _PIXEL_SIZE * _COLS / 2
    centre_y = _ORIGIN_Y - _PIXEL_SIZE * _ROWS / 2
    lons, lats = _transform_coords(
        CRS.from_epsg(_EPSG), CRS.from_epsg(4326), [centre_x], [centre_y]
    )
    return classes, rng, layout, elevation, (float(lons[0]), float(lats[0]))


def make_tiny_rasters(out_dir: pathlib.Path, seed: int = DEMO_SEED) -> list[pathlib.Path]:
    """Write the demo rasters of the invented Kessendry Basin into ``out_dir``.

    Parameters
    ----------
    out_dir
        Folder to write into; created if missing. Existing demo files are replaced.
    seed
        Seed of the random generator. The same seed always gives byte-identical files.

    Returns
    -------
    list of pathlib.Path
        The files written: ``land_cover.tif`` (early summer), ``land_cover_20260823.tif``,
        ``elevation.tif``, then per date ``albedo_YYYYMMDD.tif``,
        ``surface_temperature_YYYYMMDD.tif`` and ``ndvi_YYYYMMDD.tif``.

    Notes
    -----
    Grid: 300 rows x 400 columns of 30 m pixels in EPSG:32613, upper-left corner at
    (480000, 4430000) m. Land cover is uint8 with nodata 0 (codes from the package's
    ``classes.toml``); elevation is float32 [m] with nodata -9999; albedo [-], surface temperature
    [K] and NDVI [-] are float32 with nodata NaN. Both scenes are at 17:50 UTC.
    """
    out_dir = pathlib.Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    classes, rng, layout, elevation, (lon, lat) = _region(seed)

    # Each field keeps part of its water state from June to August.
    state_june = np.concatenate([[0.0], rng.standard_normal(layout.n_fields)])
    state_august = 0.6 * state_june + 0.8 * np.concatenate(
        [[0.0], rng.standard_normal(layout.n_fields)]
    )

    written: list[pathlib.Path] = []

    def emit(name: str, array: np.ndarray, nodata: float, description: str, units: str, **tags):
        path = out_dir / f"{name}.tif"
        _write_geotiff(path, array, nodata=nodata, description=description, units=units, tags=tags)
        written.append(path)

    emit("land_cover", layout.codes[0], 0, "land_cover", "class code", DEMO_DATE=DEMO_DATES[0])
    emit(
        f"land_cover_{DEMO_DATES[1].replace('-', '')}",
        layout.codes[1],
        0,
        "land_cover",
        "class code",
        DEMO_DATE=DEMO_DATES[1],
    )
    emit("elevation", elevation, _ELEVATION_NODATA, "elevation", "m")

    units = {"albedo": "1", "surface_temperature": "K", "ndvi": "1"}
    for index, (date, state) in enumerate(zip(DEMO_DATES, (state_june, state_august), strict=True)):
        sun = _sun_vector(date, lat, lon)
        illumination = _illumination(elevation.astype(float), sun)
        values = _scene_values(
            rng, layout, elevation, classes, layout.codes[index], float(index), state, illumination
        )
        if index == 0:
            values["albedo"][layout.albedo_gap] = np.nan
        else:
            values["surface_temperature"][layout.lst_gap] = np.nan
        stamp = date.replace("-", "")
        for name, array in values.items():
            emit(
                f"{name}_{stamp}",
                array,
                float("nan"),
                name,
                units[name],
                DEMO_DATE=date,
                DEMO_OVERPASS_UTC=f"{date}T{DEMO_OVERPASS_UTC}:00Z",
            )
    return written


def make_mixed_grid_inputs(tiny_dir: pathlib.Path) -> list[pathlib.Path]:
    """Inputs "as they come", derived from the early-summer demo scene into ``tiny_dir/mixed``.

    - ``albedo_u16.tif``: albedo x 10000 as uint16 with nodata 0 and a 0.0001 scale factor in the
      file's metadata (the target grid: 30 m, EPSG:32613).
    - ``surface_temperature_90m.tif``: surface temperature averaged to 90 m on a grid shifted by
      half a pixel (EPSG:32613), as a thermal band arrives.
    - ``land_cover_geographic.tif``: land cover in geographic coordinates (EPSG:4326), nearest.
    - ``qa_bits.tif``: a bit-packed uint16 QA band; bit 3 marks an invented cloud over the west
      of the scene, bit 4 its shadow, bit 1 a flag to keep.
    """
    from rasterio.warp import Resampling, reproject

    out = tiny_dir / "mixed"
    out.mkdir(parents=True, exist_ok=True)
    written = []
    with rasterio.open(tiny_dir / "albedo_20260614.tif") as src:
        albedo, profile = src.read(1), src.profile
    scaled = np.where(np.isfinite(albedo), np.round(albedo * 10000.0), 0).astype(np.uint16)
    u16 = profile | {"dtype": "uint16", "nodata": 0, "predictor": 2}
    path = out / "albedo_u16.tif"
    with rasterio.open(path, "w", **u16) as dst:
        dst.write(scaled, 1)
        dst.scales = (0.0001,)
        dst.update_tags(1, units="1")
    written.append(path)

    with rasterio.open(tiny_dir / "surface_temperature_20260614.tif") as src:
        t = src.transform
        coarse = Affine(t.a * 3, 0, t.c - 15.0, 0, t.e * 3, t.f + 15.0)
        width, height = src.width // 3 + 1, src.height // 3 + 1
        lst = np.full((height, width), np.nan, dtype=np.float32)
        reproject(
            rasterio.band(src, 1),
            lst,
            dst_transform=coarse,
            dst_crs=src.crs,
            dst_nodata=np.nan,
            resampling=Resampling.average,
        )
        path = out / "surface_temperature_90m.tif"
        with rasterio.open(
            path, "w", **(src.profile | {"transform": coarse, "width": width, "height": height})
        ) as dst:
            dst.write(np.round(lst, 2), 1)
        written.append(path)

    with rasterio.open(tiny_dir / "land_cover.tif") as src:
        from rasterio.warp import calculate_default_transform

        geo = CRS.from_epsg(4326)
        transform, width, height = calculate_default_transform(
            src.crs, geo, src.width, src.height, *src.bounds
        )
        codes = np.zeros((height, width), dtype=np.uint8)
        reproject(
            rasterio.band(src, 1),
            codes,
            dst_transform=transform,
            dst_crs=geo,
            dst_nodata=0,
            resampling=Resampling.nearest,
        )
        path = out / "land_cover_geographic.tif"
        with rasterio.open(
            path,
            "w",
            **(
                src.profile | {"crs": geo, "transform": transform, "width": width, "height": height}
            ),
        ) as dst:
            dst.write(codes, 1)
        written.append(path)

    qa = np.zeros(albedo.shape, dtype=np.uint16)
    rows, cols = np.mgrid[0 : albedo.shape[0], 0 : albedo.shape[1]]
    cloud = (rows - 200) ** 2 / 30.0**2 + (cols - 60) ** 2 / 45.0**2 < 1.0
    shadow = (rows - 215) ** 2 / 25.0**2 + (cols - 95) ** 2 / 35.0**2 < 1.0
    qa[cloud] |= 1 << 3
    qa[shadow & ~cloud] |= 1 << 4
    qa[::7, ::7] |= 1 << 1
    path = out / "qa_bits.tif"
    with rasterio.open(
        path, "w", **(profile | {"dtype": "uint16", "nodata": None, "predictor": 2})
    ) as dst:
        dst.write(qa, 1)
    written.append(path)
    return written


def _daily_weather_rows(year: int, drought: float = 0.0) -> list[dict[str, float | str]]:
    """Invented daily weather of the demo station, 1 May to 30 September of ``year``.

    A smooth seasonal cycle plus seeded day-to-day noise and a few cloudy days; ``drought`` (0
    normal, 1 a dry year) makes days hotter, drier, sunnier and windier.
    """
    rng = np.random.default_rng(year)
    start, end = _dt.date(year, 5, 1), _dt.date(year, 9, 30)
    rows: list[dict[str, float | str]] = []
    day = start
    while day <= end:
        phase = math.cos(2 * math.pi * (day.timetuple().tm_yday - 200) / 365.0)
        # Satellite scenes see clear skies: the series' scene dates are never cloudy.
        cloudy = rng.random() < 0.12 * (1.0 - 0.5 * drought) and day.strftime("%m-%d") not in (
            SERIES_DAYS if year in SERIES_YEARS else ()
        )
        tmax = 24.0 + 8.0 * phase + rng.normal(0, 1.5) - (4.0 if cloudy else 0.0) + 1.0 * drought
        tmin = tmax - 17.0 + rng.normal(0, 1.5) + (4.0 if cloudy else 0.0) - 1.0 * drought
        rh_max = min(98.0, 60.0 + rng.normal(0, 6) + (20.0 if cloudy else 0.0) - 3.0 * drought)
        rh_min = max(
            8.0,
            min(rh_max - 10.0, 18.0 + rng.normal(0, 4) + (25 if cloudy else 0) - 2.0 * drought),
        )
        wind = max(0.6, 2.6 + rng.normal(0, 0.7))
        rs = (30.5 * (0.82 + 0.18 * phase)) * (0.45 if cloudy else 1.0) + rng.normal(0, 0.8)
        rows.append(
            {
                "date": day.isoformat(),
                "tmax_c": round(tmax, 1),
                "tmin_c": round(tmin, 1),
                "rh_max_pct": round(rh_max),
                "rh_min_pct": round(rh_min),
                "wind_speed_m_s": round(wind, 1),
                "shortwave_mj_m2": round(rs, 1),
            }
        )
        day += _dt.timedelta(days=1)
    return rows


def make_daily_weather(out_dir: pathlib.Path, year: int = 2026) -> pathlib.Path:
    """Write ``daily_weather_<year>.csv``: the invented station's daily weather, May-September.

    Columns: date, tmax_c, tmin_c, rh_max_pct, rh_min_pct, wind_speed_m_s (at 2 m) and
    shortwave_mj_m2. Years of the season series (``SERIES_YEARS``) carry their drought level.
    """
    rows = _daily_weather_rows(year, SERIES_YEARS.get(year, 0.0))
    header = "date,tmax_c,tmin_c,rh_max_pct,rh_min_pct,wind_speed_m_s,shortwave_mj_m2"
    lines = [header]
    for r in rows:
        lines.append(
            f"{r['date']},{r['tmax_c']:.1f},{r['tmin_c']:.1f},{r['rh_max_pct']:.0f},"
            f"{r['rh_min_pct']:.0f},{r['wind_speed_m_s']:.1f},{r['shortwave_mj_m2']:.1f}"
        )
    path = out_dir / f"daily_weather_{year}.csv"
    tmp = path.with_name(path.name + ".partial")
    tmp.write_text("\n".join(lines) + "\n")
    os.replace(tmp, path)
    return path


# --------------------------------------------------------------------------- season series

SERIES_YEARS: dict[int, float] = {2022: 0.15, 2023: -0.25, 2024: 0.3, 2025: 1.0, 2026: 0.0}
"""Years of the season series and their drought level (0 normal, 1 the dry year 2025)."""

SERIES_DRY_YEAR = 2025

SERIES_DAYS = ("06-06", "06-30", "07-24", "08-17", "09-10")
"""Month-day of the five series scenes, the same in every year (a 24-day revisit)."""

SERIES_SEASON = ("06-01", "09-15")
"""First and last day (month-day) of each year's season total."""

SERIES_FACTOR = 3
"""The series is on a 90 m grid: 3 x 3 blocks of the 30 m region, as from a thermal sensor."""

# Clouds masked out of some series scenes (NaN in every band): date -> (row, col, radius) at 30 m.
_SERIES_CLOUDS: dict[str, tuple[float, float, float]] = {
    "2025-06-30": (150.0, 200.0, 40.0),
    "2026-07-24": (230.0, 120.0, 35.0),
    "2023-08-17": (120.0, 300.0, 30.0),
}


def _phase(date: _dt.date) -> float:
    """Season phase of a date: 0 on 14 June, 1 on 23 August, linear in day of year."""
    june, august = (_dt.date.fromisoformat(d).timetuple().tm_yday for d in DEMO_DATES)
    return (date.timetuple().tm_yday - june) / (august - june)


def _land_cover_at(
    layout: _Layout, elevation: np.ndarray, classes: dict[str, _ClassRow], phase: float
) -> np.ndarray:
    """Land cover at a season phase: snow above the interpolated snow line, melt as in August."""
    lc = layout.codes[0].copy()
    p = max(phase, 0.0)
    line = (1.0 - p) * layout.snow_lines[0] + p * layout.snow_lines[1]
    melted = (lc == classes["snow_ice"].code) & (elevation < line)
    rock, meadow = classes["bare_soil"].code, classes["grassland"].code
    lc[melted] = np.where(layout.melt_to_rock[melted], rock, meadow)
    return lc


def _blocks(array: np.ndarray, factor: int) -> np.ndarray:
    """(rows/f, cols/f, f*f) view of the array's f x f blocks (ragged edges dropped)."""
    rows, cols = array.shape[0] // factor, array.shape[1] // factor
    cut = array[: rows * factor, : cols * factor]
    return cut.reshape(rows, factor, cols, factor).transpose(0, 2, 1, 3).reshape(rows, cols, -1)


def _coarse_mean(array: np.ndarray, factor: int) -> np.ndarray:
    """Block mean of the finite values; NaN where fewer than 5 of 9 are finite."""
    blocks = _blocks(array.astype(np.float64), factor)
    finite = np.isfinite(blocks)
    total = np.where(finite, blocks, 0.0).sum(axis=-1)
    count = finite.sum(axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(count >= (factor * factor + 1) // 2, total / count, np.nan)


def _coarse_mode(codes: np.ndarray, factor: int) -> np.ndarray:
    """Most frequent code of each block (the lowest code on ties)."""
    blocks = _blocks(codes, factor)
    present = np.unique(codes)
    counts = np.stack([(blocks == c).sum(axis=-1) for c in present])
    return present[np.argmax(counts, axis=0)].astype(codes.dtype)


def series_scene_id(date: _dt.date) -> str:
    """Scene id of a series date."""
    return f"kessendry_{date:%Y%m%d}"


def series_dates() -> list[_dt.date]:
    """All series dates, year by year."""
    return [_dt.date.fromisoformat(f"{year}-{md}") for year in SERIES_YEARS for md in SERIES_DAYS]


def make_season_series(tiny_dir: pathlib.Path, seed: int = DEMO_SEED) -> list[pathlib.Path]:
    """Write the 90 m season series of the demo region into ``tiny_dir/series``.

    Five dates (``SERIES_DAYS``) in each of the years of ``SERIES_YEARS``, 2025 a dry year;
    per date ``albedo``, ``surface_temperature``, ``ndvi`` and ``land_cover`` (snow melts through
    the summer) as ``<name>_YYYYMMDD.tif``, plus ``elevation.tif``; a few scenes carry a cloud
    (NaN in every band). Values are the 30 m region's (``make_tiny_rasters``, same seed, same
    terrain and fields) averaged over 3 x 3 blocks, land cover the blocks' most frequent class:
    a 100 x 133 grid of 90 m pixels with the same upper-left corner.
    """
    out = pathlib.Path(tiny_dir) / "series"
    out.mkdir(parents=True, exist_ok=True)
    classes, _, layout, elevation, (lon, lat) = _region(seed)
    f = SERIES_FACTOR
    transform = Affine(_PIXEL_SIZE * f, 0.0, _ORIGIN_X, 0.0, -_PIXEL_SIZE * f, _ORIGIN_Y)
    written: list[pathlib.Path] = []

    def emit(name: str, array: np.ndarray, nodata: float, units: str, **tags: str) -> None:
        path = out / f"{name}.tif"
        _write_geotiff(
            path,
            array,
            nodata=nodata,
            description=name.rsplit("_", 1)[0] if name[-1].isdigit() else name,
            units=units,
            tags=tags,
            transform=transform,
            block=128,
        )
        written.append(path)

    emit("elevation", np.round(_coarse_mean(elevation, f), 1).astype(np.float32), -9999.0, "m")
    rows, cols = np.mgrid[0:_ROWS, 0:_COLS]
    units = {"albedo": "1", "surface_temperature": "K", "ndvi": "1"}
    digits = {"albedo": 3, "surface_temperature": 2, "ndvi": 3}
    for year, drought in SERIES_YEARS.items():
        rng = np.random.default_rng([seed, year])
        state = np.concatenate([[0.0], rng.standard_normal(layout.n_fields)])
        for md in SERIES_DAYS:
            date = _dt.date.fromisoformat(f"{year}-{md}")
            phase = _phase(date)
            lc = _land_cover_at(layout, elevation, classes, phase + 0.6 * drought)
            sun = _sun_vector(date.isoformat(), lat, lon)
            illumination = _illumination(elevation.astype(float), sun)
            values = _scene_values(
                rng, layout, elevation, classes, lc, phase, state, illumination, drought
            )
            cloud = _SERIES_CLOUDS.get(date.isoformat())
            stamp = f"{date:%Y%m%d}"
            tags = {"DEMO_DATE": date.isoformat(), "DEMO_OVERPASS_UTC": f"{date}T17:50:00Z"}
            emit(f"land_cover_{stamp}", _coarse_mode(lc, f), 0, "class code", **tags)
            for name, array in values.items():
                if cloud is not None:
                    r, c, radius = cloud
                    array[np.hypot(rows - r, (cols - c) * 0.8) < radius] = np.nan
                coarse = np.round(_coarse_mean(array, f), digits[name]).astype(np.float32)
                emit(f"{name}_{stamp}", coarse, float("nan"), units[name], **tags)
            # Fields keep part of their water state from one date to the next.
            state = 0.75 * state + 0.66 * np.concatenate(
                [[0.0], rng.standard_normal(layout.n_fields)]
            )
    return written


def _overpass_weather(row: dict[str, float | str]) -> tuple[float, float, float]:
    """Invented overpass (late-morning) air temperature [C], humidity [%] and wind [m/s]."""
    return (
        round(float(row["tmax_c"]) - 3.5, 1),
        float(min(95, int(row["rh_min_pct"]) + 8)),
        round(1.2 * float(row["wind_speed_m_s"]), 1),
    )


def series_recipe_text() -> str:
    """The season-series demo recipe (``workflows/demo_series.toml``), generated from the same
    invented station weather as the series, so the two never drift apart."""
    lines = [
        "# Demo recipe, season series: five scenes a summer over five summers (2022-2026) of the",
        "# invented Kessendry Basin at 90 m (tiny_rasters/series/), 2025 a dry year; a season",
        "# total per year and per-zone water volumes. Generated by rasterbudget.demo.",
        "# series_recipe_text(); weather values are invented for the demo.",
        "# Compare the years afterwards with: rasterbudget compare workflows/demo_compare.toml",
        "",
        "[run]",
        'out = "../out/demo_series"',
        "chunk_size = 64",
        "tile_size = 25",
        "",
        "[defaults]",
        'daily_scaling = "reference_et_fraction"',
        'daily_table = "../tiny_rasters/daily_weather_{year}.csv"  # the row of each date',
        "",
        "[defaults.residual]",
        "max_evaporative_fraction = 1.15",
        "",
        "[defaults.uncertainty]                 # 8 members: p10-p90 of totals, zones, series",
        "members = 8",
        "",
        "[defaults.reference_et]",
        'surface = "tall"',
        "cold_anchor_fraction = 1.0",
        "",
        "[defaults.inputs]                      # {date} is the scene's YYYYMMDD",
        'albedo = "../tiny_rasters/series/albedo_{date}.tif"',
        'surface_temperature = "../tiny_rasters/series/surface_temperature_{date}.tif"',
        'land_cover = "../tiny_rasters/series/land_cover_{date}.tif"',
        'ndvi = "../tiny_rasters/series/ndvi_{date}.tif"',
        'elevation = "../tiny_rasters/series/elevation.tif"',
        "",
        "[defaults.overpass]",
        "station_elevation_m = 1560.0",
        "wind_height_m = 2.0",
    ]
    for year, drought in SERIES_YEARS.items():
        weather = {r["date"]: r for r in _daily_weather_rows(year, drought)}
        lines += ["", f"# {year}" + (" (dry year)" if year == SERIES_DRY_YEAR else "")]
        for md in SERIES_DAYS:
            date = _dt.date.fromisoformat(f"{year}-{md}")
            t, rh, u = _overpass_weather(weather[date.isoformat()])
            lines += [
                "[[scene]]",
                f'id = "{series_scene_id(date)}"',
                f"acquired_utc = {date}T17:52:00Z",
                f"overpass = {{ air_temperature_c = {t}, relative_humidity_pct = {rh}, "
                f"wind_speed_m_s = {u} }}",
            ]
    lines += ["", "[zones]", 'path = "../tiny_rasters/zones.geojson"', 'id_property = "zone_id"']
    start, end = SERIES_SEASON
    for year in SERIES_YEARS:
        ids = ", ".join(
            f'"{series_scene_id(_dt.date.fromisoformat(f"{year}-{md}"))}"' for md in SERIES_DAYS
        )
        lines += [
            "",
            "[[season]]",
            f'id = "summer_{year}"',
            f"start = {year}-{start}",
            f"end = {year}-{end}",
            f"scenes = [{ids}]",
            f'weather = "../tiny_rasters/daily_weather_{year}.csv"',
            'fraction = "reference_et_fraction"',
            'reference = "tall"',
        ]
    return "\n".join(lines) + "\n"


def make_zones(out_dir: pathlib.Path) -> pathlib.Path:
    """Invented zones of the demo region: four fields and two sub-basins (GeoJSON, EPSG:32613).

    Field boundaries are rectangles of the demo's field layout; the sub-basins split the scene
    into a western and an eastern catchment along an invented divide.
    """
    import json

    def box(x0, y0, x1, y1):
        return {
            "type": "Polygon",
            "coordinates": [[[x0, y0], [x1, y0], [x1, y1], [x0, y1], [x0, y0]]],
        }

    x0, y_top = 480000.0, 4430000.0
    zones = [
        ("field_A", "field", box(x0 + 2400, y_top - 5700, x0 + 3300, y_top - 4800)),
        ("field_B", "field", box(x0 + 5100, y_top - 6600, x0 + 6300, y_top - 5400)),
        ("field_C", "field", box(x0 + 7500, y_top - 8400, x0 + 8700, y_top - 7200)),
        ("field_D", "field", box(x0 + 3600, y_top - 8700, x0 + 4500, y_top - 7800)),
        ("basin_west", "sub-basin", box(x0, y_top - 9000, x0 + 6000, y_top)),
        ("basin_east", "sub-basin", box(x0 + 6000, y_top - 9000, x0 + 12000, y_top)),
    ]
    collection = {
        "type": "FeatureCollection",
        "name": "Kessendry Basin zones (invented)",
        "crs": {"type": "name", "properties": {"name": "EPSG:32613"}},
        "features": [
            {"type": "Feature", "properties": {"zone_id": z, "kind": kind}, "geometry": geometry}
            for z, kind, geometry in zones
        ],
    }
    path = out_dir / "zones.geojson"
    tmp = path.with_name(path.name + ".partial")
    tmp.write_text(json.dumps(collection, indent=1))
    os.replace(tmp, path)
    return path


# ----------------------------------------------------------------------------- a Level-2 product

#: File stem of the invented Level-2-style product of the first demo date (not a USGS product).
PRODUCT_STEM = "KB07_L2SP_033032_20260614_DEMO"
PRODUCT_FOLDER = "product_l2"
#: Collection 2 Level-2 scaling the product is written with (product guide, from memory).
_SR_SCALE, _SR_OFFSET = 2.75e-05, -0.2
_ST_SCALE, _ST_OFFSET = 0.00341802, 149.0
#: Bands of the invented ETM+-like product: file suffix -> common name.
_PRODUCT_BANDS = {"SR_B1": "blue", "SR_B3": "red", "SR_B4": "nir", "SR_B5": "swir1"}
_PRODUCT_BANDS |= {"SR_B7": "swir2", "ST_B6": "thermal"}
#: A cloud and its shadow, (row slice, column slice), for the pixel QA band.
_PRODUCT_CLOUD = (slice(20, 45), slice(300, 340))
_PRODUCT_SHADOW = (slice(35, 60), slice(270, 310))


def _reflectances(albedo: np.ndarray, ndvi: np.ndarray) -> dict[str, np.ndarray]:
    """Band reflectances that give back the demo's NDVI exactly and its albedo through Liang's
    (2001) TM/ETM+ weights: red and NIR from the NDVI, blue = SWIR1 = SWIR2 from the rest."""
    ratio = (1.0 + ndvi) / (1.0 - ndvi)  # NIR / red
    # red and NIR take most of the albedo, but stay below 0.85 and 0.95 (bright snow)
    red = np.minimum(
        0.8 * (albedo + 0.0018) / (0.130 + 0.373 * ratio), np.minimum(0.85, 0.95 / ratio)
    )
    nir = red * ratio
    rest = (albedo + 0.0018 - 0.130 * red - 0.373 * nir) / (0.356 + 0.085 + 0.072)
    return {"blue": rest, "red": red, "nir": nir, "swir1": rest, "swir2": rest}


def make_level2_product(tiny_dir: pathlib.Path) -> list[pathlib.Path]:
    """Write an invented Landsat Collection 2 Level-2-style product of the first demo date.

    Surface reflectance bands 1, 3, 4, 5, 7 and the surface-temperature band 6 as scaled uint16
    (0 = fill), a pixel QA band (bit 6 clear; a cloud: bits 1 and 3; its shadow: bit 4) and MTL
    metadata text in the Collection 2 layout, into ``tiny_dir/product_l2``. The bands are made
    from the demo's own albedo, NDVI and surface temperature, so the product path reproduces
    the ready-raster run up to the 16-bit quantisation; every value is invented (the metadata
    say so in their ORIGIN line).
    """
    tiny_dir = pathlib.Path(tiny_dir)
    folder = tiny_dir / PRODUCT_FOLDER
    folder.mkdir(parents=True, exist_ok=True)
    day = DEMO_DATES[0].replace("-", "")
    with rasterio.open(tiny_dir / f"albedo_{day}.tif") as src:
        albedo = src.read(1).astype(np.float64)
    with rasterio.open(tiny_dir / f"ndvi_{day}.tif") as src:
        ndvi = src.read(1).astype(np.float64)
    with rasterio.open(tiny_dir / f"surface_temperature_{day}.tif") as src:
        temperature = src.read(1).astype(np.float64)
    missing = ~(np.isfinite(albedo) & np.isfinite(ndvi) & np.isfinite(temperature))
    reflectance = _reflectances(np.nan_to_num(albedo), np.clip(np.nan_to_num(ndvi), -0.9, 0.9))
    tags = {"DEMO_PRODUCT": "invented Level-2-style product, not USGS data"}
    files = []
    for suffix, name in _PRODUCT_BANDS.items():
        if name == "thermal":
            dn = np.rint((temperature - _ST_OFFSET) / _ST_SCALE)
        else:
            dn = np.rint((reflectance[name] - _SR_OFFSET) / _SR_SCALE)
        dn = np.where(missing, 0, np.clip(np.nan_to_num(dn), 1, 65535)).astype(np.uint16)
        path = folder / f"{PRODUCT_STEM}_{suffix}.TIF"
        _write_geotiff(path, dn, nodata=0, description=suffix, units="DN", tags=tags)
        files.append(path)
    qa = np.full(albedo.shape, 1 << 6, dtype=np.uint16)  # clear
    qa[_PRODUCT_SHADOW] = 1 << 4
    qa[_PRODUCT_CLOUD] = (1 << 1) | (1 << 3)
    qa[missing] = 1  # fill
    path = folder / f"{PRODUCT_STEM}_QA_PIXEL.TIF"
    _write_geotiff(path, qa, nodata=1, description="QA_PIXEL", units="bits", tags=tags)
    files.append(path)
    files.append(_write_product_metadata(folder))
    files.append(_write_product_item(folder))
    return files


#: STAC common names of the invented product's bands.
_COMMON_NAMES = {"blue": "blue", "red": "red", "nir": "nir08", "swir1": "swir16"}
_COMMON_NAMES |= {"swir2": "swir22", "thermal": "lwir11"}


def _write_product_item(folder: pathlib.Path) -> pathlib.Path:
    """A STAC Item (1.0, eo and raster extensions) of the invented product, its assets relative."""
    import json

    assets = {}
    for suffix, name in _PRODUCT_BANDS.items():
        scale, offset = (_ST_SCALE, _ST_OFFSET) if name == "thermal" else (_SR_SCALE, _SR_OFFSET)
        assets[_COMMON_NAMES[name]] = {
            "href": f"./{PRODUCT_STEM}_{suffix}.TIF",
            "type": "image/tiff; application=geotiff",
            "eo:bands": [{"name": suffix, "common_name": _COMMON_NAMES[name]}],
            "raster:bands": [{"nodata": 0, "scale": scale, "offset": offset}],
            "roles": ["data"],
        }
    assets["qa_pixel"] = {
        "href": f"./{PRODUCT_STEM}_QA_PIXEL.TIF",
        "type": "image/tiff; application=geotiff",
        "roles": ["cloud"],
    }
    left, top = _ORIGIN_X, _ORIGIN_Y
    right, bottom = left + 400 * _PIXEL_SIZE, top - 300 * _PIXEL_SIZE
    lons, lats = _transform_coords(
        CRS.from_epsg(_EPSG),
        CRS.from_epsg(4326),
        [left, right, right, left],
        [top, top, bottom, bottom],
    )
    ring = [[round(x, 6), round(y, 6)] for x, y in zip(lons, lats, strict=True)]
    item = {
        "type": "Feature",
        "stac_version": "1.0.0",
        "stac_extensions": [
            "https://stac-extensions.github.io/eo/v1.1.0/schema.json",
            "https://stac-extensions.github.io/raster/v1.1.0/schema.json",
        ],
        "id": PRODUCT_STEM,
        "geometry": {"type": "Polygon", "coordinates": [[*ring, ring[0]]]},
        "bbox": [min(lons), min(lats), max(lons), max(lats)],
        "properties": {
            "datetime": f"{DEMO_DATES[0]}T{DEMO_OVERPASS_UTC}:00Z",
            "instruments": ["etm+"],
            "description": f"Invented demo product of rasterbudget ({DEMO_REGION}); not USGS data",
        },
        "links": [],
        "assets": assets,
    }
    path = folder / f"{PRODUCT_STEM}_stac.json"
    path.write_text(json.dumps(item, indent=2) + "\n")
    return path


def _write_product_metadata(folder: pathlib.Path) -> pathlib.Path:
    """MTL text in the Collection 2 layout for the invented product (sun angles from SPA)."""
    from .physics.solar import solar_ephemeris

    when = _dt.datetime.fromisoformat(f"{DEMO_DATES[0]}T{DEMO_OVERPASS_UTC}:00+00:00")
    centre = ([_ORIGIN_X + 200 * _PIXEL_SIZE], [_ORIGIN_Y - 150 * _PIXEL_SIZE])
    lon, lat = _transform_coords(CRS.from_epsg(_EPSG), CRS.from_epsg(4326), *centre)
    sun = solar_ephemeris(when, lat[0], lon[0])
    # MTL keys: band 1 is FILE_NAME_BAND_1, the thermal band FILE_NAME_BAND_ST_B6
    keys = {s: s[4:] if s.startswith("SR_") else s for s in _PRODUCT_BANDS}
    names = [f'    FILE_NAME_BAND_{keys[s]} = "{PRODUCT_STEM}_{s}.TIF"' for s in _PRODUCT_BANDS]
    sr = [keys[s] for s in _PRODUCT_BANDS if s.startswith("SR_")]
    lines = [
        "GROUP = LANDSAT_METADATA_FILE",
        "  GROUP = PRODUCT_CONTENTS",
        f'    ORIGIN = "Invented demo product of rasterbudget ({DEMO_REGION}); not USGS data"',
        '    PROCESSING_LEVEL = "L2SP"',
        *names,
        f'    FILE_NAME_QUALITY_L1_PIXEL = "{PRODUCT_STEM}_QA_PIXEL.TIF"',
        "  END_GROUP = PRODUCT_CONTENTS",
        "  GROUP = IMAGE_ATTRIBUTES",
        '    SPACECRAFT_ID = "LANDSAT_7"',
        '    SENSOR_ID = "ETM"',
        "    WRS_PATH = 33",
        "    WRS_ROW = 32",
        f"    DATE_ACQUIRED = {DEMO_DATES[0]}",
        f'    SCENE_CENTER_TIME = "{DEMO_OVERPASS_UTC}:00.0000000Z"',
        f"    SUN_AZIMUTH = {sun.azimuth:.8f}",
        f"    SUN_ELEVATION = {90.0 - sun.zenith:.8f}",
        "  END_GROUP = IMAGE_ATTRIBUTES",
        "  GROUP = LEVEL2_SURFACE_REFLECTANCE_PARAMETERS",
        *[f"    REFLECTANCE_MULT_BAND_{b} = {_SR_SCALE}" for b in sr],
        *[f"    REFLECTANCE_ADD_BAND_{b} = {_SR_OFFSET}" for b in sr],
        "  END_GROUP = LEVEL2_SURFACE_REFLECTANCE_PARAMETERS",
        "  GROUP = LEVEL2_SURFACE_TEMPERATURE_PARAMETERS",
        f"    TEMPERATURE_MULT_BAND_ST_B6 = {_ST_SCALE}",
        f"    TEMPERATURE_ADD_BAND_ST_B6 = {_ST_OFFSET}",
        "  END_GROUP = LEVEL2_SURFACE_TEMPERATURE_PARAMETERS",
        "END_GROUP = LANDSAT_METADATA_FILE",
        "END",
    ]
    path = folder / f"{PRODUCT_STEM}_MTL.txt"
    path.write_text("\n".join(lines) + "\n")
    return path
