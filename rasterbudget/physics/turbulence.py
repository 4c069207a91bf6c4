"""Air properties, near-surface wind, aerodynamic resistance and Monin–Obukhov stability.

Sources
-------
- Allen, R. G., Pereira, L. S., Raes, D. and Smith, M. (1998). Crop evapotranspiration:
  guidelines for computing crop water requirements. FAO Irrigation and Drainage Paper 56.
  FAO, Rome.
- Bastiaanssen, W. G. M., Menenti, M., Feddes, R. A. and Holtslag, A. A. M. (1998).
  Journal of Hydrology 212–213, 198–212.
- Monin, A. S. and Obukhov, A. M. (1954). Trudy Geofizicheskogo Instituta, Akademiya Nauk
  SSSR 24(151), 163–187 (from memory).
- Paulson, C. A. (1970). The mathematical representation of wind speed and temperature
  profiles in the unstable atmospheric surface layer. Journal of Applied Meteorology 9,
  857–861.
- Webb, E. K. (1970). Profile relationships: the log-linear range, and extension to strong
  stability. Quarterly Journal of the Royal Meteorological Society 96, 67–90.
"""

import numpy as np
from numpy.typing import ArrayLike

from .constants import (
    GRAVITY,
    SPECIFIC_GAS_CONSTANT_AIR,
    SPECIFIC_HEAT_AIR,
    VON_KARMAN,
    ZERO_CELSIUS,
)

__all__ = [
    "aerodynamic_resistance",
    "air_density",
    "air_pressure",
    "friction_velocity",
    "inverse_monin_obukhov_length",
    "latent_heat_of_vaporization",
    "monin_obukhov_length",
    "psychrometric_constant",
    "saturation_vapour_pressure",
    "sensible_heat_flux",
    "stability_correction_heat",
    "stability_correction_momentum",
    "vapour_pressure_from_relative_humidity",
    "vapour_pressure_from_rh_extremes",
    "wind_speed_at_2m",
    "wind_speed_at_blending_height",
]


def air_pressure(elevation: ArrayLike) -> np.ndarray | float:
    r"""Atmospheric pressure from elevation (standard atmosphere).

    Parameters
    ----------
    elevation : array_like
        Elevation above sea level. [m]

    Returns
    -------
    numpy.ndarray or float
        Atmospheric pressure :math:`P`. [kPa]

    Notes
    -----
    FAO-56 eq. 7 [1]_:

    .. math:: P = 101.3 \left(\frac{293 - 0.0065 z}{293}\right)^{5.26}

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eq. 7.
    """
    return 101.3 * ((293.0 - 0.0065 * elevation) / 293.0) ** 5.26  # FAO-56 eq. 7


def psychrometric_constant(pressure: ArrayLike) -> np.ndarray | float:
    r"""Psychrometric constant.

    Parameters
    ----------
    pressure : array_like
        Atmospheric pressure. [kPa]

    Returns
    -------
    numpy.ndarray or float
        Psychrometric constant :math:`\gamma`. [kPa K-1]

    Notes
    -----
    FAO-56 eq. 8 [1]_ (with :math:`c_p = 1.013` kJ kg-1 K-1, :math:`\lambda = 2.45` MJ kg-1
    and :math:`\varepsilon = 0.622` folded into the coefficient):

    .. math:: \gamma = 0.665 \times 10^{-3} P

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eq. 8.
    """
    return 0.665e-3 * pressure  # FAO-56 eq. 8


def saturation_vapour_pressure(temperature: ArrayLike) -> np.ndarray | float:
    r"""Saturation vapour pressure over water (Tetens form).

    Parameters
    ----------
    temperature : array_like
        Air temperature. [K]

    Returns
    -------
    numpy.ndarray or float
        Saturation vapour pressure :math:`e^\circ(T)`. [kPa]

    Notes
    -----
    FAO-56 eq. 11 [1]_, with :math:`T` in °C:

    .. math:: e^\circ(T) = 0.6108 \exp\left(\frac{17.27 T}{T + 237.3}\right)

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eq. 11.
    """
    t = temperature - ZERO_CELSIUS
    return 0.6108 * np.exp(17.27 * t / (t + 237.3))  # FAO-56 eq. 11


