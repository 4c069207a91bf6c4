"""Reference evapotranspiration: the standardized Penman–Monteith equation, daily and hourly.

The grass (short) and alfalfa (tall) reference surfaces of ASCE-EWRI (2005) share one
equation whose constants :math:`C_n` and :math:`C_d` depend on the surface and the time step;
FAO-56's grass reference is the short surface for daily steps. Temperatures are in kelvin at
the interface and converted to °C inside where the published formula is written in °C.
Daily radiation is in MJ m-2 d-1, hourly radiation in MJ m-2 h-1, pressure in kPa, and the
result in mm per time step.

Sources
-------
- Allen, R. G., Pereira, L. S., Raes, D. and Smith, M. (1998). Crop evapotranspiration:
  guidelines for computing crop water requirements. FAO Irrigation and Drainage Paper 56.
  FAO, Rome.
- Allen, R. G., Walter, I. A., Elliott, R. L., Howell, T. A., Itenfisu, D., Jensen, M. E.
  and Snyder, R. L. (eds.) (2005). The ASCE Standardized Reference Evapotranspiration
  Equation. ASCE-EWRI Task Committee report, American Society of Civil Engineers, Reston.
"""

from collections.abc import Mapping
from types import MappingProxyType

import numpy as np
from numpy.typing import ArrayLike

from ..errors import InputValueError
from .constants import (
    FAO_SOLAR_CONSTANT,
    SECONDS_PER_HOUR,
    STEFAN_BOLTZMANN,
    STEFAN_BOLTZMANN_DAILY,
    ZERO_CELSIUS,
)
from .radiation import (
    clear_sky_shortwave_daily,
    clear_sky_transmissivity,
    cloudiness_factor,
    net_longwave,
    net_longwave_daily,
    net_radiation_daily,
    relative_shortwave,
)
from .solar import (
    cos_solar_zenith,
    extraterrestrial_radiation_daily,
    hour_angle,
    inverse_relative_distance,
    solar_declination,
    sunset_hour_angle,
)
from .turbulence import (
    air_pressure,
    psychrometric_constant,
    saturation_vapour_pressure,
    vapour_pressure_from_relative_humidity,
    vapour_pressure_from_rh_extremes,
)

__all__ = [
    "DEFAULT_LOW_SUN_CLOUDINESS",
    "FAO56_GRASS",
    "FAO_STEFAN_BOLTZMANN_HOURLY",
    "LOW_SUN_ANGLE",
    "REFERENCE_SURFACES",
    "STEFAN_BOLTZMANN_HOURLY",
    "carried_cloudiness",
    "clear_sky_shortwave_hourly",
    "extraterrestrial_radiation_hourly",
    "net_radiation_hourly",
    "penman_monteith",
    "reference_et_daily",
    "reference_et_hourly",
    "reference_et_hourly_series",
    "slope_vapour_pressure_curve",
    "sun_angle_hourly",
]

STEFAN_BOLTZMANN_HOURLY = STEFAN_BOLTZMANN * SECONDS_PER_HOUR / 1e6
"""CODATA Stefan–Boltzmann constant as an hourly energy sum. [MJ m-2 h-1 K-4]"""

FAO_STEFAN_BOLTZMANN_HOURLY = 2.043e-10
"""Stefan–Boltzmann constant for hourly steps as FAO-56 rounds it (4.903e-9 / 24, used with
eq. 39 for hourly periods). [MJ m-2 h-1 K-4]"""


def _frozen(table: dict) -> Mapping:
    return MappingProxyType({key: MappingProxyType(value) for key, value in table.items()})


REFERENCE_SURFACES: Mapping[str, Mapping[str, Mapping[str, float]]] = MappingProxyType(
    {
        "short": _frozen(
            {
                "daily": {"cn": 900.0, "cd": 0.34},
                "hourly": {
                    "cn": 37.0,
                    "cd_day": 0.24,
                    "cd_night": 0.96,
                    "g_day": 0.1,
                    "g_night": 0.5,
                },
            }
        ),
        "tall": _frozen(
            {
                "daily": {"cn": 1600.0, "cd": 0.38},
                "hourly": {
                    "cn": 66.0,
                    "cd_day": 0.25,
                    "cd_night": 1.7,
                    "g_day": 0.04,
                    "g_night": 0.2,
                },
            }
        ),
    }
)
"""Standardized constants of the reference surfaces, ASCE-EWRI (2005) Table 1.

``"short"`` is clipped grass (about 0.12 m tall), ``"tall"`` is alfalfa (about 0.5 m;
heights from memory). For each surface, ``"daily"`` holds ``cn`` [K mm s3 Mg-1 d-1] and
``cd`` [s m-1], daily ground heat flux being taken as zero; ``"hourly"`` holds ``cn``
[K mm s3 Mg-1 h-1], ``cd_day`` and ``cd_night`` [s m-1], and ``g_day`` and ``g_night``, the
ratios :math:`G/R_n` for daytime and night-time hours [-]:

=======  ========  ========  =========  =========  ===========  ========  ==========
surface  daily Cn  daily Cd  hourly Cn  Cd by day  Cd at night  G/Rn day  G/Rn night
=======  ========  ========  =========  =========  ===========  ========  ==========
short    900       0.34      37         0.24       0.96         0.1       0.5
tall     1600      0.38      66         0.25       1.7          0.04      0.2
=======  ========  ========  =========  =========  ===========  ========  ==========

The mapping is read-only.
"""

