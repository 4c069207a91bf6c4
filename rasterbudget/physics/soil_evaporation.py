"""Evaporation from the surface soil layer after rain: FAO-56's evaporation reduction approach.

After a wetting the topmost soil layer (depth :math:`Z_e`, 0.10–0.15 m) dries in two stages
(FAO-56 ch. 7): while its cumulative depletion :math:`D_e` is at most the readily evaporable
water REW, evaporation is limited only by the energy available at the surface (stage 1);
beyond REW it falls linearly with the water left, reaching zero when the total evaporable water
TEW is gone (stage 2). These functions give the evaporation that the driest, bare or sparsely
vegetated pixels of a scene (the hot anchor) still have on the image day, from the days of rain
and reference ET before it.

Depths of water are in mm, water contents in m3 m-3, the reference ET in mm d-1; coefficients
are dimensionless and relative to the grass reference ETo.

Sources
-------
- Allen, R. G., Pereira, L. S., Raes, D. and Smith, M. (1998). Crop evapotranspiration:
  guidelines for computing crop water requirements. FAO Irrigation and Drainage Paper 56.
  FAO, Rome. Chapter 7 (dual crop coefficient), eqs. 71–77; the bounds on the depletion and
  the deep percolation of the layer are eqs. 78 and 79 there (numbers from memory).
"""

from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike

from ..errors import InputValueError

__all__ = [
    "BARE_SOIL_BASAL",
    "EVAPORATION_LAYER_DEPTH",
    "KC_MAX_BASE",
    "SurfaceEvaporation",
    "evaporation_reduction",
    "max_crop_coefficient",
    "soil_evaporation_coefficient",
    "surface_evaporation_series",
    "total_evaporable_water",
]

EVAPORATION_LAYER_DEPTH = 0.10
"""Depth :math:`Z_e` of the surface soil layer that dries by evaporation; FAO-56 ch. 7
recommends 0.10–0.15 m (from memory). [m]"""

BARE_SOIL_BASAL = 0.15
"""Basal crop coefficient of bare soil with a dry surface, :math:`K_{c\\,min}`; FAO-56 ch. 7
gives about 0.15–0.20 for annual crops with nearly bare soil (from memory). [-]"""

KC_MAX_BASE = 1.20
"""Upper limit of :math:`K_c` after a wetting under standard climate (:math:`u_2` = 2 m s-1,
:math:`RH_{min}` = 45 %), the constant of FAO-56 eq. 72. [-]"""


class SurfaceEvaporation(NamedTuple):
    """Daily water balance of the evaporating layer (see :func:`surface_evaporation_series`).

    Every field has the series' shape: days along axis 0, then the broadcast shape of the
    pixels and parameters.
    """

    depletion_start: np.ndarray
    """Depletion of the layer after the day's rain and before its evaporation; :math:`K_r`
    is computed from it. [mm]"""
    reduction: np.ndarray
    """Evaporation reduction coefficient :math:`K_r` of the day (FAO-56 eq. 74). [-]"""
    ke: np.ndarray
    """Soil evaporation coefficient :math:`K_e` of the day (FAO-56 eq. 71). [-]"""
    evaporation: np.ndarray
    """Evaporation from the soil surface, per unit of the whole surface. [mm d-1]"""
    depletion_end: np.ndarray
    """Depletion of the layer at the end of the day, in [0, TEW]. [mm]"""
    deep_percolation: np.ndarray
    """The day's rain in excess of the depletion, which drains below the layer (FAO-56
    eq. 79, number from memory). [mm d-1]"""


def total_evaporable_water(
    field_capacity: ArrayLike,
    wilting_point: ArrayLike,
    evaporation_depth: ArrayLike = EVAPORATION_LAYER_DEPTH,
) -> np.ndarray | float:
    r"""Total evaporable water of the surface soil layer.

    Parameters
    ----------
    field_capacity : array_like
        Volumetric soil water content at field capacity, :math:`\theta_{FC}`. [m3 m-3]
    wilting_point : array_like
        Volumetric soil water content at wilting point, :math:`\theta_{WP}`. [m3 m-3]
    evaporation_depth : array_like, default 0.10
        Depth :math:`Z_e` of the layer that dries by evaporation, 0.10–0.15 m
        (:data:`EVAPORATION_LAYER_DEPTH`). [m]

    Returns
    -------
    numpy.ndarray or float
        Total evaporable water TEW, the most that can evaporate from the layer once it has
        been wetted to field capacity. [mm]

    Notes
    -----
    FAO-56 eq. 73 [1]_:

    .. math:: TEW = 1000 \left(\theta_{FC} - 0.5\,\theta_{WP}\right) Z_e

    The layer can dry to about half-way between wilting point and oven dry, hence the
    :math:`0.5\,\theta_{WP}`.

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eq. 73.
    """
    theta_fc = np.asarray(field_capacity, dtype=float)
    theta_wp = np.asarray(wilting_point, dtype=float)
    return (1000.0 * (theta_fc - 0.5 * theta_wp) * evaporation_depth)[()]  # FAO-56 eq. 73