def vapour_pressure_from_relative_humidity(
    temperature: ArrayLike, relative_humidity: ArrayLike
) -> np.ndarray | float:
    r"""Actual vapour pressure from air temperature and relative humidity.

    Parameters
    ----------
    temperature : array_like
        Air temperature. [K]
    relative_humidity : array_like
        Relative humidity. [%]

    Returns
    -------
    numpy.ndarray or float
        Actual vapour pressure :math:`e_a`. [kPa]

    Notes
    -----
    The form of FAO-56 eq. 19 [1]_ applied to one temperature (for instance an hourly or
    overpass reading):

    .. math:: e_a = e^\circ(T) \frac{RH}{100}

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eq. 19 (and eq. 54
       for hourly data).
    """
    return saturation_vapour_pressure(temperature) * relative_humidity / 100.0  # eq. 19 form


def vapour_pressure_from_rh_extremes(
    tmin: ArrayLike, tmax: ArrayLike, rh_max: ArrayLike, rh_min: ArrayLike
) -> np.ndarray | float:
    r"""Daily actual vapour pressure from the day's temperature and humidity extremes.

    Parameters
    ----------
    tmin : array_like
        Minimum air temperature of the day. [K]
    tmax : array_like
        Maximum air temperature of the day. [K]
    rh_max : array_like
        Maximum relative humidity of the day. [%]
    rh_min : array_like
        Minimum relative humidity of the day. [%]

    Returns
    -------
    numpy.ndarray or float
        Actual vapour pressure :math:`e_a`. [kPa]

    Notes
    -----
    FAO-56 eq. 17 [1]_:

    .. math::

        e_a = \frac{e^\circ(T_{min}) \frac{RH_{max}}{100}
                    + e^\circ(T_{max}) \frac{RH_{min}}{100}}{2}

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eq. 17.
    """
    return (  # FAO-56 eq. 17
        saturation_vapour_pressure(tmin) * rh_max / 100.0
        + saturation_vapour_pressure(tmax) * rh_min / 100.0
    ) / 2.0


def air_density(pressure: ArrayLike, temperature: ArrayLike) -> np.ndarray | float:
    r"""Density of moist air.

    Parameters
    ----------
    pressure : array_like
        Atmospheric pressure. [kPa]
    temperature : array_like
        Air temperature. [K]

    Returns
    -------
    numpy.ndarray or float
        Air density :math:`\rho`. [kg m-3]

    Notes
    -----
    FAO-56 Annex 3 eq. 3-5 [1]_, the ideal gas law with the virtual temperature
    approximated as :math:`T_{kv} = 1.01 T` and :math:`R = 0.287` kJ kg-1 K-1:

    .. math:: \rho = \frac{P}{1.01\, T R}

    FAO-56 writes :math:`T + 273` for the temperature in kelvin; here :math:`T` is
    already in kelvin.

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, Annex 3, eq. 3-5.
    """
    return pressure / (1.01 * temperature * SPECIFIC_GAS_CONSTANT_AIR)  # FAO-56 eq. 3-5


def latent_heat_of_vaporization(temperature: ArrayLike) -> np.ndarray | float:
    r"""Latent heat of vaporization of water.

    Parameters
    ----------
    temperature : array_like
        Temperature of the evaporating surface or the air. [K]

    Returns
    -------
    numpy.ndarray or float
        Latent heat of vaporization :math:`\lambda`. [J kg-1]

    Notes
    -----
    FAO-56 Annex 3 eq. 3-1 [1]_, with :math:`T` in °C:

    .. math:: \lambda = (2.501 - 0.002361\, T) \times 10^6

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, Annex 3, eq. 3-1.
    """
    return (2.501 - 0.002361 * (temperature - ZERO_CELSIUS)) * 1e6  # FAO-56 eq. 3-1


def wind_speed_at_2m(wind_speed: ArrayLike, height: ArrayLike) -> np.ndarray | float:
    r"""Wind speed at 2 m from a reading at another height over short grass.

    Parameters
    ----------
    wind_speed : array_like
        Wind speed measured at ``height``. [m s-1]
    height : array_like
        Measurement height above the ground. [m]

    Returns
    -------
    numpy.ndarray or float
        Wind speed at 2 m, :math:`u_2`. [m s-1]

    Notes
    -----
    FAO-56 eq. 47 [1]_ (logarithmic profile over short grass):

    .. math:: u_2 = u_z \frac{4.87}{\ln(67.8 z - 5.42)}

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eq. 47.
    """
    return wind_speed * 4.87 / np.log(67.8 * height - 5.42)  # FAO-56 eq. 47