FAO56_GRASS: Mapping[str, Mapping[str, float]] = _frozen(
    {
        "daily": {"cn": 900.0, "cd": 0.34},
        "hourly": {"cn": 37.0, "cd_day": 0.34, "cd_night": 0.34, "g_day": 0.1, "g_night": 0.5},
    }
)
"""FAO-56's grass reference, with the same keys as one entry of :data:`REFERENCE_SURFACES`.

Daily constants from FAO-56 eq. 6 (equal to ASCE-EWRI's short surface); hourly constants
from FAO-56 eq. 53, which keeps :math:`C_d = 0.34` day and night, with :math:`G = 0.1 R_n`
in daylight and :math:`0.5 R_n` at night (FAO-56 eqs. 45 and 46). Pass it as ``reference``
to reproduce FAO-56's hourly worked example; the mapping is read-only.
"""


def _surface_constants(reference: str | Mapping, step: str) -> Mapping[str, float]:
    """Constants for ``step`` ("daily" or "hourly") of a named or given reference surface."""
    if isinstance(reference, str):
        if reference not in REFERENCE_SURFACES:
            raise InputValueError(
                f"Unknown reference surface {reference!r}: use one of "
                f"{sorted(REFERENCE_SURFACES)} or pass a mapping shaped like FAO56_GRASS."
            )
        return REFERENCE_SURFACES[reference][step]
    return reference[step]


def slope_vapour_pressure_curve(temperature: ArrayLike) -> np.ndarray | float:
    r"""Slope of the saturation vapour pressure curve.

    Parameters
    ----------
    temperature : array_like
        Air temperature. [K]

    Returns
    -------
    numpy.ndarray or float
        Slope :math:`\Delta` of the saturation vapour pressure curve at ``temperature``.
        [kPa K-1]

    Notes
    -----
    FAO-56 eq. 13 [1]_, with :math:`T` in °C and :math:`e^\circ(T)` from FAO-56 eq. 11
    (:func:`~rasterbudget.physics.turbulence.saturation_vapour_pressure`):

    .. math:: \Delta = \frac{4098\, e^\circ(T)}{(T + 237.3)^2}

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eqs. 11 and 13.
    """
    t = temperature - ZERO_CELSIUS
    return 4098.0 * saturation_vapour_pressure(temperature) / (t + 237.3) ** 2  # FAO-56 eq. 13


def penman_monteith(
    net_radiation: ArrayLike,
    ground_heat_flux: ArrayLike,
    temperature: ArrayLike,
    wind_speed_2m: ArrayLike,
    saturation_vapour_pressure: ArrayLike,
    actual_vapour_pressure: ArrayLike,
    pressure: ArrayLike,
    cn: ArrayLike,
    cd: ArrayLike,
) -> np.ndarray | float:
    r"""Standardized Penman–Monteith reference evapotranspiration for one time step.

    Parameters
    ----------
    net_radiation : array_like
        Net radiation at the reference surface over the step, :math:`R_n`. [MJ m-2 per step]
    ground_heat_flux : array_like
        Ground heat flux over the step, :math:`G`, positive into the soil.
        [MJ m-2 per step]
    temperature : array_like
        Mean daily air temperature (daily steps) or the hour's air temperature (hourly
        steps) at 1.5–2.5 m. [K]
    wind_speed_2m : array_like
        Wind speed at 2 m, :math:`u_2`. [m s-1]
    saturation_vapour_pressure : array_like
        Saturation vapour pressure, :math:`e_s`. [kPa]
    actual_vapour_pressure : array_like
        Actual vapour pressure, :math:`e_a`. [kPa]
    pressure : array_like
        Atmospheric pressure, :math:`P`. [kPa]
    cn : array_like
        Numerator constant of the reference surface and time step, see
        :data:`REFERENCE_SURFACES`. [K mm s3 Mg-1 per step]
    cd : array_like
        Denominator constant of the reference surface and time step. [s m-1]

    Returns
    -------
    numpy.ndarray or float
        Reference evapotranspiration; not clipped, so it can be slightly negative at night
        (dew). [mm per step]

    Notes
    -----
    FAO-56 eq. 6 (daily, :math:`C_n = 900`, :math:`C_d = 0.34`) and eq. 53 (hourly,
    :math:`C_n = 37`) [1]_, in the general form of ASCE-EWRI (2005) eq. 1 [2]_:

    .. math::

        ET_{ref} = \frac{0.408 \Delta (R_n - G)
                         + \gamma \frac{C_n}{T + 273} u_2 (e_s - e_a)}
                        {\Delta + \gamma (1 + C_d u_2)}

    with :math:`T` in °C (FAO's :math:`T + 273` is reproduced exactly), :math:`\Delta`
    from :func:`slope_vapour_pressure_curve` at :math:`T` and :math:`\gamma` from
    :func:`~rasterbudget.physics.turbulence.psychrometric_constant` (FAO-56 eq. 8). The
    factor 0.408 is :math:`1/\lambda` with :math:`\lambda = 2.45` MJ kg-1.

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eqs. 6 and 53.
    .. [2] Allen et al. (eds.) (2005), The ASCE Standardized Reference Evapotranspiration
       Equation, eq. 1 and Table 1.
    """
    gamma = psychrometric_constant(pressure)  # FAO-56 eq. 8
    delta = slope_vapour_pressure_curve(temperature)  # FAO-56 eq. 13
    t_plus_273 = (temperature - ZERO_CELSIUS) + 273.0  # FAO-56 writes T + 273, T in °C
    radiation_term = 0.408 * delta * (net_radiation - ground_heat_flux)  # FAO-56 eq. 6
    aerodynamic_term = (  # FAO-56 eq. 6 / eq. 53; ASCE-EWRI (2005) eq. 1
        gamma
        * cn
        / t_plus_273
        * wind_speed_2m
        * (saturation_vapour_pressure - actual_vapour_pressure)
    )
    return (radiation_term + aerodynamic_term) / (delta + gamma * (1.0 + cd * wind_speed_2m))