def evaporation_reduction(
    depletion: ArrayLike, readily_evaporable: ArrayLike, total_evaporable: ArrayLike
) -> np.ndarray | float:
    r"""Evaporation reduction coefficient of the surface soil layer.

    Parameters
    ----------
    depletion : array_like
        Cumulative depletion :math:`D_e` of the layer since it was last at field capacity. [mm]
    readily_evaporable : array_like
        Readily evaporable water REW, the depletion at which stage 1 ends. [mm]
    total_evaporable : array_like
        Total evaporable water TEW (:func:`total_evaporable_water`). [mm]

    Returns
    -------
    numpy.ndarray or float
        :math:`K_r` in [0, 1]: 1 in stage 1, falling linearly to 0 at TEW in stage 2. [-]

    Notes
    -----
    FAO-56 eq. 74 [1]_:

    .. math::

        K_r = \begin{cases}
            1 & D_e \le REW \\
            \dfrac{TEW - D_e}{TEW - REW} & D_e > REW
        \end{cases}

    A depletion beyond TEW gives 0. Where TEW equals REW, stage 2 has no length and
    :math:`K_r` drops from 1 to 0 beyond REW. A NaN in any input gives NaN.

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eq. 74.
    """
    d_e = np.asarray(depletion, dtype=float)
    rew = np.asarray(readily_evaporable, dtype=float)
    tew = np.asarray(total_evaporable, dtype=float)
    span = tew - rew
    with np.errstate(divide="ignore", invalid="ignore"):
        falling = np.where(span > 0.0, (tew - d_e) / span, 0.0)  # FAO-56 eq. 74, stage 2
    kr = np.where(d_e <= rew, 1.0, np.clip(falling, 0.0, 1.0))  # stage 1: Kr = 1
    return np.where(np.isnan(d_e) | np.isnan(rew) | np.isnan(tew), np.nan, kr)[()]


def max_crop_coefficient(
    wind_speed_2m: ArrayLike,
    rh_min: ArrayLike,
    crop_height: ArrayLike,
    basal: ArrayLike = BARE_SOIL_BASAL,
) -> np.ndarray | float:
    r"""Upper limit of the crop coefficient after a wetting, adjusted for climate.

    Parameters
    ----------
    wind_speed_2m : array_like
        Mean daily wind speed at 2 m over grass, :math:`u_2`. [m s-1]
    rh_min : array_like
        Mean daily minimum relative humidity, :math:`RH_{min}`. [%]
    crop_height : array_like
        Mean maximum height of the vegetation during the period, :math:`h`; 0 for bare
        soil. [m]
    basal : array_like, default 0.15
        Basal crop coefficient :math:`K_{cb}` (:data:`BARE_SOIL_BASAL`). [-]

    Returns
    -------
    numpy.ndarray or float
        :math:`K_{c\,max}`. [-]

    Notes
    -----
    FAO-56 eq. 72 [1]_:

    .. math::

        K_{c\,max} = \max\left(
            1.2 + \left[0.04 (u_2 - 2) - 0.004 (RH_{min} - 45)\right]
                  \left(\frac{h}{3}\right)^{0.3},\;
            K_{cb} + 0.05 \right)

    The climate term is the one FAO-56 uses for its tabulated crop coefficients; it was
    fitted for 1 m s-1 ≤ :math:`u_2` ≤ 6 m s-1 and 20 % ≤ :math:`RH_{min}` ≤ 80 % (limits
    from memory). Inputs are not clipped to that range here. For bare soil (:math:`h` = 0)
    the climate term vanishes and :math:`K_{c\,max}` = 1.2.

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eq. 72.
    """
    u2 = np.asarray(wind_speed_2m, dtype=float)
    rh = np.asarray(rh_min, dtype=float)
    height = np.asarray(crop_height, dtype=float)
    climate = KC_MAX_BASE + (0.04 * (u2 - 2.0) - 0.004 * (rh - 45.0)) * (height / 3.0) ** 0.3
    return np.maximum(climate, np.asarray(basal, dtype=float) + 0.05)[()]  # FAO-56 eq. 72


