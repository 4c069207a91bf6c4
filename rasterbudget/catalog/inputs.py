"""The registry of input roles: what each input raster is, and how it is read.

A row per role: whether a scene needs it, whether it holds categories (class codes, mask bits:
resampled by nearest neighbour) or continuous values (bilinear), its units once read, where the
recipe names it, and whether the target grid is taken from it; a derived input names the inputs
it is computed from and how. Scene runs and ``inspect`` list, open and check their inputs here.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
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

    @property
    def recipe_key(self) -> str:
        return f"{self.section}.{self.name}"


def _broadband_albedo(blue, red, nir, swir1, swir2):
    from ..physics.radiometry import albedo_liang_tm_etm

    return albedo_liang_tm_etm(blue, red, nir, swir1, swir2)


def _ndvi(red, nir):
    from ..physics.radiometry import ndvi

    return ndvi(red, nir)


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
    InputRole("surface_temperature", "inputs", True, False, "K", "land-surface temperature"),
    InputRole("land_cover", "inputs", True, True, "code", "land-cover class codes"),
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
    InputRole("cloud_mask", "inputs", False, True, "code", "cloud/QA mask values or bits"),
    *(
        InputRole(band, "product", False, False, "1", f"surface reflectance, {band} band")
        for band in _REFLECTANCE_BANDS
    ),
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


def derive_inputs(data: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Add to a block's inputs every derived input it lacks whose sources it holds."""
    for role in INPUTS.values():
        if role.derive is None or role.name in data:
            continue
        if all(name in data for name in role.derived_from):
            data[role.name] = role.derive(*(data[name] for name in role.derived_from))
    return data


def target_role(available: Iterable[str] = ()) -> str:
    """The role whose raster gives the target grid: the target role, or when it is derived and
    not given, the first of the roles it is derived from among ``available``."""
    target = next(r for r in INPUTS.values() if r.target)
    available = set(available)
    if target.name in available or not available:
        return target.name
    return next((n for n in target.derived_from if n in available), target.name)