def reference_et_daily(
    tmax: ArrayLike,
    tmin: ArrayLike,
    wind_speed_2m: ArrayLike,
    shortwave: ArrayLike,
    latitude: ArrayLike,
    day_of_year: ArrayLike,
    elevation: ArrayLike,
    vapour_pressure: ArrayLike | None = None,
    rh_max: ArrayLike | None = None,
    rh_min: ArrayLike | None = None,
    reference: str | Mapping = "short",
    albedo: ArrayLike = 0.23,
    stefan_boltzmann: float = STEFAN_BOLTZMANN_DAILY,
    ground_heat_flux: ArrayLike = 0.0,
) -> np.ndarray | float:
    r"""Daily reference evapotranspiration by the FAO-56 daily procedure.

    Parameters
    ----------
    tmax : array_like
        Maximum air temperature of the day. [K]
    tmin : array_like
        Minimum air temperature of the day. [K]
    wind_speed_2m : array_like
        Mean daily wind speed at 2 m, :math:`u_2`. [m s-1]
    shortwave : array_like
        Incoming shortwave radiation of the day, :math:`R_s`. [MJ m-2 d-1]
    latitude : array_like
        Latitude, positive north. [rad]
    day_of_year : array_like
        Day of the year, 1 to 365 or 366. [-]
    elevation : array_like
        Station or pixel elevation above sea level. [m]
    vapour_pressure : array_like, optional
        Actual vapour pressure :math:`e_a`; if not given, it is computed from ``rh_max``
        and ``rh_min``. [kPa]
    rh_max : array_like, optional
        Maximum relative humidity of the day, used with ``rh_min`` when
        ``vapour_pressure`` is not given. [%]
    rh_min : array_like, optional
        Minimum relative humidity of the day. [%]
    reference : str or mapping, default "short"
        ``"short"`` (grass) or ``"tall"`` (alfalfa), a key of :data:`REFERENCE_SURFACES`,
        or a mapping shaped like :data:`FAO56_GRASS`. [-]
    albedo : array_like, default 0.23
        Albedo of the reference surface, 0.23 for FAO-56's grass (FAO-56 eq. 38). [-]
    stefan_boltzmann : float, default STEFAN_BOLTZMANN_DAILY
        Stefan–Boltzmann constant; the default is the CODATA value, pass
        :data:`~rasterbudget.physics.constants.FAO_STEFAN_BOLTZMANN_DAILY` (4.903e-9) to
        reproduce FAO-56. [MJ m-2 d-1 K-4]
    ground_heat_flux : array_like, default 0.0
        Ground heat flux of the step, :math:`G`: 0 for daily steps (FAO-56 eq. 42,
        ASCE-EWRI 2005), or for monthly means for instance
        :math:`0.14 (T_{month,i} - T_{month,i-1})` (FAO-56 eq. 44; equation numbers from
        memory). [MJ m-2 d-1]

    Returns
    -------
    numpy.ndarray or float
        Reference evapotranspiration of the chosen surface. [mm d-1]

    Raises
    ------
    InputValueError
        If neither ``vapour_pressure`` nor both ``rh_max`` and ``rh_min`` are given, or
        ``reference`` is not a known surface.

    Notes
    -----
    The FAO-56 daily procedure (chapter 3, Example 18) [1]_:

    - mean temperature :math:`T = (T_{max} + T_{min}) / 2` (FAO-56 eq. 9), used for
      :math:`\Delta` (eq. 13) and in the :math:`T + 273` of eq. 6;
    - :math:`e_s = [e^\circ(T_{max}) + e^\circ(T_{min})] / 2` (eq. 12);
    - :math:`e_a` given, or from the humidity extremes (eq. 17);
    - :math:`P` from elevation (eq. 7) and :math:`\gamma` (eq. 8);
    - :math:`R_a` (eq. 21), :math:`R_{so} = (0.75 + 2 \times 10^{-5} z) R_a` (eq. 37),
      :math:`R_{ns} = (1 - \alpha) R_s` (eq. 38), :math:`R_{nl}` (eq. 39) and
      :math:`R_n = R_{ns} - R_{nl}` (eq. 40);
    - :func:`penman_monteith` with the daily :math:`C_n`, :math:`C_d` of the surface.

    FAO-56 converts temperatures with :math:`T + 273.16` in eq. 39 and with 273.15 (in
    eq. 11's °C) elsewhere; here one kelvin input serves both, and the 0.01 K difference
    changes ETo by about 0.001 mm d-1. :math:`R_{nl}` is undefined where :math:`R_{so} = 0`
    (polar night), which gives NaN.

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eqs. 6–9, 12, 13,
       17, 21, 37–40.
    .. [2] Allen et al. (eds.) (2005), The ASCE Standardized Reference Evapotranspiration
       Equation, Table 1.
    """
    constants = _surface_constants(reference, "daily")
    if vapour_pressure is None:
        if rh_max is None or rh_min is None:
            raise InputValueError(
                "reference_et_daily needs the actual vapour pressure: pass vapour_pressure "
                "or both rh_max and rh_min."
            )
        vapour_pressure = vapour_pressure_from_rh_extremes(tmin, tmax, rh_max, rh_min)  # eq. 17
    tmean = (tmax + tmin) / 2.0  # FAO-56 eq. 9
    es = (saturation_vapour_pressure(tmax) + saturation_vapour_pressure(tmin)) / 2.0  # eq. 12
    ra = extraterrestrial_radiation_daily(latitude, day_of_year)  # FAO-56 eq. 21
    rso = clear_sky_shortwave_daily(ra, elevation)  # FAO-56 eq. 37
    rnl = net_longwave_daily(  # FAO-56 eq. 39
        tmax, tmin, vapour_pressure, shortwave, rso, stefan_boltzmann
    )
    rn = net_radiation_daily(albedo, shortwave, rnl)  # FAO-56 eqs. 38, 40
    pressure = air_pressure(elevation)  # FAO-56 eq. 7
    return penman_monteith(  # FAO-56 eq. 6; ASCE-EWRI (2005) eq. 1
        rn,
        ground_heat_flux,
        tmean,
        wind_speed_2m,
        es,
        vapour_pressure,
        pressure,
        constants["cn"],
        constants["cd"],
    )