def soil_evaporation_coefficient(
    reduction: ArrayLike,
    kc_max: ArrayLike,
    basal: ArrayLike,
    exposed_wetted_fraction: ArrayLike = 1.0,
) -> np.ndarray | float:
    r"""Soil evaporation coefficient.

    Parameters
    ----------
    reduction : array_like
        Evaporation reduction coefficient :math:`K_r` (:func:`evaporation_reduction`). [-]
    kc_max : array_like
        Upper limit of the crop coefficient after a wetting (:func:`max_crop_coefficient`). [-]
    basal : array_like
        Basal crop coefficient :math:`K_{cb}`. [-]
    exposed_wetted_fraction : array_like, default 1.0
        Fraction :math:`f_{ew}` of the surface that is both exposed to the sun and wetted,
        :math:`\min(1 - f_c, f_w)` (FAO-56 eq. 75, number from memory); 1 for bare soil wetted
        by rain. [-]

    Returns
    -------
    numpy.ndarray or float
        :math:`K_e`, never negative. [-]

    Notes
    -----
    FAO-56 eq. 71 [1]_:

    .. math:: K_e = K_r \left(K_{c\,max} - K_{cb}\right) \le f_{ew} K_{c\,max}

    The first term is the energy left to the soil after transpiration; the limit says the
    exposed wetted soil cannot evaporate more than that fraction of the surface at the
    highest rate. Should :math:`K_{c\,max}` be below :math:`K_{cb}` (eq. 72 prevents it),
    :math:`K_e` is 0.

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eq. 71.
    """
    kr = np.asarray(reduction, dtype=float)
    kc_max = np.asarray(kc_max, dtype=float)
    ke = np.minimum(kr * (kc_max - basal), exposed_wetted_fraction * kc_max)  # FAO-56 eq. 71
    return np.maximum(ke, 0.0)[()]


