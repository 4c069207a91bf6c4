"""The atmosphere between a Landsat sensor and the surface: at-surface reflectance of the
reflective bands and the path terms of the thermal band.

Both are scene-wide corrections computed from near-surface weather (pressure, humidity, air
temperature) rather than from radiative-transfer runs, so that a Level-1 product can be
corrected with the weather a scene's recipe already holds. Units: pressure kPa, precipitable
water mm (``_mm``) or g cm-2 (``_g_cm2``, 1 g cm-2 = 10 mm), angles radians, temperatures K,
radiances W m-2 sr-1 µm-1.

Sources
-------
- Tasumi, M., Allen, R. G. and Trezza, R. (2008). At-surface reflectance and albedo from
  satellite for operational calculation of land surface energy balance. Journal of Hydrologic
  Engineering 13(2), 51–63.
- Garrison, J. D. and Adler, G. P. (1990). Estimation of precipitable water over the United
  States for application to the division of solar radiation into its direct and diffuse
  components. Solar Energy 44(4), 225–241; in the form of ASCE-EWRI (2005), The ASCE
  Standardized Reference Evapotranspiration Equation, Appendix D.
- Qin, Z., Karnieli, A. and Berliner, P. (2001). A mono-window algorithm for retrieving land
  surface temperature from Landsat TM data and its application to the Israel-Egypt border
  region. International Journal of Remote Sensing 22(18), 3719–3746.
- Hansen, J. E. and Travis, L. D. (1974). Light scattering in planetary atmospheres. Space
  Science Reviews 16, 527–610 (Rayleigh optical depth; used by the tests as an independent
  bound).
"""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType
from typing import Literal, NamedTuple

import numpy as np
from numpy.typing import ArrayLike

from .radiometry import thermal_radiance

__all__ = [
    "TASUMI_2008",
    "BandTransmittance",
    "at_surface_reflectance",
    "band_transmittance",
    "effective_atmospheric_temperature",
    "path_reflectance",
    "precipitable_water",
    "rayleigh_optical_depth",
    "thermal_path_radiance",
    "thermal_transmittance",
]


class BandTransmittance(NamedTuple):
    """Coefficients of one band in Tasumi, Allen & Trezza (2008): ``C1``–``C5`` of the
    transmittance and ``Cb`` of the path reflectance."""

    c1: float
    c2: float
    c3: float
    c4: float
    c5: float
    cb: float


#: Tasumi, Allen & Trezza (2008), coefficients for Landsat 5 TM and 7 ETM+ bands 1-5 and 7
#: (from memory, not re-read against the paper: check them before relying on them). Keyed by
#: the TM/ETM+ band number.
TASUMI_2008: Mapping[int, BandTransmittance] = MappingProxyType(
    {
        1: BandTransmittance(0.987, -0.00071, 0.000036, 0.0880, 0.0789, 0.640),
        2: BandTransmittance(2.319, -0.000164, 0.000105, 0.0437, -1.2697, 0.310),
        3: BandTransmittance(0.951, -0.000329, 0.000280, 0.0875, 0.1014, 0.286),
        4: BandTransmittance(0.375, -0.00048, 0.005018, 0.1355, 0.6621, 0.189),
        5: BandTransmittance(0.234, -0.00101, 0.004336, 0.0560, 0.7757, 0.274),
        7: BandTransmittance(0.365, -0.00097, 0.004296, 0.0155, 0.6390, -0.186),
    }
)


def precipitable_water(vapour_pressure: ArrayLike, pressure: ArrayLike) -> np.ndarray | float:
    r"""Precipitable water in the atmosphere from near-surface humidity.

    Parameters
    ----------
    vapour_pressure : array_like
        Near-surface actual vapour pressure, :math:`e_a`. [kPa]
    pressure : array_like
        Atmospheric pressure at the surface, :math:`P`. [kPa]

    Returns
    -------
    numpy.ndarray or float
        Precipitable water :math:`W`. [mm]

    Notes
    -----
    Garrison & Adler (1990) as written in ASCE-EWRI (2005), Appendix D:
    :math:`W = 0.14\, e_a P + 2.1`.
    """
    w = 0.14 * np.asarray(vapour_pressure, dtype=np.float64) * np.asarray(pressure) + 2.1
    return w if w.ndim else float(w)