def extraterrestrial_radiation_hourly(
    latitude: ArrayLike,
    day_of_year: ArrayLike,
    utc_hour_start: ArrayLike,
    longitude: ArrayLike,
    period_hours: ArrayLike = 1.0,
) -> np.ndarray | float:
    r"""Extraterrestrial radiation on a horizontal surface over a period of the day.

    Parameters
    ----------
    latitude : array_like
        Latitude, positive north. [rad]
    day_of_year : array_like
        Day of the year, 1 to 365 or 366. [-]
    utc_hour_start : array_like
        Start of the period in UTC, fractional hours since midnight; FAO-56 states local
        standard times, which are UTC minus the time-zone meridian's degrees west divided
        by 15. [h]
    longitude : array_like
        Longitude, positive east of Greenwich. [degrees]
    period_hours : array_like, default 1.0
        Length of the period, :math:`t_1`, at most 24. [h]

    Returns
    -------
    numpy.ndarray or float
        Extraterrestrial radiation :math:`R_a` summed over the period; 0 when the sun is
        below the horizon throughout. [MJ m-2 per period]

    Notes
    -----
    FAO-56 eq. 28 [1]_, with :math:`G_{sc} = 0.0820` MJ m-2 min-1:

    .. math::

        R_a = \frac{12 \cdot 60}{\pi} G_{sc} d_r
              \left[(\omega_2 - \omega_1) \sin\varphi \sin\delta
                    + \cos\varphi \cos\delta (\sin\omega_2 - \sin\omega_1)\right]

    with (FAO-56 eqs. 29–30)

    .. math:: \omega_1 = \omega - \frac{\pi t_1}{24}, \qquad
              \omega_2 = \omega + \frac{\pi t_1}{24}

    where :math:`\omega` is the hour angle at the midpoint of the period, FAO-56 eqs. 31–33
    via :func:`~rasterbudget.physics.solar.hour_angle`. As FAO-56 prescribes, :math:`\omega_1`
    and :math:`\omega_2` are limited to the sunset hour angles :math:`\pm\omega_s` (eq. 25),
    which is the integral of :math:`\max(\cos\theta_z, 0)` over the period. The same limits
    are also applied to the daylight arcs one day before and after (:math:`\pm\omega_s \pm
    2\pi`), so that a period straddling solar midnight during polar day, or a long period,
    is integrated correctly; the 24 hourly values of a day then sum to the daily
    :math:`R_a` of FAO-56 eq. 21.

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eqs. 25, 28–33.
    """
    dr = inverse_relative_distance(day_of_year)  # FAO-56 eq. 23
    delta = solar_declination(day_of_year)  # FAO-56 eq. 24
    ws = sunset_hour_angle(latitude, delta)  # FAO-56 eq. 25
    omega = hour_angle(utc_hour_start + period_hours / 2.0, longitude, day_of_year)  # eq. 31
    half_width = np.pi * period_hours / 24.0
    omega_1 = omega - half_width  # FAO-56 eq. 29
    omega_2 = omega + half_width  # FAO-56 eq. 30
    sin_sin = np.sin(latitude) * np.sin(delta)
    cos_cos = np.cos(latitude) * np.cos(delta)
    total = 0.0
    for shift in (-2.0 * np.pi, 0.0, 2.0 * np.pi):  # daylight arcs of the day before/after
        w1 = np.clip(omega_1, shift - ws, shift + ws)  # FAO-56: limit to -ws..ws
        w2 = np.clip(omega_2, shift - ws, shift + ws)
        total = total + (w2 - w1) * sin_sin + cos_cos * (np.sin(w2) - np.sin(w1))
    ra = 12.0 * 60.0 / np.pi * FAO_SOLAR_CONSTANT * dr * total  # FAO-56 eq. 28
    return np.maximum(ra, 0.0)


