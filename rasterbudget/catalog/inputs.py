"""The registry of input roles: what each input raster is, and how it is read.

A row per role: whether a scene needs it, whether it holds categories (class codes, mask bits:
resampled by nearest neighbour) or continuous values (bilinear), its units once read, where the
recipe names it, and whether the target grid is taken from it; a derived input names the inputs
it is computed from and how. Scene runs and ``inspect`` list, open and check their inputs here.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass

import numpy as np

from ..physics.constants import ZERO_CELSIUS

__all__ = ["CATEGORICAL", "INPUTS", "WEATHER_ROLES", "InputRole", "target_role"]


@dataclass(frozen=True)
class InputRole:
    """One input role."""

    name: str
    section: str  # the recipe table that names it: "inputs" or "overpass"
    required: bool
    categorical: bool
    units: str  # once read: the recipe's scale, offset and units applied
    description: str
    target: bool = False  # the target grid is this input's (unless [scene.grid] is given)
    halo: int = 0  # extra pixels read around each window (slopes need 1)
    quantity: str = ""  # the per-pixel quantity it gives, in SI units (weather only)
    si_offset: float = 0.0  # added on reading to reach SI units (degC -> K)
    #: a derived input: computed per block from these other inputs when not given as a file
    derived_from: tuple[str, ...] = ()
    derive: Callable[..., np.ndarray] | None = None
    #: scene facts the derivation takes as keywords (a product's calibration, the weather);
    #: the input is derived only where the scene holds them
    facts: tuple[str, ...] = ()
    #: inputs the derivation uses as keywords where the block holds them (not needed)
    optional_from: tuple[str, ...] = ()

    @property
    def recipe_key(self) -> str:
        return f"{self.section}.{self.name}"


def _broadband_albedo(blue, red, nir, swir1, swir2):
    from ..physics.radiometry import albedo_liang_tm_etm

    return albedo_liang_tm_etm(blue, red, nir, swir1, swir2)


def _ndvi(red, nir):
    from ..physics.radiometry import ndvi

    return ndvi(red, nir)


def _surface_temperature(
    thermal_radiance,
    ndvi,
    red,
    *,
    thermal_k1,
    thermal_k2,
    thermal_transmittance,
    upwelling_radiance,
    downwelling_radiance,
):
    from ..physics.radiometry import surface_temperature, thermal_emissivity_from_ndvi

    emissivity = thermal_emissivity_from_ndvi(ndvi, red)
    # open water (NDVI below 0): 0.99, outside the NDVI rule's range (common practice)
    emissivity = np.where(ndvi < 0.0, 0.99, emissivity)
    return surface_temperature(
        thermal_radiance,
        thermal_k1,
        thermal_k2,
        emissivity,
        thermal_transmittance,
        upwelling_radiance,
        downwelling_radiance,
    )


def _land_cover(ndvi, albedo, swir1=None):
    from .surfaces import surface_classes

    return surface_classes(ndvi, albedo, swir1)


def _cloud_screen(blue, nir, swir1, ndvi, surface_temperature, *, screen_air_temperature):
    from .surfaces import cloud_and_shadow

    return cloud_and_shadow(blue, nir, swir1, ndvi, surface_temperature, screen_air_temperature)


_REFLECTANCE_BANDS = ("blue", "red", "nir", "swir1", "swir2")

_ROWS = (
    InputRole(
        "albedo",
        "inputs",
        True,
        False,
        "1",
        "broadband surface albedo",
        target=True,
        # from surface reflectance: Liang (2001) TM/ETM+ weights (on OLI: an adaptation)
        derived_from=_REFLECTANCE_BANDS,
        derive=_broadband_albedo,
    ),
    InputRole(
        "surface_temperature",
        "inputs",
        True,
        False,
        "K",
        "land-surface temperature",
        # a Level-1 thermal band: single-channel retrieval, band emissivity from NDVI
        derived_from=("thermal_radiance", "ndvi", "red"),
        derive=_surface_temperature,
        facts=(
            "thermal_k1",
            "thermal_k2",
            "thermal_transmittance",
            "upwelling_radiance",
            "downwelling_radiance",
        ),
    ),
    InputRole(
        "land_cover",
        "inputs",
        False,
        True,
        "code",
        "land-cover class codes",
        # without a land-cover map: surfaces recognised from NDVI and albedo (catalog.surfaces)
        derived_from=("ndvi", "albedo"),
        derive=_land_cover,
        optional_from=("swir1",),
    ),
    InputRole(
        "ndvi",
        "inputs",
        False,
        False,
        "1",
        "normalized difference vegetation index",
        derived_from=("red", "nir"),
        derive=_ndvi,
    ),
    InputRole("elevation", "inputs", False, False, "m", "elevation above sea level", halo=1),
    InputRole(
        "cloud_mask",
        "inputs",
        False,
        True,
        "code",
        "cloud/QA mask values or bits",
        # a Level-1 product without a QA band: a screen of bright-cold and dark pixels
        derived_from=("blue", "nir", "swir1", "ndvi", "surface_temperature"),
        derive=_cloud_screen,
        facts=("screen_air_temperature",),
    ),
    *(
        InputRole(band, "product", False, False, "1", f"surface reflectance, {band} band")
        for band in _REFLECTANCE_BANDS
    ),
    InputRole(
        "thermal_radiance",
        "product",
        False,
        False,
        "W m-2 sr-1 um-1",
        "at-sensor spectral radiance of the thermal band",
    ),
    InputRole(
        "hourly_raster",
        "reference_et",
        False,
        False,
        "mm h-1",
        "reference ET of the overpass hour",
    ),
    InputRole("daily_raster", "reference_et", False, False, "mm d-1", "reference ET of the day"),
    InputRole(
        "air_temperature_c",
        "overpass",
        False,
        False,
        "degC",
        "air temperature",
        quantity="air_temperature",  # [K]
        si_offset=ZERO_CELSIUS,
    ),
    InputRole(
        "relative_humidity_pct",
        "overpass",
        False,
        False,
        "%",
        "relative humidity",
        quantity="relative_humidity",  # [%], as FAO-56 writes its humidity formulas
    ),
    InputRole(
        "wind_speed_m_s", "overpass", False, False, "m s-1", "wind speed", quantity="wind_speed"
    ),
    InputRole(
        "shortwave_in_w_m2",
        "overpass",
        False,
        False,
        "W m-2",
        "incoming shortwave",
        quantity="shortwave_in",
    ),
)

INPUTS: dict[str, InputRole] = {r.name: r for r in _ROWS}
"""Every input role by name, in the order a scene reads them."""

#: Overpass weather keys that may be rasters (gridded weather), read like any input.
WEATHER_ROLES = tuple(n for n, r in INPUTS.items() if r.section == "overpass")

#: Inputs holding class codes are resampled with nearest neighbour; all others bilinearly.
CATEGORICAL = frozenset(n for n, r in INPUTS.items() if r.categorical)


def gridded_weather_in_si(data: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """The gridded weather among a block's inputs, by quantity, in SI units: the one place
    where weather rasters leave the recipe's units (wind enters H apart, not the state)."""
    return {
        INPUTS[k].quantity: data[k] + INPUTS[k].si_offset if INPUTS[k].si_offset else data[k]
        for k in WEATHER_ROLES
        if k in data and k != "wind_speed_m_s"
    }


def derive_inputs(
    data: dict[str, np.ndarray],
    facts: Mapping[str, float] | None = None,
    skip: tuple[str, ...] = (),
) -> dict[str, np.ndarray]:
    """Add to a block's inputs every derived input it lacks whose sources and scene facts it
    holds, until none is left to add (a derived input may be the source of another); the roles
    in ``skip`` are not derived (their results are known otherwise)."""
    facts = facts or {}
    added = True
    while added:
        added = False
        for role in INPUTS.values():
            if role.derive is None or role.name in data or role.name in skip:
                continue
            if all(n in data for n in role.derived_from) and all(f in facts for f in role.facts):
                sources = (data[name] for name in role.derived_from)
                keywords = {f: facts[f] for f in role.facts}
                keywords |= {n: data[n] for n in role.optional_from if n in data}
                data[role.name] = role.derive(*sources, **keywords)
                added = True
    return data


def target_role(available: Iterable[str] = ()) -> str:
    """The role whose raster gives the target grid: the target role, or when it is derived and
    not given, the first of the roles it is derived from among ``available``."""
    target = next(r for r in INPUTS.values() if r.target)
    available = set(available)
    if target.name in available or not available:
        return target.name
    return next((n for n in target.derived_from if n in available), target.name)