def band_transmittance(
    coefficients: BandTransmittance,
    pressure: ArrayLike,
    precipitable_water_mm: ArrayLike,
    cos_angle: ArrayLike,
    clearness: float = 1.0,
) -> np.ndarray | float:
    r"""One-way atmospheric transmittance of a reflective band (Tasumi et al. 2008).

    Parameters
    ----------
    coefficients : BandTransmittance
        The band's coefficients (:data:`TASUMI_2008`).
    pressure : array_like
        Surface pressure, :math:`P`. [kPa]
    precipitable_water_mm : array_like
        Precipitable water, :math:`W` (:func:`precipitable_water`). [mm]
    cos_angle : array_like
        Cosine of the path's angle from the zenith: the solar zenith angle for the incoming
        path, the view angle for the outgoing one (1 at nadir). [-]
    clearness : float, default 1
        Turbidity coefficient :math:`K_t`: 1 for clean air, 0.5 for extremely turbid or
        polluted air (ASCE-EWRI 2005). [-]

    Returns
    -------
    numpy.ndarray or float
        Band transmittance :math:`\tau_b`. [-]

    Notes
    -----
    .. math::

        \tau_b = C_1 \exp\left[\frac{C_2 P}{K_t \cos\theta} - \frac{C_3 W + C_4}{\cos\theta}
                 \right] + C_5
    """
    c = coefficients
    cos_angle = np.asarray(cos_angle, dtype=np.float64)
    exponent = (
        c.c2 * np.asarray(pressure) / (clearness * cos_angle)
        - (c.c3 * np.asarray(precipitable_water_mm) + c.c4) / cos_angle
    )
    tau = c.c1 * np.exp(exponent) + c.c5
    return tau if tau.ndim else float(tau)


def path_reflectance(coefficients: BandTransmittance, incoming: ArrayLike) -> np.ndarray | float:
    r"""Reflectance the atmosphere adds to a band along the path (Tasumi et al. 2008):
    :math:`\rho_{a,b} = C_b (1 - \tau_{in,b})`. [-]"""
    rho = coefficients.cb * (1.0 - np.asarray(incoming, dtype=np.float64))
    return rho if rho.ndim else float(rho)


def at_surface_reflectance(
    toa_reflectance: ArrayLike,
    coefficients: BandTransmittance,
    pressure: ArrayLike,
    precipitable_water_mm: ArrayLike,
    cos_solar_zenith: ArrayLike,
    cos_view: ArrayLike = 1.0,
    clearness: float = 1.0,
) -> np.ndarray | float:
    r"""At-surface reflectance of a reflective band from its top-of-atmosphere reflectance.

    Parameters
    ----------
    toa_reflectance : array_like
        Top-of-atmosphere reflectance :math:`\rho_{t,b}`. [-]
    coefficients, pressure, precipitable_water_mm, clearness
        As in :func:`band_transmittance`.
    cos_solar_zenith : array_like
        Cosine of the solar zenith angle (of the incidence angle on a slope). [-]
    cos_view : array_like, default 1
        Cosine of the view angle from nadir (Landsat: within 7.5°, so near 1). [-]

    Returns
    -------
    numpy.ndarray or float
        At-surface reflectance :math:`\rho_{s,b}`. [-]

    Notes
    -----
    Tasumi, Allen & Trezza (2008):

    .. math::

        \rho_{s,b} = \frac{\rho_{t,b} - \rho_{a,b}}{\tau_{in,b}\, \tau_{out,b}}

    For scene-wide :math:`P`, :math:`W` and sun angle the correction is linear in
    :math:`\rho_t`, so a product's digital numbers map to it by one scale and offset.
    """
    tau_in = band_transmittance(
        coefficients, pressure, precipitable_water_mm, cos_solar_zenith, clearness
    )
    tau_out = band_transmittance(coefficients, pressure, precipitable_water_mm, cos_view, clearness)
    toa = np.asarray(toa_reflectance, dtype=np.float64)
    rho = (toa - path_reflectance(coefficients, tau_in)) / (np.asarray(tau_in) * tau_out)
    return rho if rho.ndim else float(rho)


def rayleigh_optical_depth(wavelength_um: ArrayLike, pressure: ArrayLike = 101.325) -> np.ndarray:
    r"""Rayleigh (molecular) optical depth of the atmosphere at a wavelength.

    :math:`\tau_R = 0.008569\,\lambda^{-4}(1 + 0.0113\,\lambda^{-2} + 0.00013\,\lambda^{-4})
    \,P/101.325` with :math:`\lambda` in µm (Hansen & Travis 1974, from memory). [-]
    """
    lam = np.asarray(wavelength_um, dtype=np.float64)
    sea_level = 0.008569 * lam**-4 * (1.0 + 0.0113 * lam**-2 + 0.00013 * lam**-4)
    return sea_level * np.asarray(pressure) / 101.325


