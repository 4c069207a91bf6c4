"""The registry of input roles: what each input raster is, and how it is read.

A row per role: whether a scene needs it, whether it holds categories (class codes, mask bits:
resampled by nearest neighbour) or continuous values (bilinear), its units once read, where the
recipe names it, and whether the target grid is taken from it. Scene runs and ``inspect`` list,
open and check their inputs from here.
"""

from __future__ import annotations

from dataclasses import dataclass

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

    @property
    def recipe_key(self) -> str:
        return f"{self.section}.{self.name}"


_ROWS = (
    InputRole("albedo", "inputs", True, False, "1", "broadband surface albedo", target=True),
    InputRole("surface_temperature", "inputs", True, False, "K", "land-surface temperature"),
    InputRole("land_cover", "inputs", True, True, "code", "land-cover class codes"),
    InputRole("ndvi", "inputs", False, False, "1", "normalized difference vegetation index"),
    InputRole("elevation", "inputs", False, False, "m", "elevation above sea level", halo=1),
    InputRole("cloud_mask", "inputs", False, True, "code", "cloud/QA mask values or bits"),
    InputRole("air_temperature_c", "overpass", False, False, "degC", "air temperature"),
    InputRole("relative_humidity_pct", "overpass", False, False, "%", "relative humidity"),
    InputRole("wind_speed_m_s", "overpass", False, False, "m s-1", "wind speed"),
    InputRole("shortwave_in_w_m2", "overpass", False, False, "W m-2", "incoming shortwave"),
)

INPUTS: dict[str, InputRole] = {r.name: r for r in _ROWS}
"""Every input role by name, in the order a scene reads them."""

#: Overpass weather keys that may be rasters (gridded weather), read like any input.
WEATHER_ROLES = tuple(n for n, r in INPUTS.items() if r.section == "overpass")

#: Inputs holding class codes are resampled with nearest neighbour; all others bilinearly.
CATEGORICAL = frozenset(n for n, r in INPUTS.items() if r.categorical)


def target_role() -> str:
    """The role whose raster gives the target grid."""
    return next(n for n, r in INPUTS.items() if r.target)