def friction_velocity(
    wind_speed: ArrayLike,
    height: ArrayLike,
    roughness_length: ArrayLike,
    psi_m: ArrayLike = 0.0,
) -> np.ndarray | float:
    r"""Friction velocity from a wind speed and the logarithmic wind profile.

    Parameters
    ----------
    wind_speed : array_like
        Wind speed at ``height``. [m s-1]
    height : array_like
        Height of the wind speed above the zero-plane displacement. [m]
    roughness_length : array_like
        Roughness length for momentum :math:`z_{0m}`. [m]
    psi_m : array_like, default 0.0
        Stability correction for momentum at ``height``, see
        :func:`stability_correction_momentum`; 0 for neutral conditions. [-]

    Returns
    -------
    numpy.ndarray or float
        Friction velocity :math:`u_*`. [m s-1]

    Notes
    -----
    Monin–Obukhov similarity for the surface layer:

    .. math:: u_* = \frac{k u}{\ln(z / z_{0m}) - \psi_m}

    with :math:`k = 0.41`.
    """
    return VON_KARMAN * wind_speed / (np.log(height / roughness_length) - psi_m)


def aerodynamic_resistance(
    friction_velocity: ArrayLike,
    z1: float = 0.1,
    z2: float = 2.0,
    psi_h_z1: ArrayLike = 0.0,
    psi_h_z2: ArrayLike = 0.0,
) -> np.ndarray | float:
    r"""Aerodynamic resistance to heat transport between two heights near the surface.

    Parameters
    ----------
    friction_velocity : array_like
        Friction velocity :math:`u_*`. [m s-1]
    z1 : float, default 0.1
        Lower height, just above the roughness elements (Bastiaanssen et al. 1998). [m]
    z2 : float, default 2.0
        Upper height (Bastiaanssen et al. 1998). [m]
    psi_h_z1 : array_like, default 0.0
        Stability correction for heat at ``z1``, see :func:`stability_correction_heat`. [-]
    psi_h_z2 : array_like, default 0.0
        Stability correction for heat at ``z2``. [-]

    Returns
    -------
    numpy.ndarray or float
        Aerodynamic resistance :math:`r_{ah}`. [s m-1]

    Notes
    -----
    The formulation of Bastiaanssen et al. (1998) [1]_: the temperature difference is
    taken between two heights above the surface rather than between the surface and the
    air, which avoids a roughness length for heat:

    .. math:: r_{ah} = \frac{\ln(z_2 / z_1) - \psi_h(z_2) + \psi_h(z_1)}{k u_*}

    References
    ----------
    .. [1] Bastiaanssen, Menenti, Feddes and Holtslag (1998), Journal of Hydrology
       212–213, 198–212.
    """
    return (np.log(z2 / z1) - psi_h_z2 + psi_h_z1) / (VON_KARMAN * friction_velocity)


def monin_obukhov_length(
    air_density: ArrayLike,
    friction_velocity: ArrayLike,
    surface_temperature: ArrayLike,
    sensible_heat_flux: ArrayLike,
) -> np.ndarray | float:
    r"""Monin–Obukhov length.

    Parameters
    ----------
    air_density : array_like
        Air density :math:`\rho`. [kg m-3]
    friction_velocity : array_like
        Friction velocity :math:`u_*`. [m s-1]
    surface_temperature : array_like
        Surface temperature, the reference temperature for buoyancy. [K]
    sensible_heat_flux : array_like
        Sensible heat flux :math:`H`, positive upwards. [W m-2]

    Returns
    -------
    numpy.ndarray or float
        Monin–Obukhov length :math:`L`; negative when unstable (:math:`H > 0`), positive
        when stable, :math:`+\infty` where :math:`H = 0` (neutral). [m]

    Notes
    -----
    Monin & Obukhov (1954) [1]_:

    .. math:: L = -\frac{\rho c_p u_*^3 T_s}{k g H}

    References
    ----------
    .. [1] Monin and Obukhov (1954), Trudy Geofiz. Inst. Akad. Nauk SSSR 24, 163–187
       (from memory).
    """
    numerator = -air_density * SPECIFIC_HEAT_AIR * friction_velocity**3 * surface_temperature
    denominator = VON_KARMAN * GRAVITY * np.asarray(sensible_heat_flux)
    shape = np.broadcast_shapes(np.shape(numerator), np.shape(denominator))
    out = np.full(shape, np.inf, dtype=np.result_type(numerator, denominator, 1.0))
    np.divide(numerator, denominator, out=out, where=denominator != 0.0)  # Monin & Obukhov
    return out[()]


