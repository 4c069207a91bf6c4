"""Shared pieces of the synthetic validation scenes.

- ``demo_constants``: scene constants like the demo recipe's first scene (``workflows/demo.toml``:
  40° N, 14 June, 17:52 UTC, station at 1560 m, Ta 26.5 °C, RH 28 %), built with the same formulas
  as ``rasterbudget.scene.constants.scene_constants`` but without a recipe or a raster grid.
- ``builtin_lookups``: the built-in class table as 256-entry lookups.
- ``forward_surface_temperature``: an independent forward model of the anchor method. Given a
  prescribed sensible heat flux H it finds the near-surface temperature difference dT, the
  aerodynamic resistance and the surface temperature Ts = (dT - a) / b that produce exactly that H,
  written here from the published forms (Monin-Obukhov length; Paulson 1970 unstable and Webb 1970
  stable integrated stability functions; log wind profile; the two-height resistance of Bastiaanssen
  et al. 1998) rather than by calling the package's iteration.
"""

from __future__ import annotations

import dataclasses
import math
from functools import cache

import numpy as np

from rasterbudget import surface
from rasterbudget.catalog.classes import load_class_table
from rasterbudget.methods import anchors
from rasterbudget.physics import radiation, solar, turbulence
from rasterbudget.physics.constants import GRAVITY, SPECIFIC_HEAT_AIR, VON_KARMAN
from rasterbudget.screens import ScreenSettings

# --------------------------------------------------------------------------- the demo-like scene

LATITUDE_DEG = 40.0
LONGITUDE_DEG = -112.0  # 17:52 UTC is about 10:30 local solar time here: sun ~60° high
DAY_OF_YEAR = 165  # 14 June
UTC_HOUR = 17.0 + 52.0 / 60.0
STATION_ELEVATION = 1560.0  # [m]

#: Pipeline defaults of the anchor method (rasterbudget.recipe.AnchorSettings).
BLENDING_HEIGHT = 200.0  # [m]
STATION_ROUGHNESS = 0.0148  # [m]
WIND_HEIGHT = 2.0  # [m]
MAX_ITERATIONS = 30
CALIBRATION_TOLERANCE_K = 0.001  # [K]
PIXEL_TOLERANCE_W = 0.1  # [W m-2], default of sensible_heat_block


def demo_constants(**overrides) -> surface.SceneConstants:
    """Scene constants of the demo's first scene (see module docstring)."""
    ta = surface.kelvin(26.5)
    tmax, tmin = surface.kelvin(31.0), surface.kelvin(12.5)
    lat = math.radians(LATITUDE_DEG)
    ra = float(solar.extraterrestrial_radiation_daily(lat, DAY_OF_YEAR))
    rso = float(radiation.clear_sky_shortwave_daily(ra, STATION_ELEVATION))
    constants = surface.SceneConstants(
        day_of_year=DAY_OF_YEAR,
        utc_hour=UTC_HOUR,
        declination=float(solar.solar_declination(DAY_OF_YEAR)),
        # FAO-56's hour angle at longitude 0: this known-answer case keeps FAO-56's sun
        greenwich_hour_angle=float(solar.hour_angle(UTC_HOUR, 0.0, DAY_OF_YEAR)),
        inverse_distance=float(solar.inverse_relative_distance(DAY_OF_YEAR)),
        air_temperature=ta,
        station_elevation=STATION_ELEVATION,
        vapour_pressure=float(turbulence.vapour_pressure_from_relative_humidity(ta, 28.0)),
        station_transmissivity=None,  # FAO-56 eq. 37 clear sky
        longwave_in_method="bastiaanssen",
        emissivity_method="class",
        ground_heat_method="auto",
        min_cos_incidence=math.sin(math.radians(10.0)),
        tmax=tmax,
        tmin=tmin,
        vapour_pressure_daily=float(
            turbulence.vapour_pressure_from_rh_extremes(tmin, tmax, 62.0, 18.0)
        ),
        daily_clearness=min(29.8 / rso, 1.0),
        sunshine_hours=None,
        screens=ScreenSettings(surfaces="classes", elevation_range=500.0),
        surface_lapse_rate=0.0065,
    )
    return dataclasses.replace(constants, **overrides)


@cache
def builtin_table():
    return load_class_table()


@cache
def builtin_lookups() -> surface.ClassLookups:
    return surface.ClassLookups.from_table(builtin_table())


def latlon(shape) -> tuple[np.ndarray, np.ndarray]:
    """Latitude [rad] and longitude [deg E] arrays of a flat block at the scene centre."""
    return (
        np.full(shape, math.radians(LATITUDE_DEG)),
        np.full(shape, LONGITUDE_DEG),
    )


def blending_wind(station_wind: float) -> float:
    """Wind at the blending height from a 2 m station reading, with the pipeline's defaults."""
    return turbulence.wind_speed_at_blending_height(
        station_wind, WIND_HEIGHT, STATION_ROUGHNESS, BLENDING_HEIGHT
    )


