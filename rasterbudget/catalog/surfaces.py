"""Surfaces recognised from the surface state when a scene has no land-cover map, and the
cloud and cloud-shadow screen of Level-1 products that carry no QA band.

Every threshold below is common practice (typical working values of Landsat energy-balance and
cloud-screening work), not a published calibration: they are stated so that a user can judge
and replace them (give a land-cover raster, or a cloud mask).
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "CLOUD_BIT",
    "SHADOW_BIT",
    "SURFACE_CODES",
    "buffered_mask",
    "cloud_and_shadow",
    "surface_classes",
]

#: Codes of the built-in class table (``data/classes.toml``) given to recognised surfaces.
SURFACE_CODES = {
    "bare_soil": 5,
    "open_water": 6,
    "built_up": 7,
    "snow_ice": 9,
    "vegetation_sparse": 10,
    "vegetation_dense": 11,
}

#: Recognition thresholds (common practice).
WATER_MAX_NDVI = 0.0  # open water reflects less in the near infrared than in the red
WATER_MAX_ALBEDO = 0.15
WATER_MAX_SWIR1 = 0.05  # water absorbs at 1.6 um; asphalt and roofs (also NDVI < 0) do not
SNOW_MIN_ALBEDO = 0.45  # snow and ice are bright; vegetation and soil rarely exceed 0.40
SNOW_MAX_NDVI = 0.2
BARE_MAX_NDVI = 0.2  # below: bare or nearly bare ground
DENSE_MIN_NDVI = 0.5  # above: closed canopy (fractional cover near 1 in Carlson & Ripley 1997)

#: Bits of the derived cloud mask, at the places of the Collection 2 QA_PIXEL cloud (3) and
#: cloud-shadow (4) bits, so the same drop rule reads both.
CLOUD_BIT, SHADOW_BIT = 3, 4
#: Bit of pixels near a screened cloud or shadow (QA_PIXEL's dilated-cloud bit) and the
#: buffer's width: 3 pixels, 90 m at 30 m, catch the cold, dim edges the per-pixel rules miss
#: (on the shared real ETM+ scene it removed every clear pixel below 285 K; common practice).
#: Only flagged pixels with at least 3 flagged neighbours grow a buffer, so that single dark
#: pixels (a pond, a building's shade) do not each cost a 7 x 7 square.
BUFFER_BIT, BUFFER_PIXELS, BUFFER_MIN_NEIGHBOURS = 1, 3, 3
#: Halo a block needs for :func:`buffered_mask`: the buffer plus the neighbour count.
BUFFER_HALO = BUFFER_PIXELS + 1
CLOUD_MIN_BLUE = 0.20  # at-surface blue reflectance: clouds are bright in the blue, land not
CLOUD_MIN_SWIR1 = 0.10  # clouds stay bright at 1.6 um, snow turns dark
SHADOW_MAX_NIR = 0.10  # lit vegetation and soils reflect more than 0.15 in the near infrared
SHADOW_MAX_SWIR1 = 0.08


def surface_classes(
    ndvi: np.ndarray, albedo: np.ndarray, swir1: np.ndarray | None = None
) -> np.ndarray:
    """Class codes of the built-in table recognised from NDVI, broadband albedo and, where
    given, the SWIR1 reflectance (common practice thresholds above).

    Water: NDVI < 0, albedo < 0.15 and SWIR1 < 0.05 (without SWIR1: the first two); built-up:
    other pixels of NDVI < 0 when SWIR1 is given (roofs and paving; bare soils have NDVI above
    0); snow and ice: albedo > 0.45 and NDVI < 0.2; bare soil: NDVI < 0.2; dense vegetation:
    NDVI >= 0.5; sparse vegetation between. Built-up land with some vegetation is not told apart
    from vegetation or soil; where it matters, give a land-cover map. NaN where NDVI or albedo
    is missing.
    """
    ndvi = np.asarray(ndvi, dtype=np.float64)
    albedo = np.asarray(albedo, dtype=np.float64)
    codes = np.full(np.broadcast(ndvi, albedo).shape, float(SURFACE_CODES["vegetation_sparse"]))
    codes = np.where(ndvi >= DENSE_MIN_NDVI, SURFACE_CODES["vegetation_dense"], codes)
    codes = np.where(ndvi < BARE_MAX_NDVI, SURFACE_CODES["bare_soil"], codes)
    snow = (albedo > SNOW_MIN_ALBEDO) & (ndvi < SNOW_MAX_NDVI)
    water = (ndvi < WATER_MAX_NDVI) & (albedo < WATER_MAX_ALBEDO)
    if swir1 is not None:
        water &= swir1 < WATER_MAX_SWIR1
        built = (ndvi < WATER_MAX_NDVI) & ~snow & ~water
        codes = np.where(built, SURFACE_CODES["built_up"], codes)
    codes = np.where(snow, SURFACE_CODES["snow_ice"], codes)
    codes = np.where(water, SURFACE_CODES["open_water"], codes)
    return np.where(np.isfinite(ndvi) & np.isfinite(albedo), codes, np.nan)


def cloud_and_shadow(
    blue: np.ndarray,
    nir: np.ndarray,
    swir1: np.ndarray,
    ndvi: np.ndarray,
    surface_temperature: np.ndarray,
    air_temperature: float,
) -> np.ndarray:
    """A cloud and cloud-shadow mask from at-surface reflectance and surface temperature.

    Cloud: blue > 0.20, SWIR1 > 0.10 and colder than the air at the station (bright, cold
    and not snow). Shadow: near infrared < 0.10 and SWIR1 < 0.08 on land (NDVI >= 0): lit land
    is brighter, water is excluded by its NDVI. Values: bit 3 set for cloud, bit 4 for shadow
    (as in Collection 2 QA_PIXEL), 0 clear (common practice; no neighbourhood buffer).
    """
    with np.errstate(invalid="ignore"):
        cloud = (
            (blue > CLOUD_MIN_BLUE)
            & (swir1 > CLOUD_MIN_SWIR1)
            & (surface_temperature < air_temperature)
        )
        shadow = (nir < SHADOW_MAX_NIR) & (swir1 < SHADOW_MAX_SWIR1) & (ndvi >= WATER_MAX_NDVI)
    mask = np.where(cloud, 1 << CLOUD_BIT, 0) | np.where(shadow & ~cloud, 1 << SHADOW_BIT, 0)
    return mask.astype(np.float64)


def buffered_mask(
    mask: np.ndarray, pixels: int = BUFFER_PIXELS, bit: int = BUFFER_BIT
) -> np.ndarray:
    """``mask`` with ``bit`` set on clear pixels within ``pixels`` (a square of side
    ``2 pixels + 1``) of a flagged pixel that has at least ``BUFFER_MIN_NEIGHBOURS`` flagged
    neighbours; flagged pixels keep their bits. Exact inside a window read with a halo of
    ``pixels + 1``."""
    from scipy.ndimage import convolve, maximum_filter

    flagged = np.nan_to_num(mask, nan=0.0) > 0
    ring = np.ones((3, 3), dtype=np.int16)
    ring[1, 1] = 0
    neighbours = convolve(flagged.astype(np.int16), ring, mode="nearest")
    seeds = flagged & (neighbours >= BUFFER_MIN_NEIGHBOURS)
    near = maximum_filter(seeds, size=2 * pixels + 1, mode="nearest") & ~flagged
    return np.where(near, float(1 << bit), mask)
