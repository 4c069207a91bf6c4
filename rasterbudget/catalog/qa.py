"""QA flag bits of the ``qa_flags`` raster (uint16). Each bit is documented in the README."""

from __future__ import annotations

from enum import IntFlag


class QA(IntFlag):
    """Bits set per pixel; several may be set at once."""

    INPUT_MISSING = 1 << 0
    ALBEDO_OUT_OF_CLASS_RANGE = 1 << 1
    SURFACE_TEMPERATURE_IMPLAUSIBLE = 1 << 2
    LOW_SUN_OR_SHADOW = 1 << 3
    LATENT_HEAT_CLIPPED_AT_ZERO = 1 << 4
    LATENT_HEAT_CLIPPED_AT_AVAILABLE = 1 << 5
    STABILITY_NOT_CONVERGED = 1 << 6
    COLD_ANCHOR = 1 << 7
    HOT_ANCHOR = 1 << 8
    NO_AVAILABLE_ENERGY = 1 << 9
    RESIDUAL_UNRELIABLE_CLASS = 1 << 10
    UNKNOWN_LAND_COVER = 1 << 11
    MASKED = 1 << 12


#: One line per bit for the README, the manifest and the report.
QA_DESCRIPTIONS: dict[QA, str] = {
    QA.INPUT_MISSING: "a required input (albedo, surface temperature, land cover, or a given "
    "NDVI/elevation) is nodata at this pixel; no fluxes computed",
    QA.ALBEDO_OUT_OF_CLASS_RANGE: "albedo outside its class's plausible range in the class table",
    QA.SURFACE_TEMPERATURE_IMPLAUSIBLE: "surface temperature outside 200-350 K; no fluxes computed",
    QA.LOW_SUN_OR_SHADOW: "sun lower than run's min_sun_elevation_deg above this pixel's (sloped) "
    "surface, or terrain self-shadow",
    QA.LATENT_HEAT_CLIPPED_AT_ZERO: "H exceeded Rn - G: LE set to 0 and H to Rn - G",
    QA.LATENT_HEAT_CLIPPED_AT_AVAILABLE: "LE exceeded residual.max_evaporative_fraction x (Rn - G) "
    "(1 by default, i.e. H was negative): LE set to that limit and H to the remainder",
    QA.STABILITY_NOT_CONVERGED: "Monin-Obukhov iteration did not converge at this pixel",
    QA.COLD_ANCHOR: "pixel belongs to the cold-anchor population",
    QA.HOT_ANCHOR: "pixel belongs to the hot-anchor population",
    QA.NO_AVAILABLE_ENERGY: "Rn - G below 1 W m-2: evaporative fraction and daily ET undefined",
    QA.RESIDUAL_UNRELIABLE_CLASS: "class marked residual_reliable = false (water, snow, built-up): "
    "LE is an energy residual, not a defensible ET estimate",
    QA.UNKNOWN_LAND_COVER: "land-cover code not in the class table; no fluxes computed",
    QA.MASKED: "dropped by the cloud/QA mask (inputs.cloud_mask); no fluxes computed",
}

#: Bits that leave a pixel without fluxes (all float outputs NaN).
QA_NO_FLUXES = (
    QA.INPUT_MISSING | QA.SURFACE_TEMPERATURE_IMPLAUSIBLE | QA.UNKNOWN_LAND_COVER | QA.MASKED
)

#: Bits that exclude a pixel from anchor candidates.
QA_NOT_ANCHOR = (
    QA_NO_FLUXES
    | QA.ALBEDO_OUT_OF_CLASS_RANGE
    | QA.LOW_SUN_OR_SHADOW
    | QA.NO_AVAILABLE_ENERGY
    | QA.RESIDUAL_UNRELIABLE_CLASS
)