def surface_evaporation_series(
    precipitation: ArrayLike,
    reference_et: ArrayLike,
    total_evaporable: ArrayLike,
    readily_evaporable: ArrayLike,
    kc_max: ArrayLike = KC_MAX_BASE,
    basal: ArrayLike = BARE_SOIL_BASAL,
    exposed_wetted_fraction: ArrayLike = 1.0,
    initial_depletion: ArrayLike | None = None,
) -> SurfaceEvaporation:
    r"""Daily evaporation from the surface soil layer over consecutive days of rain and ETo.

    Parameters
    ----------
    precipitation : array_like
        Rain of each day, days along axis 0 (further axes are pixels); all of it infiltrates
        (no runoff). [mm d-1]
    reference_et : array_like
        Grass reference ET of each day, same shape as ``precipitation``; negative values
        (dew) count as 0. [mm d-1]
    total_evaporable : array_like
        Total evaporable water TEW, broadcastable to the pixel shape. [mm]
    readily_evaporable : array_like
        Readily evaporable water REW, at most TEW. [mm]
    kc_max : array_like, default 1.2
        Upper limit of the crop coefficient after a wetting (:func:`max_crop_coefficient`);
        the default is that of standard climate. [-]
    basal : array_like, default 0.15
        Basal crop coefficient :math:`K_{cb}` (:data:`BARE_SOIL_BASAL`). [-]
    exposed_wetted_fraction : array_like, default 1.0
        Fraction :math:`f_{ew}` of the surface that is exposed and wetted, in (0, 1]. [-]
    initial_depletion : array_like or None, default None
        Depletion of the layer before the first day, clipped to [0, TEW]; None starts with
        the layer dry (depletion = TEW). [mm]

    Returns
    -------
    SurfaceEvaporation
        Per-day ``depletion_start``, ``reduction``, ``ke``, ``evaporation``,
        ``depletion_end`` and ``deep_percolation``.

    Raises
    ------
    InputValueError
        If ``precipitation`` and ``reference_et`` differ in shape or have no day axis, rain
        is negative, REW is negative or exceeds TEW, or :math:`f_{ew}` is outside (0, 1].

    Notes
    -----
    The daily water balance of the evaporating layer, FAO-56 eq. 77 [1]_, without runoff,
    irrigation and transpiration from the layer:

    .. math::

        D_{e,i} = D_{e,i-1} - P_i + \frac{E_i}{f_{ew}} + DP_{e,i},
        \qquad 0 \le D_{e,i} \le TEW

    with the deep percolation :math:`DP_{e,i} = \max(P_i - D_{e,i-1}, 0)`, the rain that
    would take the layer beyond field capacity (FAO-56 eqs. 78 and 79, numbers from memory).

    *This package's reading of eq. 77*: within a day, rain comes first. It lowers the
    depletion (not below 0, the excess percolating); :math:`K_r` (eq. 74) and :math:`K_e`
    (eq. 71) are computed from that wetted depletion, ``depletion_start``; then the day's
    evaporation :math:`E_i = K_e\,ET_o` raises it by :math:`E_i/f_{ew}`. Eq. 74 as printed
    takes :math:`K_r` from :math:`D_{e,i-1}`, the depletion at the end of the previous day;
    the two agree on days without rain, while here a rain day already evaporates at the rate
    of the wetted layer. Also a reading of this package: the evaporation of a day is capped
    at the water the layer still holds, :math:`E_i \le f_{ew} (TEW - D)`, so that the
    balance closes when the depletion reaches TEW (eq. 78 bounds the depletion but not
    :math:`E_i`); ``ke`` keeps the value of eq. 71 and ``evaporation`` may then be less than
    ``ke`` × ETo.

    The evaporation on the last day of a series that ends on an image day is what the hot
    anchor still evaporates that day. A NaN in a pixel's inputs makes the rest of its series
    NaN: fill gaps first.

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eqs. 71, 74 and 77.
    """
    rain = np.asarray(precipitation, dtype=float)
    eto = np.maximum(np.asarray(reference_et, dtype=float), 0.0)
    if rain.ndim == 0 or rain.shape != eto.shape:
        raise InputValueError(
            f"surface_evaporation_series needs precipitation and reference_et of one shape "
            f"with days along axis 0, got {rain.shape} and {eto.shape}."
        )
    if np.any(rain < 0.0):
        raise InputValueError(
            "surface_evaporation_series: precipitation is negative somewhere; give rain in "
            "mm d-1, 0 or more."
        )
    tew = np.asarray(total_evaporable, dtype=float)
    rew = np.asarray(readily_evaporable, dtype=float)
    if np.any(rew < 0.0) or np.any(rew > tew):
        raise InputValueError(
            "surface_evaporation_series: readily_evaporable must lie between 0 and "
            "total_evaporable (REW <= TEW, FAO-56 ch. 7)."
        )
    few = np.asarray(exposed_wetted_fraction, dtype=float)
    if np.any(few <= 0.0) or np.any(few > 1.0):
        raise InputValueError(
            "surface_evaporation_series: exposed_wetted_fraction must be in (0, 1]."
        )
    kc_max = np.asarray(kc_max, dtype=float)
    basal = np.asarray(basal, dtype=float)
    start = tew if initial_depletion is None else np.asarray(initial_depletion, dtype=float)

    shape = np.broadcast_shapes(
        rain.shape[1:], tew.shape, rew.shape, kc_max.shape, basal.shape, few.shape, start.shape
    )
    n_days = rain.shape[0]
    out = {name: np.empty((n_days, *shape)) for name in SurfaceEvaporation._fields}
    depletion = np.broadcast_to(np.clip(start, 0.0, tew), shape)
    for day in range(n_days):
        wetted = np.maximum(depletion - rain[day], 0.0)  # eq. 77 with rain, eq. 78 bound
        percolation = np.maximum(rain[day] - depletion, 0.0)  # eq. 79 (from memory)
        kr = evaporation_reduction(wetted, rew, tew)  # eq. 74
        ke = soil_evaporation_coefficient(kr, kc_max, basal, few)  # eq. 71
        evaporation = np.minimum(ke * eto[day], few * (tew - wetted))  # layer's water only
        depletion = np.minimum(wetted + evaporation / few, tew)  # eq. 77, eq. 78 bound
        out["depletion_start"][day] = wetted
        out["reduction"][day] = kr
        out["ke"][day] = ke
        out["evaporation"][day] = evaporation
        out["depletion_end"][day] = depletion
        out["deep_percolation"][day] = percolation
    return SurfaceEvaporation(**out)