LOW_SUN_ANGLE = 0.3
"""Sun angle above the horizon at the middle of an hour below which ASCE-EWRI (2005) does not
trust the hour's :math:`R_s/R_{so}` and carries the cloudiness function :math:`f_{cd}` of the
last hour above it (eq. 45 notes, from memory). [rad]"""

DEFAULT_LOW_SUN_CLOUDINESS = float(cloudiness_factor(0.8))
""":math:`f_{cd}` used for a low-sun or night hour when no hour above :data:`LOW_SUN_ANGLE` is
at hand: that of :math:`R_s/R_{so} = 0.8`, the value FAO-56's hourly Example 19 takes at night
(the arid end of its 0.4–0.8 range, from memory), 0.73. [-]"""


def sun_angle_hourly(
    latitude: ArrayLike,
    longitude: ArrayLike,
    day_of_year: ArrayLike,
    utc_hour_start: ArrayLike,
    period_hours: ArrayLike = 1.0,
) -> np.ndarray | float:
    r"""Sun angle above the horizon at the middle of a period, as the hourly standard has it.

    Parameters
    ----------
    latitude : array_like
        Latitude, positive north. [rad]
    longitude : array_like
        Longitude, positive east. [degrees]
    day_of_year : array_like
        Day of the year. [-]
    utc_hour_start : array_like
        Start of the period in UTC. [h]
    period_hours : array_like, default 1.0
        Length of the period. [h]

    Returns
    -------
    numpy.ndarray or float
        :math:`\beta`, negative below the horizon. [rad]

    Notes
    -----
    :math:`\sin\beta = \sin\varphi \sin\delta + \cos\varphi \cos\delta \cos\omega` at the
    midpoint hour angle, with FAO-56's declination (eq. 24) and hour angle (eqs. 31–33), as
    ASCE-EWRI (2005) computes it for the low-sun rule (eq. 62, from memory).
    """
    omega = hour_angle(utc_hour_start + 0.5 * period_hours, longitude, day_of_year)
    sin_beta = cos_solar_zenith(latitude, solar_declination(day_of_year), omega)
    return np.arcsin(np.clip(sin_beta, -1.0, 1.0))


def clear_sky_shortwave_hourly(
    latitude: ArrayLike,
    longitude: ArrayLike,
    day_of_year: ArrayLike,
    utc_hour_start: ArrayLike,
    elevation: ArrayLike,
) -> np.ndarray | float:
    r"""Clear-sky shortwave radiation over one hour.

    Returns
    -------
    numpy.ndarray or float
        :math:`R_{so} = (0.75 + 2 \times 10^{-5} z) R_a` with :math:`R_a` of the hour
        (FAO-56 eqs. 28, 37; :func:`extraterrestrial_radiation_hourly`). [MJ m-2 h-1]
    """
    ra = extraterrestrial_radiation_hourly(latitude, day_of_year, utc_hour_start, longitude, 1.0)
    return clear_sky_transmissivity(elevation) * ra  # FAO-56 eq. 37 for an hour


