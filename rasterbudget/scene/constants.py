"""Scene-wide scalars in SI units: the overpass sun, weather at the scene centre, the station's
reference ET. One place where a scene's recipe numbers become physical constants."""

from __future__ import annotations

import math

import numpy as np

from ..errors import InputValueError, RasterBudgetError, SunBelowHorizonError
from ..io.grid import (
    GDAL_OPTIONS,
    Grid,
    input_source,
    read_window,
)
from ..physics import radiation, turbulence
from ..physics.solar import (
    daylight_hours,
    extraterrestrial_radiation_daily,
    local_solar_day_of_year,
    solar_ephemeris,
)
from ..recipe import Scene
from ..screens import ScreenSettings
from ..surface import (
    SceneConstants,
    kelvin,
)


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
            f"({format_lonlat(lon, lat)}; elevation {elevation_deg:.1f}°, limit {limit}°); "
            "check acquired_utc is in UTC, or lower radiation.min_sun_elevation_deg."
        )
    ow, dw = scene.overpass, scene.daily
    ta = kelvin(ow.air_temperature_c)
    ea = None
    if ow.relative_humidity_pct is not None:
        ea = float(turbulence.vapour_pressure_from_relative_humidity(ta, ow.relative_humidity_pct))
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
        screens=screen_settings(scene.anchors),
        surface_lapse_rate=scene.anchors.surface_lapse_rate_k_per_km / 1000.0,
        roughness_from_ndvi=scene.inputs.land_cover is None,
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


def screen_settings(anchors) -> ScreenSettings:
    """The anchor screens' thresholds from ``[scene.anchors]``."""
    return ScreenSettings(
        surfaces=anchors.candidate_surfaces,
        min_ndvi_cold=anchors.cold_min_ndvi,
        max_ndvi_hot=anchors.hot_max_ndvi,
        elevation_range=anchors.max_elevation_difference_m,
        illumination_tolerance=anchors.illumination_tolerance,
        max_ts_spread=anchors.max_ts_spread_k,
        max_ndvi_spread=anchors.max_ndvi_spread,
        cloud_distance=anchors.cloud_distance_px,
    )


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
    they need (a recipe whose choices need them is refused when it is read, ``recipe.Scene``).
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
    grass_hourly = None
    if not missing_hourly:
        if ow.shortwave_in_w_m2 is not None:
            rs_hour = ow.shortwave_in_w_m2 * 0.0036  # W m-2 held for an hour -> MJ m-2 h-1
        else:  # clear-sky estimate at the station, as for the pixels (FAO-56 eq. 37 form)
            tau = float(radiation.clear_sky_transmissivity(ow.station_elevation_m))
            rs_hour = float(radiation.shortwave_in(cos_z, dr, tau)) * 0.0036

        def hourly_for(surface: str) -> float:
            return float(
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
                    reference=surface,
                    low_sun_cloudiness=low_sun_cloudiness,
                )
            )

        hourly = hourly_for(ref.surface)
        grass_hourly = hourly_for("short")  # the soil balance's Ke is relative to grass
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
    return {
        "reference_et_hourly": hourly,
        "reference_et_daily": daily,
        "grass_reference_et_hourly": grass_hourly,
    }


def format_lonlat(lon: float, lat: float) -> str:
    """A place as people write it: ``40.028° N, 105.164° W`` (hemisphere letters, no signs)."""
    return f"{abs(lat):.3f}° {'N' if lat >= 0 else 'S'}, {abs(lon):.3f}° {'E' if lon >= 0 else 'W'}"