def inverse_monin_obukhov_length(
    air_density: ArrayLike,
    friction_velocity: ArrayLike,
    surface_temperature: ArrayLike,
    sensible_heat_flux: ArrayLike,
) -> np.ndarray | float:
    r"""Inverse of the Monin–Obukhov length, :math:`1/L`.

    Parameters
    ----------
    air_density : array_like
        Air density :math:`\rho`. [kg m-3]
    friction_velocity : array_like
        Friction velocity :math:`u_*`, positive. [m s-1]
    surface_temperature : array_like
        Surface temperature, the reference temperature for buoyancy. [K]
    sensible_heat_flux : array_like
        Sensible heat flux :math:`H`, positive upwards. [W m-2]

    Returns
    -------
    numpy.ndarray or float
        :math:`1/L`; negative when unstable (:math:`H > 0`), 0 when neutral. [m-1]

    Notes
    -----
    The reciprocal of :func:`monin_obukhov_length` (Monin & Obukhov 1954 [1]_):

    .. math:: \frac{1}{L} = -\frac{k g H}{\rho c_p u_*^3 T_s}

    finite for every positive :math:`\rho`, :math:`u_*` and :math:`T_s`, so stability iterations
    need no special case for the neutral :math:`H = 0` (where :math:`L` is infinite).

    References
    ----------
    .. [1] Monin and Obukhov (1954), Trudy Geofiz. Inst. Akad. Nauk SSSR 24, 163–187
       (from memory).
    """
    numerator = -VON_KARMAN * GRAVITY * np.asarray(sensible_heat_flux)  # Monin & Obukhov
    return (
        numerator / (air_density * SPECIFIC_HEAT_AIR * friction_velocity**3 * surface_temperature)
    )[()]


def _capped_z_over_l(z_over_l: ArrayLike, max_stable_z_over_l: float) -> np.ndarray | float:
    """Stable-side z/L limited to ``max_stable_z_over_l``."""
    return np.minimum(z_over_l, max_stable_z_over_l)


def stability_correction_momentum(
    z_over_l: ArrayLike, max_stable_z_over_l: float = 1.0
) -> np.ndarray | float:
    r"""Integrated stability correction for momentum, :math:`\psi_m`.

    Parameters
    ----------
    z_over_l : array_like
        Height divided by the Monin–Obukhov length, :math:`z/L`; negative when unstable. [-]
    max_stable_z_over_l : float, default 1.0
        Upper limit applied to :math:`z/L` on the stable side before the correction is
        computed, so :math:`\psi_m \geq -5` with the default (common practice: the
        log-linear profile is not valid for very stable conditions). Pass ``numpy.inf`` to
        remove the limit. [-]

    Returns
    -------
    numpy.ndarray or float
        Stability correction :math:`\psi_m`; positive when unstable. [-]

    Notes
    -----
    Unstable, :math:`z/L < 0` (Paulson 1970 [1]_), with
    :math:`x = (1 - 16 z/L)^{1/4}`:

    .. math::

        \psi_m = 2 \ln\frac{1 + x}{2} + \ln\frac{1 + x^2}{2} - 2 \arctan x + \frac{\pi}{2}

    Stable, :math:`z/L \geq 0` (Webb 1970 [2]_):

    .. math:: \psi_m = -5 \frac{z}{L}

    References
    ----------
    .. [1] Paulson (1970), Journal of Applied Meteorology 9, 857–861.
    .. [2] Webb (1970), Quarterly Journal of the Royal Meteorological Society 96, 67–90.
    """
    x = (1.0 - 16.0 * np.minimum(z_over_l, 0.0)) ** 0.25  # Paulson (1970); 1 when stable
    unstable = (
        2.0 * np.log((1.0 + x) / 2.0)
        + np.log((1.0 + x**2) / 2.0)
        - 2.0 * np.arctan(x)
        + np.pi / 2.0
    )  # Paulson (1970)
    stable = -5.0 * _capped_z_over_l(z_over_l, max_stable_z_over_l)  # Webb (1970)
    return np.where(np.less(z_over_l, 0.0), unstable, stable)[()]