def carried_cloudiness(
    cloudiness: ArrayLike,
    sun_angle: ArrayLike,
    min_sun_angle: float = LOW_SUN_ANGLE,
    initial: float = DEFAULT_LOW_SUN_CLOUDINESS,
) -> np.ndarray:
    r"""Cloudiness function of consecutive hours with the low-sun hours carried forward.

    Parameters
    ----------
    cloudiness : array_like
        :math:`f_{cd}` of each hour from its own :math:`R_s/R_{so}`, in time order (last
        axis). [-]
    sun_angle : array_like
        Sun angle at the middle of each hour, :func:`sun_angle_hourly`. [rad]
    min_sun_angle : float, default LOW_SUN_ANGLE
        Hours whose sun is below this take the last :math:`f_{cd}` of an hour above it. [rad]
    initial : float, default DEFAULT_LOW_SUN_CLOUDINESS
        :math:`f_{cd}` of low-sun hours before the first hour above ``min_sun_angle``. [-]

    Returns
    -------
    numpy.ndarray
        :math:`f_{cd}` of each hour. [-]

    Notes
    -----
    ASCE-EWRI (2005): where :math:`\beta < 0.3` rad (evening, night, early morning), the
    hour's :math:`R_s/R_{so}` is unreliable and :math:`f_{cd}` is that of the last hour with
    :math:`\beta > 0.3` rad (from memory).
    """
    fcd = np.asarray(cloudiness, dtype=float)
    trusted = np.broadcast_to(np.asarray(sun_angle) >= min_sun_angle, fcd.shape)
    index = np.where(trusted, np.arange(fcd.shape[-1]), -1)
    last = np.maximum.accumulate(index, axis=-1)  # latest trusted hour so far, -1: none yet
    carried = np.take_along_axis(fcd, np.maximum(last, 0), axis=-1)
    return np.where(last >= 0, carried, initial)


def net_radiation_hourly(
    temperature: ArrayLike,
    vapour_pressure: ArrayLike,
    shortwave: ArrayLike,
    latitude: ArrayLike,
    longitude: ArrayLike,
    day_of_year: ArrayLike,
    utc_hour_start: ArrayLike,
    elevation: ArrayLike,
    albedo: ArrayLike = 0.23,
    stefan_boltzmann_hourly: float = STEFAN_BOLTZMANN_HOURLY,
    low_sun_cloudiness: ArrayLike = DEFAULT_LOW_SUN_CLOUDINESS,
    min_sun_angle: float = LOW_SUN_ANGLE,
) -> np.ndarray | float:
    r"""Net radiation of the reference surface over one hour.

    Parameters
    ----------
    temperature : array_like
        Mean air temperature of the hour, :math:`T_{hr}`. [K]
    vapour_pressure : array_like
        Actual vapour pressure of the hour, :math:`e_a`. [kPa]
    shortwave : array_like
        Incoming shortwave radiation of the hour, :math:`R_s`. [MJ m-2 h-1]
    latitude : array_like
        Latitude, positive north. [rad]
    longitude : array_like
        Longitude, positive east of Greenwich. [degrees]
    day_of_year : array_like
        Day of the year, 1 to 365 or 366. [-]
    utc_hour_start : array_like
        Start of the hour in UTC. [h]
    elevation : array_like
        Elevation above sea level. [m]
    albedo : array_like, default 0.23
        Albedo of the reference surface (FAO-56 eq. 38). [-]
    stefan_boltzmann_hourly : float, default STEFAN_BOLTZMANN_HOURLY
        Stefan–Boltzmann constant as an hourly sum (CODATA); pass
        :data:`FAO_STEFAN_BOLTZMANN_HOURLY` to reproduce FAO-56. [MJ m-2 h-1 K-4]
    low_sun_cloudiness : array_like, default DEFAULT_LOW_SUN_CLOUDINESS
        :math:`f_{cd}` for hours whose mid-hour sun is below ``min_sun_angle``: that of the
        last hour above it (:func:`carried_cloudiness`, :func:`reference_et_hourly_series`). [-]
    min_sun_angle : float, default LOW_SUN_ANGLE
        Sun angle at the middle of the hour below which ``low_sun_cloudiness`` is used. [rad]

    Returns
    -------
    numpy.ndarray or float
        Net radiation :math:`R_n` of the hour, positive downwards. [MJ m-2 h-1]

    Notes
    -----
    FAO-56 [1]_ with the bounds and low-sun rule of ASCE-EWRI (2005) [2]_: :math:`R_{so}`
    of the hour (:func:`clear_sky_shortwave_hourly`), :math:`R_s/R_{so}` bounded to
    [0.3, 1.0] (:func:`~rasterbudget.physics.radiation.relative_shortwave`),
    :math:`f_{cd} = 1.35 R_s/R_{so} - 0.35` bounded to [0.05, 1.0], or ``low_sun_cloudiness``
    where :math:`\beta <` ``min_sun_angle`` (:func:`sun_angle_hourly`), and

    .. math::

        R_n = (1 - \alpha) R_s - \sigma T_{hr}^4 (0.34 - 0.14 \sqrt{e_a}) f_{cd}

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eqs. 28, 37–40.
    .. [2] Allen et al. (eds.) (2005), The ASCE Standardized Reference Evapotranspiration
       Equation, eqs. 42–45 (from memory).
    """
    rso = clear_sky_shortwave_hourly(latitude, longitude, day_of_year, utc_hour_start, elevation)
    beta = sun_angle_hourly(latitude, longitude, day_of_year, utc_hour_start)
    fcd = np.where(
        beta < min_sun_angle,
        low_sun_cloudiness,
        cloudiness_factor(relative_shortwave(shortwave, rso)),
    )
    rnl = net_longwave(np.asarray(temperature) ** 4, vapour_pressure, fcd, stefan_boltzmann_hourly)
    return net_radiation_daily(albedo, shortwave, rnl)[()]  # FAO-56 eqs. 38, 40 (same for an hour)