#: Qin, Karnieli & Berliner (2001), Table 4 (from memory): transmittance of TM band 6 as a
#: linear function of water vapour w [g cm-2] for two water-vapour ranges, for the
#: mid-latitude summer profile at a near-surface air temperature near 18 and 35 degC.
_QIN_TRANSMITTANCE = {
    "moderate": ((0.4, 1.6, 0.974290, -0.08007), (1.6, 3.0, 1.031412, -0.11536)),
    "high": ((0.4, 1.6, 0.982007, -0.09611), (1.6, 3.0, 1.053710, -0.14142)),
}

#: Qin et al. (2001), their eqs. for the effective mean atmospheric temperature from the
#: near-surface air temperature T0 [K] per standard profile: Ta = a + b T0 (from memory).
_QIN_MEAN_TEMPERATURE = {
    "tropical": (17.9769, 0.91715),
    "midlatitude_summer": (16.0110, 0.92621),
    "midlatitude_winter": (19.2704, 0.91118),
}


def thermal_transmittance(
    water_vapour_g_cm2: ArrayLike, air_temperature: ArrayLike
) -> np.ndarray | float:
    r"""Atmospheric transmittance of the Landsat TM/ETM+ thermal band from water vapour.

    Parameters
    ----------
    water_vapour_g_cm2 : array_like
        Column water vapour :math:`w`. [g cm-2]
    air_temperature : array_like
        Near-surface air temperature; the "high" relations of Qin et al. apply above
        :math:`300.15` K (27 degC, half way between their two cases), the moderate ones
        below. [K]

    Returns
    -------
    numpy.ndarray or float
        Band transmittance :math:`\tau`, bounded to [0.3, 1]. [-]

    Notes
    -----
    Qin, Karnieli & Berliner (2001), Table 4: :math:`\tau = a + b w`, two linear pieces
    meeting near :math:`w = 1.6` (within 0.001). Outside the tabulated
    0.4–3.0 g cm-2 the end pieces are extended; the bound keeps the inversion defined. For
    OLI/TIRS band 10 this is an approximation (the relation was fitted for TM band 6).
    """
    w = np.asarray(water_vapour_g_cm2, dtype=np.float64)
    tau = np.empty(np.broadcast(w, air_temperature).shape)
    high = np.broadcast_to(np.asarray(air_temperature) > 300.15, tau.shape)
    for key, rows in _QIN_TRANSMITTANCE.items():
        (_, split, a1, b1), (_, _, a2, b2) = rows
        piece = np.where(w <= split, a1 + b1 * w, a2 + b2 * w)
        tau = np.where(high if key == "high" else ~high, np.broadcast_to(piece, tau.shape), tau)
    tau = np.clip(tau, 0.3, 1.0)
    return tau if tau.ndim else float(tau)


def effective_atmospheric_temperature(
    air_temperature: ArrayLike,
    profile: Literal["tropical", "midlatitude_summer", "midlatitude_winter"] = (
        "midlatitude_summer"
    ),
) -> np.ndarray | float:
    r"""Effective mean temperature of the atmosphere's thermal emission,
    :math:`T_a = a + b\,T_0` (Qin et al. 2001; coefficients from memory). [K]"""
    a, b = _QIN_MEAN_TEMPERATURE[profile]
    t = a + b * np.asarray(air_temperature, dtype=np.float64)
    return t if t.ndim else float(t)


def thermal_path_radiance(
    transmittance: ArrayLike, mean_temperature: ArrayLike, k1: float, k2: float
) -> np.ndarray | float:
    r"""Upwelling (= downwelling) band radiance of the atmosphere,
    :math:`L_\uparrow \approx L_\downarrow \approx (1 - \tau)\,B(T_a)`.

    Qin et al. (2001) approximate both path radiances by the emission of an atmosphere of
    effective temperature :math:`T_a` and emissivity :math:`1 - \tau`; :math:`B` is the band's
    Planck radiance in the calibration form (:func:`~rasterbudget.physics.radiometry.
    thermal_radiance`). [W m-2 sr-1 µm-1]
    """
    value = (1.0 - np.asarray(transmittance, dtype=np.float64)) * thermal_radiance(
        mean_temperature, k1, k2
    )
    return value if np.ndim(value) else float(value)