def stability_correction_heat(
    z_over_l: ArrayLike, max_stable_z_over_l: float = 1.0
) -> np.ndarray | float:
    r"""Integrated stability correction for heat, :math:`\psi_h`.

    Parameters
    ----------
    z_over_l : array_like
        Height divided by the Monin–Obukhov length, :math:`z/L`; negative when unstable. [-]
    max_stable_z_over_l : float, default 1.0
        Upper limit applied to :math:`z/L` on the stable side before the correction is
        computed, so :math:`\psi_h \geq -5` with the default (common practice: the
        log-linear profile is not valid for very stable conditions). Pass ``numpy.inf`` to
        remove the limit. [-]

    Returns
    -------
    numpy.ndarray or float
        Stability correction :math:`\psi_h`; positive when unstable. [-]

    Notes
    -----
    Unstable, :math:`z/L < 0` (Paulson 1970 [1]_), with
    :math:`x = (1 - 16 z/L)^{1/4}`:

    .. math:: \psi_h = 2 \ln\frac{1 + x^2}{2}

    Stable, :math:`z/L \geq 0` (Webb 1970 [2]_):

    .. math:: \psi_h = -5 \frac{z}{L}

    References
    ----------
    .. [1] Paulson (1970), Journal of Applied Meteorology 9, 857–861.
    .. [2] Webb (1970), Quarterly Journal of the Royal Meteorological Society 96, 67–90.
    """
    x = (1.0 - 16.0 * np.minimum(z_over_l, 0.0)) ** 0.25  # Paulson (1970); 1 when stable
    unstable = 2.0 * np.log((1.0 + x**2) / 2.0)  # Paulson (1970)
    stable = -5.0 * _capped_z_over_l(z_over_l, max_stable_z_over_l)  # Webb (1970)
    return np.where(np.less(z_over_l, 0.0), unstable, stable)[()]


def sensible_heat_flux(
    air_density: ArrayLike,
    temperature_difference: ArrayLike,
    aerodynamic_resistance: ArrayLike,
) -> np.ndarray | float:
    r"""Sensible heat flux from a near-surface temperature difference.

    Parameters
    ----------
    air_density : array_like
        Air density :math:`\rho`. [kg m-3]
    temperature_difference : array_like
        Temperature difference :math:`dT` across the layer of ``aerodynamic_resistance``,
        lower minus upper. [K]
    aerodynamic_resistance : array_like
        Aerodynamic resistance to heat transport :math:`r_{ah}`. [s m-1]

    Returns
    -------
    numpy.ndarray or float
        Sensible heat flux :math:`H`, positive upwards. [W m-2]

    Notes
    -----
    .. math:: H = \frac{\rho c_p\, dT}{r_{ah}}

    with :math:`c_p = 1004` J kg-1 K-1.
    """
    return air_density * SPECIFIC_HEAT_AIR * temperature_difference / aerodynamic_resistance


def wind_speed_at_blending_height(
    wind_speed: ArrayLike, height: float, station_roughness: float, blending_height: float
) -> np.ndarray | float:
    """Wind speed at the blending height from a station reading, neutral log profile. [m s-1]

    u*_station = k u_z / ln(z / z0m_station); u_b = u*_station ln(z_b / z0m_station) / k
    (logarithmic wind profile; Brutsaert 2005, eq. 2.41 form - from memory). The blending height is
    taken high enough that wind there does not depend on the surface below (Bastiaanssen et al.
    1998 use 100-200 m).
    """
    factor = np.log(blending_height / station_roughness) / np.log(height / station_roughness)
    result = np.asarray(wind_speed, dtype=np.float64) * factor
    return float(result) if result.ndim == 0 else result


def roughness_length_from_ndvi(ndvi: ArrayLike) -> np.ndarray | float:
    r"""Momentum roughness length of land surfaces from NDVI.

    Parameters
    ----------
    ndvi : array_like
        Normalized difference vegetation index. [-]

    Returns
    -------
    numpy.ndarray or float
        :math:`z_{0m}`, bounded to 0.003–1 m. [m]

    Notes
    -----
    The exponential form :math:`z_{0m} = \exp(a + b\,NDVI)` of Bastiaanssen (2000, J. Hydrol.
    229; from memory), with :math:`a = -5.8`, :math:`b = 5.6` chosen here (common practice, not
    a published calibration) to give 0.005 m for bare soil (NDVI 0.1, Brutsaert 2005's smooth
    soil), 0.05 m at NDVI 0.5 (grass and young crops) and 0.27 m at NDVI 0.8 (between full-cover
    crops near 0.1 m and forest near 1 m). For land without a land-cover map; where a map gives
    the class, its table value is better (forest in particular).
    """
    z0 = np.exp(-5.8 + 5.6 * np.asarray(ndvi, dtype=np.float64))
    z0 = np.clip(z0, 0.003, 1.0)
    return z0 if z0.ndim else float(z0)