def reference_et_hourly(
    temperature: ArrayLike,
    wind_speed_2m: ArrayLike,
    shortwave: ArrayLike,
    latitude: ArrayLike,
    longitude: ArrayLike,
    day_of_year: ArrayLike,
    utc_hour_start: ArrayLike,
    elevation: ArrayLike,
    vapour_pressure: ArrayLike | None = None,
    relative_humidity: ArrayLike | None = None,
    reference: str | Mapping = "short",
    albedo: ArrayLike = 0.23,
    daytime: ArrayLike | None = None,
    stefan_boltzmann_hourly: float = STEFAN_BOLTZMANN_HOURLY,
    low_sun_cloudiness: ArrayLike = DEFAULT_LOW_SUN_CLOUDINESS,
    min_sun_angle: float = LOW_SUN_ANGLE,
) -> np.ndarray | float:
    r"""Hourly standardized reference evapotranspiration (FAO-56 / ASCE-EWRI 2005).

    Parameters
    ----------
    temperature : array_like
        Mean air temperature of the hour, :math:`T_{hr}`. [K]
    wind_speed_2m : array_like
        Mean wind speed of the hour at 2 m, :math:`u_2`. [m s-1]
    shortwave : array_like
        Incoming shortwave radiation of the hour, :math:`R_s`. [MJ m-2 h-1]
    latitude : array_like
        Latitude, positive north. [rad]
    longitude : array_like
        Longitude, positive east of Greenwich. [degrees]
    day_of_year : array_like
        Day of the year, 1 to 365 or 366. [-]
    utc_hour_start : array_like
        Start of the hour in UTC, e.g. 14.0 for 14:00–15:00 UTC. [h]
    elevation : array_like
        Station or pixel elevation above sea level. [m]
    vapour_pressure : array_like, optional
        Actual vapour pressure of the hour; if not given, it is computed from
        ``relative_humidity``. [kPa]
    relative_humidity : array_like, optional
        Mean relative humidity of the hour, used when ``vapour_pressure`` is not
        given. [%]
    reference : str or mapping, default "short"
        ``"short"`` (grass) or ``"tall"`` (alfalfa), a key of :data:`REFERENCE_SURFACES`,
        or a mapping shaped like :data:`FAO56_GRASS` (pass :data:`FAO56_GRASS` for FAO-56
        eq. 53 exactly). [-]
    albedo : array_like, default 0.23
        Albedo of the reference surface (FAO-56 eq. 38). [-]
    daytime : array_like of bool, optional
        Whether each hour is a daytime hour, which selects :math:`C_d` and :math:`G/R_n`;
        by default daytime is where :math:`R_n > 0` (ASCE-EWRI 2005, from memory). [-]
    stefan_boltzmann_hourly : float, default STEFAN_BOLTZMANN_HOURLY
        Stefan–Boltzmann constant as an hourly sum; the default is the CODATA value, pass
        :data:`FAO_STEFAN_BOLTZMANN_HOURLY` (2.043e-10) to reproduce FAO-56.
        [MJ m-2 h-1 K-4]
    low_sun_cloudiness : array_like, default DEFAULT_LOW_SUN_CLOUDINESS
        Cloudiness function :math:`f_{cd}` for hours whose mid-hour sun angle is below
        ``min_sun_angle``: ASCE-EWRI (2005) takes that of the last hour above it, which
        :func:`reference_et_hourly_series` does for a run of hours. The default, 0.73, is
        :math:`R_s/R_{so} = 0.8`, FAO-56's assumption at night in its Example 19. [-]
    min_sun_angle : float, default LOW_SUN_ANGLE
        0.3 rad (about 17°), ASCE-EWRI (2005). [rad]

    Returns
    -------
    numpy.ndarray or float
        Hourly reference evapotranspiration of the chosen surface; not clipped, so it can
        be slightly negative at night. [mm h-1]

    Raises
    ------
    InputValueError
        If neither ``vapour_pressure`` nor ``relative_humidity`` is given, or
        ``reference`` is not a known surface.

    Notes
    -----
    The FAO-56 hourly procedure (chapter 3, Example 19) [1]_ with the bounds of
    ASCE-EWRI (2005) [2]_:

    - :math:`e_s = e^\circ(T_{hr})` (eq. 11) and :math:`e_a = e^\circ(T_{hr}) RH_{hr}/100`
      (eq. 54), :math:`\Delta` at :math:`T_{hr}` (eq. 13);
    - :math:`R_n` of the hour, :func:`net_radiation_hourly` (eqs. 28, 37–40 with
      :math:`R_s/R_{so}` in [0.3, 1.0] and the low-sun rule);
    - :math:`G = 0.1 R_n` by day and :math:`0.5 R_n` by night for grass (eqs. 45, 46),
      or the ratios of the chosen surface (ASCE-EWRI 2005 Table 1);
    - :func:`penman_monteith` with the hourly :math:`C_n` and the day or night
      :math:`C_d` of the surface (FAO-56 eq. 53 keeps 0.34; ASCE-EWRI uses 0.24 by day and
      0.96 at night for grass).

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eqs. 11, 13, 28–40,
       45, 46, 53, 54.
    .. [2] Allen et al. (eds.) (2005), The ASCE Standardized Reference Evapotranspiration
       Equation, Table 1.
    """
    constants = _surface_constants(reference, "hourly")
    if vapour_pressure is None:
        if relative_humidity is None:
            raise InputValueError(
                "reference_et_hourly needs the actual vapour pressure: pass vapour_pressure "
                "or relative_humidity."
            )
        vapour_pressure = vapour_pressure_from_relative_humidity(  # FAO-56 eq. 54
            temperature, relative_humidity
        )
    es = saturation_vapour_pressure(temperature)  # FAO-56 eq. 11 at T_hr
    rn = net_radiation_hourly(  # FAO-56 eqs. 28, 37-40; ASCE-EWRI (2005) bounds
        temperature,
        vapour_pressure,
        shortwave,
        latitude,
        longitude,
        day_of_year,
        utc_hour_start,
        elevation,
        albedo,
        stefan_boltzmann_hourly,
        low_sun_cloudiness,
        min_sun_angle,
    )
    is_day = np.greater(rn, 0.0) if daytime is None else np.asarray(daytime, dtype=bool)
    ground = np.where(is_day, constants["g_day"], constants["g_night"]) * rn  # eqs. 45, 46
    cd = np.where(is_day, constants["cd_day"], constants["cd_night"])
    pressure = air_pressure(elevation)  # FAO-56 eq. 7
    return penman_monteith(  # FAO-56 eq. 53; ASCE-EWRI (2005) eq. 1
        rn,
        ground,
        temperature,
        wind_speed_2m,
        es,
        vapour_pressure,
        pressure,
        constants["cn"],
        cd,
    )[()]