def make_anchor(role, ts, available, z0m, rho) -> anchors.Anchor:
    """A user-style anchor from scalars (Rn = AE, G = 0: only AE enters the calibration)."""
    return anchors.Anchor(
        role=role,
        surface_temperature=ts,
        available_energy=available,
        net_radiation=available,
        ground_heat_flux=0.0,
        roughness_length=z0m,
        air_density=rho,
        pixel_count=1.0,
        candidates=1,
        percentile=None,
        percentile_temperature=None,
        ts_range=None,
        row=0,
        col=0,
    )


# ------------------------------------------------------------------ independent forward model

Z1, Z2 = 0.1, 2.0  # heights of the temperature difference [m] (Bastiaanssen et al. 1998)

#: Upper limit of z/L on the stable side, the package's documented default
#: (``max_stable_z_over_l = 1.0``; common practice, no published source).
STABLE_Z_OVER_L_CAP = 1.0


def psi_momentum(z_over_l):
    """Integrated stability function for momentum: Paulson (1970) unstable, Webb (1970) stable."""
    zl = np.asarray(z_over_l, dtype=float)
    x = (1.0 - 16.0 * np.minimum(zl, 0.0)) ** 0.25
    unstable = (
        2.0 * np.log((1.0 + x) / 2.0)
        + np.log((1.0 + x * x) / 2.0)
        - 2.0 * np.arctan(x)
        + np.pi / 2.0
    )
    stable = -5.0 * np.minimum(zl, STABLE_Z_OVER_L_CAP)
    return np.where(zl < 0.0, unstable, stable)


def psi_heat(z_over_l):
    """Integrated stability function for heat: Paulson (1970) unstable, Webb (1970) stable."""
    zl = np.asarray(z_over_l, dtype=float)
    x = (1.0 - 16.0 * np.minimum(zl, 0.0)) ** 0.25
    unstable = 2.0 * np.log((1.0 + x * x) / 2.0)
    stable = -5.0 * np.minimum(zl, STABLE_Z_OVER_L_CAP)
    return np.where(zl < 0.0, unstable, stable)


@dataclasses.dataclass
class ForwardState:
    surface_temperature: np.ndarray  # [K]
    temperature_difference: np.ndarray  # dT [K]
    resistance: np.ndarray  # rah [s m-1]
    friction_velocity: np.ndarray  # u* [m s-1]
    inverse_length: np.ndarray  # 1/L [m-1]
    iterations: int


def forward_surface_temperature(
    sensible_heat,
    roughness_length,
    air_density,
    blending_wind_speed: float,
    a: float,
    b: float,
    surface_temperature=None,
    blending_height: float = BLENDING_HEIGHT,
    max_iterations: int = 1000,
) -> ForwardState:
    """Solve the anchor model forward at a prescribed H.

    At fixed H the chain 1/L -> u* -> rah -> dT = H rah / (rho cp) -> Ts = (dT - a) / b ->
    1/L = -k g H / (rho cp u*^3 Ts) is iterated to a fixed point (to 1e-12 K in dT), the
    same fixed point an inversion at fixed Ts must find. With ``surface_temperature`` given, Ts
    is held at it instead (the anchors of ``calibrate``) and a, b are not used.
    """
    h = np.asarray(sensible_heat, dtype=float)
    z0m = np.broadcast_to(np.asarray(roughness_length, dtype=float), h.shape)
    rho = np.broadcast_to(np.asarray(air_density, dtype=float), h.shape)
    inverse_length = np.zeros(h.shape)
    dt_prev = np.full(h.shape, np.nan)
    for iterations in range(1, max_iterations + 1):  # noqa: B007 (count reported)
        # log wind profile from the blending height down, stability corrected (Monin-Obukhov)
        u_star = (
            VON_KARMAN
            * blending_wind_speed
            / (np.log(blending_height / z0m) - psi_momentum(blending_height * inverse_length))
        )
        # resistance between z1 and z2 (Bastiaanssen et al. 1998)
        rah = (np.log(Z2 / Z1) - psi_heat(Z2 * inverse_length) + psi_heat(Z1 * inverse_length)) / (
            VON_KARMAN * u_star
        )
        dt = h * rah / (rho * SPECIFIC_HEAT_AIR)
        ts = (dt - a) / b if surface_temperature is None else np.asarray(surface_temperature)
        ts = np.broadcast_to(ts, h.shape)
        if np.all(np.abs(dt - dt_prev) < 1e-12):
            break
        dt_prev = dt
        # Monin-Obukhov length, L = -rho cp u*^3 Ts / (k g H); 1/L = 0 when neutral
        inverse_length = -VON_KARMAN * GRAVITY * h / (rho * SPECIFIC_HEAT_AIR * u_star**3 * ts)
    else:
        raise AssertionError("forward model did not converge")
    return ForwardState(ts, dt, rah, u_star, inverse_length, iterations)
