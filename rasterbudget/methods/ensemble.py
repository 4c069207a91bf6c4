"""Ensemble members for the uncertainty of daily ET under the anchor method.

Each member perturbs what an analyst does not know well: the cold and hot anchor percentiles,
the cold-anchor condition (its evaporative fraction, or its multiple of reference ET), the air
temperature at overpass, the wind speed, and the inputs' errors: a surface-temperature offset, an
albedo offset and a reference-ET factor. A surface-temperature offset shared by all pixels is
largely absorbed by the anchor calibration (dT = a + b Ts is refitted on the offset anchors), so
it enters through the emitted longwave only; a reference-ET factor enters through the cold
anchor's multiple of reference ET (a fraction of reference ET times the same reference ET does
not change). Members are drawn by Latin hypercube sampling over
the recipe's ranges (scipy.stats.qmc), so a handful of members spans every range. All members
share both passes over the rasters: the anchor histograms carry per-member sums, and pass 2
evaluates every member on each block.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np
from pydantic import Field, model_validator

from .base import StrictSettings


class UncertaintySettings(StrictSettings):
    """``[scene.uncertainty]``: ensemble members over what is not known well (anchors method)."""

    members: int = Field(0, ge=0, le=64)
    cold_percentile_range: tuple[float, float] = (2.0, 10.0)
    hot_percentile_range: tuple[float, float] = (90.0, 98.0)
    cold_anchor_factor_range: tuple[float, float] = (0.95, 1.05)
    air_temperature_offset_range_c: tuple[float, float] = (-1.5, 1.5)
    wind_factor_range: tuple[float, float] = (0.8, 1.2)
    # input errors (common practice): Landsat surface temperature about +-1.5 K, broadband
    # albedo about +-0.02, a station's reference ET about +-10 %
    surface_temperature_offset_range_k: tuple[float, float] = (-1.5, 1.5)
    albedo_offset_range: tuple[float, float] = (-0.02, 0.02)
    reference_et_factor_range: tuple[float, float] = (0.9, 1.1)
    seed: int = 20260612

    @model_validator(mode="after")
    def _ordered(self) -> UncertaintySettings:
        for name in (
            "cold_percentile_range",
            "hot_percentile_range",
            "cold_anchor_factor_range",
            "air_temperature_offset_range_c",
            "wind_factor_range",
            "surface_temperature_offset_range_k",
            "albedo_offset_range",
            "reference_et_factor_range",
        ):
            low, high = getattr(self, name)
            if low > high:
                raise ValueError(f"{name} must be [low, high], got [{low}, {high}]")
        if self.members == 1:
            raise ValueError("members must be 0 (no ensemble) or at least 2")
        return self


#: Percentiles of the member distribution written per pixel.
ENSEMBLE_PERCENTILES = (10.0, 90.0)


@dataclass(frozen=True)
class Member:
    """One ensemble member's perturbed inputs."""

    cold_percentile: float  # [%]
    hot_percentile: float  # [%]
    cold_anchor_factor: float  # multiplies the cold-anchor EF or reference-ET multiple [-]
    air_temperature_offset: float  # added to the overpass air temperature [K]
    wind_factor: float  # multiplies the overpass wind speed [-]
    surface_temperature_offset: float = 0.0  # added to every pixel's Ts [K]
    albedo_offset: float = 0.0  # added to every pixel's albedo [-]
    reference_et_factor: float = 1.0  # multiplies the station's reference ET [-]

    @property
    def offsets(self) -> tuple[float, float, float]:
        """(air temperature, albedo, surface temperature) offsets of the surface state."""
        return self.air_temperature_offset, self.albedo_offset, self.surface_temperature_offset

    def as_dict(self) -> dict:
        return asdict(self)


def sample_members(settings: UncertaintySettings) -> list[Member]:
    """Latin hypercube sample of ``settings.members`` members over the stated ranges."""
    if settings.members < 2:
        return []
    ranges = np.array(
        [
            settings.cold_percentile_range,
            settings.hot_percentile_range,
            settings.cold_anchor_factor_range,
            settings.air_temperature_offset_range_c,  # an offset in degC is an offset in K
            settings.wind_factor_range,
            settings.surface_temperature_offset_range_k,
            settings.albedo_offset_range,
            settings.reference_et_factor_range,
        ]
    )
    from scipy.stats import qmc  # here: scipy.stats takes ~1.4 s to import

    unit = qmc.LatinHypercube(d=len(ranges), seed=settings.seed).random(settings.members)
    # linear map of [0, 1) onto each [low, high]; a range with low == high fixes that input
    values = ranges[:, 0] + unit * (ranges[:, 1] - ranges[:, 0])
    return [Member(*map(float, row)) for row in values]


#: Percentiles of totals over the members (seasons, zones, comparisons): name -> percentile.
TOTAL_PERCENTILES = {"p10": 10.0, "p50": 50.0, "p90": 90.0}


def member_percentiles(values, axis: int = 0) -> dict:
    """:data:`TOTAL_PERCENTILES` of ``values`` over the members' ``axis``, by name; each NaN
    where any member is NaN."""
    values = np.asarray(values, dtype=np.float64)
    found = np.percentile(values, list(TOTAL_PERCENTILES.values()), axis=axis)
    return dict(zip(TOTAL_PERCENTILES, found, strict=True))


def member_spread(means, quantity: str) -> dict:
    """The members' means of ``quantity`` and their p10, p50 and p90, for a manifest."""
    means = np.array([float(m) for m in means])
    return {
        "members": len(means),
        quantity: {k: float(v) for k, v in member_percentiles(means).items()},
        f"member_{quantity}": means.tolist(),
    }


def ensemble_percentiles(members: np.ndarray, overwrite: bool = False) -> np.ndarray:
    """Per-pixel percentiles over the leading member axis (NaN where any member is NaN);
    ``overwrite``: ``members`` may be reordered in place (no copy of the members' block)."""
    return np.percentile(members, ENSEMBLE_PERCENTILES, axis=0, overwrite_input=overwrite)