def reference_et_hourly_series(
    temperature: ArrayLike,
    wind_speed_2m: ArrayLike,
    shortwave: ArrayLike,
    latitude: float,
    longitude: float,
    day_of_year: ArrayLike,
    utc_hour_start: ArrayLike,
    elevation: float,
    vapour_pressure: ArrayLike | None = None,
    relative_humidity: ArrayLike | None = None,
    reference: str | Mapping = "short",
    stefan_boltzmann_hourly: float = STEFAN_BOLTZMANN_HOURLY,
    initial_cloudiness: float = DEFAULT_LOW_SUN_CLOUDINESS,
) -> np.ndarray:
    r"""Hourly standardized reference ET of a station's consecutive hours.

    Parameters
    ----------
    temperature, wind_speed_2m, shortwave, vapour_pressure, relative_humidity : array_like
        One value per hour, in time order, as for :func:`reference_et_hourly`.
        [K], [m s-1], [MJ m-2 h-1], [kPa], [%]
    latitude : float
        [rad]
    longitude : float
        [degrees east]
    day_of_year, utc_hour_start : array_like
        Day of the year and UTC start of each hour. [-], [h]
    elevation : float
        [m]
    reference : str or mapping, default "short"
        See :func:`reference_et_hourly`.
    stefan_boltzmann_hourly : float, default STEFAN_BOLTZMANN_HOURLY
        [MJ m-2 h-1 K-4]
    initial_cloudiness : float, default DEFAULT_LOW_SUN_CLOUDINESS
        :math:`f_{cd}` of the low-sun hours before the series' first hour with the sun above
        :data:`LOW_SUN_ANGLE` (start the series at noon of the day before to avoid it). [-]

    Returns
    -------
    numpy.ndarray
        Reference ET of each hour. [mm h-1]

    Notes
    -----
    As :func:`reference_et_hourly`, with ASCE-EWRI's (2005) rule for the hours whose mid-hour
    sun angle is below 0.3 rad: their cloudiness function is that of the last hour above it
    (:func:`carried_cloudiness`).
    """
    shortwave = np.asarray(shortwave, dtype=float)
    rso = clear_sky_shortwave_hourly(latitude, longitude, day_of_year, utc_hour_start, elevation)
    beta = sun_angle_hourly(latitude, longitude, day_of_year, utc_hour_start)
    own = cloudiness_factor(relative_shortwave(shortwave, rso))
    own = np.broadcast_to(own, shortwave.shape)
    fcd = carried_cloudiness(own, beta, initial=initial_cloudiness)
    return np.asarray(
        reference_et_hourly(
            temperature,
            wind_speed_2m,
            shortwave,
            latitude,
            longitude,
            day_of_year,
            utc_hour_start,
            elevation,
            vapour_pressure=vapour_pressure,
            relative_humidity=relative_humidity,
            reference=reference,
            stefan_boltzmann_hourly=stefan_boltzmann_hourly,
            low_sun_cloudiness=fcd,
        )
    )
