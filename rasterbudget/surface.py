"""The surface state of one block: radiation, ground heat, air properties and QA, per pixel.

Composes the pure physics functions for a block of pixels. Numpy in, numpy out; no dask, no I/O,
so the pipeline can apply it per chunk (pass 1 and pass 2 call the same function) and the result
does not depend on where chunk boundaries fall.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import NamedTuple

import numpy as np

from .catalog.classes import ClassTable
from .catalog.qa import QA, QA_NO_FLUXES, QA_NOT_ANCHOR
from .physics import ground, radiation, turbulence
from .physics.constants import SOLAR_CONSTANT, ZERO_CELSIUS
from .physics.solar import (
    cos_incidence,
    cos_incidence_on_normal,
    daylight_hours,
    extraterrestrial_radiation_daily,
    local_hour_angle,
    sun_direction,
)
from .screens import ScreenSettings, anchor_candidates, surface_rules

#: Standard-atmosphere lapse rate used to carry the station air temperature to each pixel's
#: elevation [K m-1] (ICAO standard atmosphere, 6.5 K km-1).
LAPSE_RATE = 0.0065

#: Physically plausible land-surface temperature range [K] (common practice).
PLAUSIBLE_SURFACE_TEMPERATURE = (200.0, 350.0)


@dataclass(frozen=True)
class SceneConstants:
    """Scalars that hold for the whole scene, in SI units and kelvin."""

    day_of_year: int  # of the local solar date, for the daily terms (FAO-56)
    utc_hour: float
    declination: float  # at overpass, NREL SPA [rad]
    greenwich_hour_angle: float  # at overpass, NREL SPA; plus longitude: local [rad]
    inverse_distance: float  # (1 au / Earth-Sun distance)^2 at overpass [-]
    air_temperature: float  # station air temperature at overpass [K]
    station_elevation: float  # [m]
    vapour_pressure: float | None  # at overpass [kPa]
    station_transmissivity: float | None  # from measured shortwave, None: FAO-56 eq. 37
    longwave_in_method: str
    emissivity_method: str
    ground_heat_method: str
    min_cos_incidence: float
    tmax: float  # [K]
    tmin: float  # [K]
    vapour_pressure_daily: float  # [kPa]
    daily_clearness: float | None  # station Rs / Rso, None: from sunshine hours
    sunshine_hours: float | None
    screens: ScreenSettings = field(default_factory=ScreenSettings)  # where anchors may stand
    surface_lapse_rate: float = 0.0  # [K m-1] for the elevation-adjusted Ts of the dT relation
    roughness_from_ndvi: bool = False  # z0m from NDVI where the class allows NDVI-based G
    reference_et_hourly: float | None = None  # station reference ET, overpass hour [mm h-1]
    reference_et_daily: float | None = None  # station reference ET, the day [mm d-1]
    grass_reference_et_hourly: float | None = None  # short (grass) reference, overpass hour
    daily_scaling: str = "evaporative_fraction"
    max_evaporative_fraction: float = 1.0  # LE clipped to [0, this x (Rn - G)]


@dataclass(frozen=True)
class ClassLookups:
    """256-entry lookup arrays of class properties (code -> value)."""

    known: np.ndarray
    emissivity: np.ndarray
    roughness_length: np.ndarray
    ground_heat_ratio: np.ndarray
    ground_heat_from_ndvi: np.ndarray
    albedo_min: np.ndarray
    albedo_max: np.ndarray
    cold_anchor: np.ndarray
    hot_anchor: np.ndarray
    residual_reliable: np.ndarray

    @classmethod
    def from_table(cls, table: ClassTable) -> ClassLookups:
        as_bool = {"ground_heat_from_ndvi", "cold_anchor", "hot_anchor", "residual_reliable"}
        values = {}
        for name in cls.__dataclass_fields__:
            if name == "known":
                values[name] = table.known()
            elif name in as_bool:
                values[name] = table.lookup(name, fill=0.0).astype(bool)
            else:
                values[name] = table.lookup(name, fill=np.nan)
        return cls(**values)


def land_cover_codes(land_cover: np.ndarray) -> np.ndarray:
    """Land-cover block (float, NaN = nodata) to integer codes; 0 where nodata or out of 0-255."""
    ok = np.isfinite(land_cover) & (land_cover >= 0) & (land_cover <= 255)
    return np.where(ok, land_cover, 0).astype(np.intp)


def input_qa(
    lookups: ClassLookups,
    codes: np.ndarray,
    albedo: np.ndarray,
    surface_temperature: np.ndarray,
    land_cover: np.ndarray,
    ndvi: np.ndarray | None,
    elevation: np.ndarray | None,
    weather: dict[str, np.ndarray],
    masked: np.ndarray | None,
) -> tuple[np.ndarray, np.ndarray]:
    """QA bits that the inputs alone decide (missing, masked, implausible Ts, albedo outside its
    class range, unknown class, class with an unreliable residual), and where an input is
    missing."""
    known = lookups.known[codes] & np.isfinite(land_cover)
    missing = ~np.isfinite(albedo) | ~np.isfinite(surface_temperature) | ~np.isfinite(land_cover)
    if ndvi is not None:
        missing |= ~np.isfinite(ndvi)
    if elevation is not None:
        missing |= ~np.isfinite(elevation)
    for values in weather.values():
        missing |= ~np.isfinite(values)
    t_low, t_high = PLAUSIBLE_SURFACE_TEMPERATURE
    with np.errstate(invalid="ignore"):
        implausible_ts = np.isfinite(surface_temperature) & (
            (surface_temperature < t_low) | (surface_temperature > t_high)
        )
        albedo_out = (
            np.isfinite(albedo)
            & known
            & ((albedo < lookups.albedo_min[codes]) | (albedo > lookups.albedo_max[codes]))
        )

    qa = np.zeros(albedo.shape, dtype=np.uint16)
    qa |= np.where(missing, np.uint16(QA.INPUT_MISSING), np.uint16(0))
    if masked is not None:
        qa |= np.where(masked, np.uint16(QA.MASKED), np.uint16(0))
    qa |= np.where(implausible_ts, np.uint16(QA.SURFACE_TEMPERATURE_IMPLAUSIBLE), np.uint16(0))
    qa |= np.where(albedo_out, np.uint16(QA.ALBEDO_OUT_OF_CLASS_RANGE), np.uint16(0))
    qa |= np.where(~known & np.isfinite(land_cover), np.uint16(QA.UNKNOWN_LAND_COVER), np.uint16(0))
    qa |= np.where(
        known & ~lookups.residual_reliable[codes], np.uint16(QA.RESIDUAL_UNRELIABLE_CLASS), 0
    ).astype(np.uint16)
    return qa, missing


class DailySun(NamedTuple):
    """The day's sun at each pixel: extraterrestrial radiation [MJ m-2 d-1] (FAO-56 eq. 21) and
    daylight hours [h] (eq. 34)."""

    extraterrestrial_radiation: np.ndarray
    daylight_hours: np.ndarray


def net_radiation_daily_block(
    c: SceneConstants,
    latitude: np.ndarray,
    elevation: np.ndarray,
    albedo: np.ndarray,
    day: DailySun | None = None,
) -> np.ndarray:
    """FAO-56 daily net radiation of each pixel (eqs. 21, 34-40) with its own albedo and the
    day's station shortwave (as Rs/Rso) or sunshine hours. [MJ m-2 d-1]

    ``day``: the day's sun at the pixels when already known (interpolated from a lattice);
    otherwise computed from ``latitude``.
    """
    if day is None:
        day = DailySun(
            extraterrestrial_radiation_daily(latitude, c.day_of_year),
            daylight_hours(latitude, c.day_of_year),
        )
    ra = day.extraterrestrial_radiation
    rso = radiation.clear_sky_shortwave_daily(ra, elevation)
    if c.daily_clearness is not None:
        rs = c.daily_clearness * rso
    else:
        n_max = day.daylight_hours
        rs = radiation.shortwave_daily_from_sunshine(ra, np.minimum(c.sunshine_hours, n_max), n_max)
    rnl = radiation.net_longwave_daily(c.tmax, c.tmin, c.vapour_pressure_daily, rs, rso)
    return radiation.net_radiation_daily(albedo, rs, rnl)


def surface_block(
    c: SceneConstants,
    lookups: ClassLookups,
    albedo: np.ndarray,
    surface_temperature: np.ndarray,
    land_cover: np.ndarray,
    latitude: np.ndarray,
    longitude: np.ndarray,
    ndvi: np.ndarray | None = None,
    elevation: np.ndarray | None = None,
    slope: np.ndarray | None = None,
    aspect: np.ndarray | None = None,
    masked: np.ndarray | None = None,
    weather: dict[str, np.ndarray] | None = None,
    normal: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None,
    sun: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None,
    daily: bool = True,
    features: dict[str, np.ndarray] | None = None,
    daily_sun: DailySun | None = None,
) -> dict[str, np.ndarray]:
    """Per-pixel radiation budget, ground heat flux, air properties and QA for one block.

    Parameters
    ----------
    albedo, surface_temperature, land_cover : 2-D arrays (NaN = nodata). [-], [K], [code]
    latitude, longitude : pixel centres. [rad], [degrees east]
    ndvi, elevation : optional 2-D arrays (NaN = nodata). [-], [m]
    slope, aspect : terrain from the DEM, clockwise from north. [rad]
    normal : unit terrain normal (east, north, up) from the DEM, instead of slope and aspect. [-]
    sun : unit vector towards the sun (east, north, up) per pixel; computed from latitude and
        longitude when not given. [-]
    daily : also compute the FAO-56 daily net radiation (not needed for anchor histograms).
    daily_sun : the day's sun at the pixels (:class:`DailySun`); computed from the latitude when
        not given.
    features : neighbourhood features of the pixels for the anchor screens
        (:func:`rasterbudget.screens.neighbourhood_features`); None: those screens pass.
    masked : pixels dropped by a cloud/QA mask. [bool]
    weather : gridded overpass weather on the block, by quantity, in SI units
        (``catalog.inputs.gridded_weather_in_si``): ``air_temperature`` [K],
        ``relative_humidity`` [%], ``shortwave_in`` [W m-2]; replaces the station value (and,
        for air temperature, its lapse-rate adjustment) pixel by pixel.

    Returns
    -------
    dict of 2-D arrays: ``qa`` (uint16), ``valid`` (fluxes computable), ``net_radiation``,
    ``ground_heat_flux``, ``available_energy``, ``shortwave_in``, ``longwave_in``, ``longwave_out``
    [W m-2], ``net_radiation_daily`` [MJ m-2 d-1], ``roughness_length`` [m], ``air_density``
    [kg m-3], ``datum_surface_temperature`` (Ts carried to the station elevation with
    ``surface_lapse_rate``) [K], ``cold_candidate`` and ``hot_candidate`` (bool),
    ``candidate_counts`` (pixels left after each screen, :data:`rasterbudget.screens.RULES`).
    """
    codes = land_cover_codes(land_cover)
    weather = weather or {}
    qa, missing = input_qa(
        lookups, codes, albedo, surface_temperature, land_cover, ndvi, elevation, weather, masked
    )

    z = np.full(albedo.shape, c.station_elevation) if elevation is None else elevation
    omega = local_hour_angle(c.greenwich_hour_angle, longitude)
    if sun is None:
        sun = sun_direction(latitude, c.declination, omega)
    cos_zenith = sun[2]
    if normal is not None:
        cos_theta = cos_incidence_on_normal(normal, sun)
    elif slope is not None:
        cos_theta = cos_incidence(latitude, c.declination, omega, slope, aspect)
    else:
        cos_theta = cos_zenith
    low_sun = ~(cos_theta >= c.min_cos_incidence)
    qa |= np.where(low_sun, np.uint16(QA.LOW_SUN_OR_SHADOW), np.uint16(0))

    # Shortwave: FAO-56 eq. 37 clear-sky transmissivity, or the station's measured value carried to
    # each pixel's elevation with the same elevation dependence.
    tau = radiation.clear_sky_transmissivity(z)
    if "shortwave_in" in weather:
        # measured on the horizontal: tau = Rs / (Gsc cos(zenith) dr), then onto the slope
        with np.errstate(invalid="ignore", divide="ignore"):
            tau = np.clip(
                weather["shortwave_in"]
                / (SOLAR_CONSTANT * np.maximum(cos_zenith, 0.05) * c.inverse_distance),
                0.05,
                1.0,
            )
    elif c.station_transmissivity is not None:
        tau = tau * (
            c.station_transmissivity / radiation.clear_sky_transmissivity(c.station_elevation)
        )
    sw_in = radiation.shortwave_in(cos_theta, c.inverse_distance, tau)

    if "air_temperature" in weather:
        air_temperature = weather["air_temperature"]
    else:
        air_temperature = c.air_temperature - LAPSE_RATE * (z - c.station_elevation)
    vapour_pressure = c.vapour_pressure
    if "relative_humidity" in weather:
        vapour_pressure = turbulence.vapour_pressure_from_relative_humidity(
            air_temperature, weather["relative_humidity"]
        )
    if c.longwave_in_method == "brutsaert":
        eps_air = radiation.atmospheric_emissivity_brutsaert(vapour_pressure, air_temperature)
    else:
        eps_air = radiation.atmospheric_emissivity_bastiaanssen(np.minimum(tau, 0.99))
    if c.emissivity_method == "ndvi" and ndvi is not None:
        eps_surface = radiation.surface_emissivity_from_ndvi(ndvi)
        eps_surface = np.where(
            lookups.ground_heat_from_ndvi[codes], eps_surface, lookups.emissivity[codes]
        )
    else:
        eps_surface = lookups.emissivity[codes]
    lw_in = radiation.longwave_emitted(eps_air, air_temperature)
    lw_out = radiation.longwave_emitted(eps_surface, surface_temperature)
    rn = radiation.net_radiation(albedo, sw_in, lw_in, lw_out, eps_surface)

    ratio = lookups.ground_heat_ratio[codes]
    if ndvi is not None and c.ground_heat_method == "auto":
        with np.errstate(invalid="ignore", divide="ignore"):
            ndvi_ratio = ground.ground_heat_ratio_ndvi(surface_temperature, albedo, ndvi)
        ratio = np.where(lookups.ground_heat_from_ndvi[codes], ndvi_ratio, ratio)
    g = ground.ground_heat_flux(rn, ratio)
    available = rn - g
    with np.errstate(invalid="ignore"):
        no_energy = ~(available >= 1.0)
    qa |= np.where(no_energy & ~missing, np.uint16(QA.NO_AVAILABLE_ENERGY), np.uint16(0))

    # FAO-56 daily net radiation per pixel (eqs. 21, 34-40) with the pixel's own albedo.
    if daily:
        rn_daily = net_radiation_daily_block(c, latitude, z, albedo, daily_sun)
    else:
        rn_daily = np.full(albedo.shape, np.nan)

    pressure = turbulence.air_pressure(z)
    rho = turbulence.air_density(pressure, air_temperature)
    roughness = lookups.roughness_length[codes]
    if c.roughness_from_ndvi and ndvi is not None:  # no land-cover map: the continuous relation
        roughness = np.where(
            lookups.ground_heat_from_ndvi[codes],
            turbulence.roughness_length_from_ndvi(ndvi),
            roughness,
        )

    valid = (qa & np.uint16(QA_NO_FLUXES)) == 0
    clean = (qa & np.uint16(QA_NOT_ANCHOR)) == 0
    # Anchors stand for the weather station's conditions: keep them near its elevation.
    with np.errstate(invalid="ignore"):
        near_station = np.abs(z - c.station_elevation) <= c.screens.elevation_range
        illumination = None
        if normal is not None or slope is not None:
            illumination = cos_theta / np.maximum(cos_zenith, 1e-6)
    rules = surface_rules(
        codes, ndvi, lookups.cold_anchor, lookups.hot_anchor, lookups.residual_reliable, c.screens
    )
    cold, hot, counts = anchor_candidates(
        rules, clean, near_station, illumination, features, c.screens
    )

    # Surface temperature carried to the station elevation for the dT = a + b Ts relation, so that
    # cool high ground is not mistaken for wet ground (common practice with a DEM).
    datum_ts = surface_temperature + c.surface_lapse_rate * (z - c.station_elevation)

    nan = np.float64(np.nan)
    return {
        "albedo": albedo,
        "air_temperature": air_temperature,
        "vapour_pressure": vapour_pressure,
        "air_pressure": pressure,
        "surface_emissivity": eps_surface,
        "ground_heat_ratio": ratio,
        "edge_candidate": clean & near_station,
        "qa": qa,
        "valid": valid,
        "codes": codes,
        "surface_temperature": surface_temperature,
        "datum_surface_temperature": datum_ts,
        "net_radiation": np.where(valid, rn, nan),
        "ground_heat_flux": np.where(valid, g, nan),
        "available_energy": np.where(valid, available, nan),
        "shortwave_in": np.where(valid, sw_in, nan),
        "longwave_in": np.where(valid, lw_in, nan),
        "longwave_out": np.where(valid, lw_out, nan),
        "net_radiation_daily": np.where(valid, rn_daily, nan),
        "roughness_length": roughness,
        "air_density": rho,
        "cold_candidate": cold,
        "hot_candidate": hot,
        "candidate_counts": counts,
    }


def perturbed_air(
    c: SceneConstants,
    state: dict[str, np.ndarray],
    air_temperature_offset: float,
    albedo_offset: float = 0.0,
    surface_temperature_offset: float = 0.0,
) -> tuple[np.ndarray, np.ndarray]:
    """Available energy [W m-2] and air density [kg m-3] with the air temperature shifted.

    Used by the uncertainty ensemble: only incoming longwave and air density depend on the
    overpass air temperature, so Rn' = Rn + eps0 (RL_in' - RL_in) (the surface absorbs eps0 of
    the change; eq. of :func:`radiation.net_radiation`), G' = (G/Rn) Rn', and rho' from the same
    pressure at the new temperature (FAO-56 Annex 3 eq. 3-5). An albedo offset takes
    ``offset x Rs_in`` from Rn; a surface-temperature offset changes the emitted longwave,
    eps0 sigma ((Ts + dTs)^4 - Ts^4).
    """
    ta = state["air_temperature"]
    ta_new = ta + air_temperature_offset
    if c.longwave_in_method == "brutsaert":
        ea = state["vapour_pressure"]
        eps_old = radiation.atmospheric_emissivity_brutsaert(ea, ta)
        eps_new = radiation.atmospheric_emissivity_brutsaert(ea, ta_new)
    else:  # Bastiaanssen's emissivity depends on transmissivity only
        eps_old = eps_new = state["longwave_in"] / radiation.longwave_emitted(1.0, ta)
    delta_lw = radiation.longwave_emitted(eps_new, ta_new) - radiation.longwave_emitted(eps_old, ta)
    rn = state["net_radiation"] + state["surface_emissivity"] * delta_lw
    if albedo_offset:
        rn = rn - albedo_offset * state["shortwave_in"]
    if surface_temperature_offset:
        ts = state["surface_temperature"]
        rn = (
            rn
            - radiation.longwave_emitted(
                state["surface_emissivity"], ts + surface_temperature_offset
            )
            + radiation.longwave_emitted(state["surface_emissivity"], ts)
        )
    available = (1.0 - state["ground_heat_ratio"]) * rn
    rho = turbulence.air_density(state["air_pressure"], ta_new)
    return available, rho


def kelvin(celsius: float) -> float:
    """Degrees Celsius to kelvin."""
    return celsius + ZERO_CELSIUS
