"""Where calibration anchors may stand: the screens a pixel must pass to be a cold or hot
anchor candidate, applied in order so that a scene without candidates can say which rule
removed them.

1. ``surface``: the pixel's surface may hold the anchor. By default (``"surface"``) every class
   whose residual is reliable may (water, snow and built-up may not), and the surface state
   decides the rest; with ``"classes"`` only the class table's ``cold_anchor`` / ``hot_anchor``
   classes may.
2. ``vegetation``: NDVI at least ``min_ndvi_cold`` (cold) or at most ``max_ndvi_hot`` (hot).
3. ``quality``: no QA problem (missing or masked input, albedo outside its class range, low
   sun, implausible Ts, ...).
4. ``elevation``: within ``anchor_elevation_range`` of the weather station.
5. ``illumination``: lit like flat ground: the cosine of the incidence angle on the DEM's slope
   within ``illumination_tolerance`` of the cosine of the solar zenith (a slope facing away
   from the sun is cold for lack of sun, not for evaporating; one facing it is hot for more).
6. ``homogeneity``: the 3 x 3 neighbourhood's standard deviation of Ts and of NDVI at most
   ``max_ts_spread`` and ``max_ndvi_spread`` (field edges and mixed thermal pixels are not
   anchors).
7. ``clouds``: no masked pixel within ``cloud_distance`` pixels (cloud edges and thin shadows
   the mask missed are cold).

Thresholds are common practice, stated so they can be changed (``[scene.anchors]``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = [
    "RULES",
    "ScreenSettings",
    "anchor_candidates",
    "homogeneous_pixels",
    "neighbourhood_features",
    "surface_rules",
]

#: The screens in the order they are applied; counts per rule follow "all" (every pixel).
RULES = (
    "all",
    "surface",
    "vegetation",
    "quality",
    "elevation",
    "illumination",
    "homogeneity",
    "clouds",
)
ROLES = ("cold", "hot")

#: Neighbourhood of the homogeneity screen: 3 x 3 pixels.
HOMOGENEITY_RADIUS = 1


@dataclass(frozen=True)
class ScreenSettings:
    """Thresholds of the anchor screens (``[scene.anchors]`` keys in brackets)."""

    surfaces: str = "surface"  # or "classes" [candidate_surfaces]
    min_ndvi_cold: float = 0.6  # [cold_min_ndvi]
    max_ndvi_hot: float = 0.25  # [hot_max_ndvi]
    elevation_range: float = np.inf  # [max_elevation_difference_m] [m]
    illumination_tolerance: float = 0.05  # [illumination_tolerance] [-]
    max_ts_spread: float = 1.0  # [max_ts_spread_k] [K]
    max_ndvi_spread: float = 0.05  # [max_ndvi_spread] [-]
    cloud_distance: int = 3  # [cloud_distance_px] [pixels]

    def halo(self, mask_halo: int = 0) -> int:
        """Pixels a block must be read beyond its edges for exact neighbourhood screens, when
        the cloud mask itself needs ``mask_halo`` (a derived mask's buffer)."""
        return max(HOMOGENEITY_RADIUS, self.cloud_distance + mask_halo)


def surface_rules(
    codes: np.ndarray,
    ndvi: np.ndarray | None,
    cold_classes: np.ndarray,
    hot_classes: np.ndarray,
    reliable_classes: np.ndarray,
    s: ScreenSettings,
) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """Rules 1 and 2 per role: (after ``surface``, after ``vegetation``), boolean arrays.

    ``cold_classes``, ``hot_classes``, ``reliable_classes``: 256-entry lookups by class code
    (``ClassLookups.cold_anchor`` ...).
    """
    out = {}
    for role, classes in (("cold", cold_classes), ("hot", hot_classes)):
        surface = (reliable_classes if s.surfaces == "surface" else classes)[codes]
        if ndvi is None:
            vegetation = surface
        else:
            with np.errstate(invalid="ignore"):
                ok = ndvi >= s.min_ndvi_cold if role == "cold" else ndvi <= s.max_ndvi_hot
            vegetation = surface & ok
        out[role] = (surface, vegetation)
    return out


def neighbourhood_features(
    surface_temperature: np.ndarray,
    ndvi: np.ndarray | None,
    masked: np.ndarray | None,
    cloud_distance: int,
) -> dict[str, np.ndarray]:
    """Per pixel: standard deviation of Ts and of NDVI over the 3 x 3 neighbourhood (NaN where
    a neighbour is missing) and whether a masked pixel lies within ``cloud_distance`` pixels.
    Exact inside a window read with :meth:`ScreenSettings.halo` extra pixels."""
    from scipy.ndimage import maximum_filter, uniform_filter

    size = 2 * HOMOGENEITY_RADIUS + 1

    def spread(values: np.ndarray) -> np.ndarray:
        # scipy's running sums carry a NaN along the whole row: filter NaN-free copies, then
        # blank the pixels with a missing neighbour
        finite = np.isfinite(values)
        clean = np.where(finite, values, 0.0)
        complete = uniform_filter(finite.astype(np.float64), size, mode="nearest") > 1 - 1e-9
        mean = uniform_filter(clean, size, mode="nearest")
        square = uniform_filter(clean * clean, size, mode="nearest")
        return np.where(complete, np.sqrt(np.maximum(square - mean * mean, 0.0)), np.nan)

    out = {"ts_spread": spread(surface_temperature)}
    if ndvi is not None:
        out["ndvi_spread"] = spread(ndvi)
    if masked is not None and cloud_distance > 0:
        out["near_mask"] = maximum_filter(masked, 2 * cloud_distance + 1, mode="nearest")
    return out


def homogeneous_pixels(
    features: dict[str, np.ndarray], s: ScreenSettings, shape: tuple[int, ...] | None = None
) -> np.ndarray:
    """Pixels whose neighbourhood passes the homogeneity screens (Ts and NDVI spread), from
    :func:`neighbourhood_features`, or as carried from an earlier pass (``homogeneous``)."""
    if "homogeneous" in features:
        return features["homogeneous"]
    if shape is None:
        shape = features["ts_spread"].shape
    homogeneous = np.ones(shape, dtype=bool)
    with np.errstate(invalid="ignore"):
        if "ts_spread" in features:
            homogeneous &= features["ts_spread"] <= s.max_ts_spread
        if "ndvi_spread" in features:
            homogeneous &= features["ndvi_spread"] <= s.max_ndvi_spread
    return homogeneous


def anchor_candidates(
    rules: dict[str, tuple[np.ndarray, np.ndarray]],
    clean: np.ndarray,
    near_station: np.ndarray,
    illumination: np.ndarray | None,
    features: dict[str, np.ndarray] | None,
    s: ScreenSettings,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Cold and hot candidates after every rule, and the pixels left after each rule.

    Parameters
    ----------
    rules : :func:`surface_rules` of the pixels.
    clean : no QA problem. [bool]
    near_station : within the elevation range of the station. [bool]
    illumination : cosine of incidence over cosine of the solar zenith; None without a DEM.
    features : :func:`neighbourhood_features` of the pixels, or None (no neighbourhood
        screens: a single pixel, a user-given anchor).

    Returns
    -------
    cold, hot : boolean arrays.
    counts : int64 array (2, len(RULES)): per role, pixels left after each rule.
    """
    features = features or {}
    with np.errstate(invalid="ignore"):
        lit = (
            np.ones(clean.shape, dtype=bool)
            if illumination is None
            else np.abs(illumination - 1.0) <= s.illumination_tolerance
        )
        homogeneous = homogeneous_pixels(features, s, clean.shape)
    away = ~features["near_mask"] if "near_mask" in features else np.ones(clean.shape, bool)
    counts = np.zeros((2, len(RULES)), dtype=np.int64)
    out = []
    for r, role in enumerate(ROLES):
        surface, vegetation = rules[role]
        steps = [surface, vegetation]
        for screen in (clean, near_station, lit, homogeneous, away):
            steps.append(steps[-1] & screen)
        counts[r] = [clean.size, *(np.count_nonzero(x) for x in steps)]
        out.append(steps[-1])
    return out[0], out[1], counts


def describe_counts(counts: np.ndarray, role: str) -> str:
    """``all 90000, surface 88000, vegetation 0 ...``: the pixels left after each rule."""
    row = counts[ROLES.index(role)]
    return ", ".join(f"{rule} {int(n)}" for rule, n in zip(RULES, row, strict=True))


#: What to change when a rule removed the last candidates, per rule.
ADVICE = {
    "surface": "no pixel lies on a class with a reliable residual (water, snow and built-up "
    "are excluded): check the land-cover map or the recognised surfaces (--components writes "
    "surface_class)",
    "surface_classes": "no pixel lies on a class the class table lets hold this anchor: give "
    "a land-cover map with such classes, or anchors.candidate_surfaces = 'surface' to let any "
    "class with a reliable residual hold it",
    "vegetation": "change anchors.cold_min_ndvi / anchors.hot_max_ndvi (the scene's NDVI range is "
    "in inspect's table)",
    "quality": "check the QA counts in inspect (masked, albedo outside its class range, low sun, "
    "missing inputs)",
    "elevation": "raise anchors.max_elevation_difference_m or check overpass.station_elevation_m",
    "illumination": "raise anchors.illumination_tolerance (terrain: few flat or evenly lit pixels)",
    "homogeneity": "raise anchors.max_ts_spread_k or anchors.max_ndvi_spread (small fields)",
    "clouds": "lower anchors.cloud_distance_px",
}


def advice(rule: str, surfaces: str = "surface") -> str:
    """What to change when ``rule`` removed the last candidates."""
    if rule == "surface" and surfaces == "classes":
        return ADVICE["surface_classes"]
    return ADVICE[rule]


def removing_rule(counts: np.ndarray, role: str, needed: int) -> str:
    """The first rule after which fewer than ``needed`` candidates are left."""
    row = counts[ROLES.index(role)]
    for rule, n in zip(RULES[1:], row[1:], strict=True):
        if n < needed:
            return rule
    return RULES[-1]
