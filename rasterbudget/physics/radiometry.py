"""Landsat digital numbers to radiance, reflectance, temperature, indices, emissivity and albedo.

Radiances follow the Landsat convention: band-averaged spectral radiance in
W m-2 sr-1 µm-1 (per micrometre, not per metre), and solar irradiances ``ESUN`` in
W m-2 µm-1. Temperatures are in K, angles in radians, the Earth–Sun distance in astronomical
units, reflectances, indices and emissivities dimensionless.

Sources
-------
- Chander, G., Markham, B. L. and Helder, D. L. (2009). Summary of current radiometric
  calibration coefficients for Landsat MSS, TM, ETM+, and EO-1 ALI sensors. Remote Sensing
  of Environment 113, 893–903.
- U.S. Geological Survey. Landsat 8 (L8) Data Users Handbook (Level-1 rescaling of OLI/TIRS
  digital numbers with the metadata's ``RADIANCE_MULT/ADD``, ``REFLECTANCE_MULT/ADD`` and
  ``K1/K2_CONSTANT`` fields).
- Barsi, J. A., Barker, J. L. and Schott, J. R. (2003). An atmospheric correction parameter
  calculator for a single thermal band earth-sensing instrument. Proceedings of IGARSS 2003,
  vol. 5, 3014–3016.
- Sobrino, J. A., Jiménez-Muñoz, J. C. and Paolini, L. (2004). Land surface temperature
  retrieval from LANDSAT TM 5. Remote Sensing of Environment 90, 434–440.
- Carlson, T. N. and Ripley, D. A. (1997). On the relation between NDVI, fractional
  vegetation cover, and leaf area index. Remote Sensing of Environment 62, 241–252.
- Rouse, J. W., Haas, R. H., Schell, J. A. and Deering, D. W. (1974). Monitoring vegetation
  systems in the Great Plains with ERTS. Third ERTS Symposium, NASA SP-351, 309–317 (from
  memory).
- Huete, A. R. (1988). A soil-adjusted vegetation index (SAVI). Remote Sensing of
  Environment 25, 295–309.
- Baret, F. and Guyot, G. (1991). Potentials and limits of vegetation indices for LAI and
  APAR assessment. Remote Sensing of Environment 35, 161–173.
- Liang, S. (2001). Narrowband to broadband conversions of land surface albedo I:
  algorithms. Remote Sensing of Environment 76, 213–238.
- Reda, I. and Andreas, A. (2004). Solar position algorithm for solar radiation
  applications. Solar Energy 76, 577–589 (NREL SPA), through pvlib.

Not here: an at-surface (atmospheric) correction of reflectance. Liang's albedo weights
apply to surface reflectance; top-of-atmosphere reflectance fed to them gives a
top-of-atmosphere broadband value, not the surface albedo.
"""

from collections.abc import Mapping
from datetime import datetime
from types import MappingProxyType
from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike

from . import radiation

__all__ = [
    "ESUN",
    "THERMAL_CONSTANTS",
    "ThermalConstants",
    "albedo_liang_oli_adapted",
    "albedo_liang_tm_etm",
    "brightness_temperature",
    "broadband_emissivity_from_lai",
    "earth_sun_distance",
    "fractional_vegetation_cover",
    "lai_from_savi",
    "ndvi",
    "radiance_from_dn",
    "radiance_from_dn_lmin_lmax",
    "savi",
    "surface_temperature",
    "thermal_emissivity_from_ndvi",
    "thermal_radiance",
    "toa_reflectance_from_dn",
    "toa_reflectance_from_radiance",
]


class ThermalConstants(NamedTuple):
    """Calibration constants of a thermal band, for :func:`brightness_temperature`."""

    k1: float
    """:math:`K_1`. [W m-2 sr-1 µm-1]"""
    k2: float
    """:math:`K_2`. [K]"""


def _frozen(table: dict) -> Mapping:
    return MappingProxyType({key: MappingProxyType(dict(value)) for key, value in table.items()})


ESUN: Mapping[str, Mapping[int, float]] = _frozen(
    {
        # Chander et al. (2009), table of ESUN (from memory: recalled, and equal to the values
        # quoted from that paper in public code; not read in the paper itself)
        "TM4": {1: 1983.0, 2: 1795.0, 3: 1539.0, 4: 1028.0, 5: 219.8, 7: 83.49},
        "TM5": {1: 1983.0, 2: 1796.0, 3: 1536.0, 4: 1031.0, 5: 220.0, 7: 83.44},
        "ETM+": {1: 1997.0, 2: 1812.0, 3: 1533.0, 4: 1039.0, 5: 230.8, 7: 84.90, 8: 1362.0},
    }
)
"""Mean exoatmospheric solar spectral irradiance per sensor and band (Chander et al. 2009;
values from memory). ``ESUN["ETM+"][3]`` is ETM+ band 3; band 8 is the ETM+ panchromatic band.
OLI has no entry: its products carry ``REFLECTANCE_MULT/ADD`` for
:func:`toa_reflectance_from_dn` instead. Read-only. [W m-2 µm-1]"""

THERMAL_CONSTANTS: Mapping[str, Mapping[int, ThermalConstants]] = _frozen(
    {
        # Chander et al. (2009), table of thermal constants (from memory; TM5 and ETM+ also
        # listed in CHECKS.md "Landsat products", from memory)
        "TM4": {6: ThermalConstants(671.62, 1284.30)},
        "TM5": {6: ThermalConstants(607.76, 1260.56)},
        # one pair for both ETM+ band 6 datasets (6-1 low gain, 6-2 high gain)
        "ETM+": {6: ThermalConstants(666.09, 1282.71)},
        # TIRS: the product metadata's K1/K2_CONSTANT_BAND_10/11 (from memory)
        "TIRS": {
            10: ThermalConstants(774.8853, 1321.0789),
            11: ThermalConstants(480.8883, 1201.1442),
        },
    }
)
"""Thermal-band constants :math:`K_1` [W m-2 sr-1 µm-1] and :math:`K_2` [K] per sensor and
band: TM4, TM5 and ETM+ band 6 from Chander et al. (2009), TIRS bands 10 and 11 as printed in
the Level-1 metadata. All from memory. Read-only."""


def _scalar_or_array(value: np.ndarray) -> np.ndarray | float:
    """A 0-d result as a numpy scalar, anything else unchanged."""
    return np.asarray(value)[()]


def radiance_from_dn(dn: ArrayLike, mult: ArrayLike, add: ArrayLike) -> np.ndarray | float:
    r"""At-sensor spectral radiance from quantized digital numbers (Collection-style rescaling).

    Parameters
    ----------
    dn : array_like
        Quantized calibrated pixel value :math:`Q_{cal}` (DN); fill pixels (DN 0 in Level-1
        products) are the caller's to mask. [-]
    mult : array_like
        Multiplicative rescaling factor :math:`M_L` (metadata ``RADIANCE_MULT_BAND_n``, or
        Chander et al.'s :math:`G_{rescale}`). [W m-2 sr-1 µm-1 per DN]
    add : array_like
        Additive rescaling factor :math:`A_L` (``RADIANCE_ADD_BAND_n``, or
        :math:`B_{rescale}`). [W m-2 sr-1 µm-1]

    Returns
    -------
    numpy.ndarray or float
        Spectral radiance at the sensor :math:`L_\lambda`. [W m-2 sr-1 µm-1]

    Notes
    -----
    Chander et al. (2009) eq. 2 [1]_ and the Landsat 8 Data Users Handbook [2]_ (equation
    numbers from memory):

    .. math:: L_\lambda = M_L Q_{cal} + A_L

    References
    ----------
    .. [1] Chander, Markham and Helder (2009), Remote Sensing of Environment 113, 893–903.
    .. [2] U.S. Geological Survey, Landsat 8 (L8) Data Users Handbook.
    """
    return mult * np.asarray(dn, dtype=np.float64) + add  # Chander et al. (2009) eq. 2


def radiance_from_dn_lmin_lmax(
    dn: ArrayLike,
    lmin: ArrayLike,
    lmax: ArrayLike,
    *,
    qcal_min: float,
    qcal_max: float,
) -> np.ndarray | float:
    r"""At-sensor spectral radiance from digital numbers and the band's dynamic range.

    Parameters
    ----------
    dn : array_like
        Quantized calibrated pixel value :math:`Q_{cal}` (DN). [-]
    lmin, lmax : array_like
        Spectral radiance scaled to ``qcal_min`` and ``qcal_max`` (:math:`LMIN_\lambda`,
        :math:`LMAX_\lambda`; they depend on sensor, band, gain state and processing
        date). [W m-2 sr-1 µm-1]
    qcal_min, qcal_max : float
        The DN that ``lmin`` and ``lmax`` refer to. Keyword-only and without defaults, because
        the convention differs between processing systems (Chander et al. 2009 give
        :math:`Q_{calmin} = 1` for LPGS and 0 for NLAPS products, :math:`Q_{calmax} = 255`;
        from memory). [-]

    Returns
    -------
    numpy.ndarray or float
        Spectral radiance at the sensor :math:`L_\lambda`. [W m-2 sr-1 µm-1]

    Notes
    -----
    Chander et al. (2009) eq. 1 [1]_ (equation number from memory):

    .. math::

        L_\lambda = \frac{LMAX_\lambda - LMIN_\lambda}{Q_{calmax} - Q_{calmin}}
                    (Q_{cal} - Q_{calmin}) + LMIN_\lambda

    the same line as :func:`radiance_from_dn` with
    :math:`G_{rescale} = (LMAX_\lambda - LMIN_\lambda)/(Q_{calmax} - Q_{calmin})` and
    :math:`B_{rescale} = LMIN_\lambda - G_{rescale} Q_{calmin}` (Chander et al. 2009, eq. 2).

    References
    ----------
    .. [1] Chander, Markham and Helder (2009), Remote Sensing of Environment 113, 893–903.
    """
    gain = (lmax - lmin) / (qcal_max - qcal_min)
    # Chander et al. (2009) eq. 1
    return gain * (np.asarray(dn, dtype=np.float64) - qcal_min) + lmin


def toa_reflectance_from_radiance(
    radiance: ArrayLike,
    esun: ArrayLike,
    sun_distance: ArrayLike,
    solar_zenith: ArrayLike,
) -> np.ndarray | float:
    r"""Top-of-atmosphere (planetary) reflectance from at-sensor radiance.

    Parameters
    ----------
    radiance : array_like
        Spectral radiance at the sensor, :math:`L_\lambda`. [W m-2 sr-1 µm-1]
    esun : array_like
        Mean exoatmospheric solar spectral irradiance of the band (:data:`ESUN`).
        [W m-2 µm-1]
    sun_distance : array_like
        Earth–Sun distance at acquisition (:func:`earth_sun_distance`). [au]
    solar_zenith : array_like
        Solar zenith angle, :math:`\theta_s` (90° minus the sun elevation). [rad]

    Returns
    -------
    numpy.ndarray or float
        Top-of-atmosphere reflectance :math:`\rho_p`, not clipped. [-]

    Notes
    -----
    Chander et al. (2009) eq. 5 [1]_ (equation number from memory):

    .. math:: \rho_p = \frac{\pi L_\lambda d^2}{ESUN_\lambda \cos\theta_s}

    It is the reflectance of a horizontal Lambertian surface seen from above the atmosphere.

    References
    ----------
    .. [1] Chander, Markham and Helder (2009), Remote Sensing of Environment 113, 893–903.
    """
    return (  # Chander et al. (2009) eq. 5
        np.pi * radiance * sun_distance**2 / (esun * np.cos(solar_zenith))
    )


def toa_reflectance_from_dn(
    dn: ArrayLike, mult: ArrayLike, add: ArrayLike, sun_elevation: ArrayLike
) -> np.ndarray | float:
    r"""Top-of-atmosphere reflectance from digital numbers (Collection-style rescaling).

    Parameters
    ----------
    dn : array_like
        Quantized calibrated pixel value :math:`Q_{cal}` (DN). [-]
    mult : array_like
        Reflectance multiplicative factor :math:`M_\rho` (``REFLECTANCE_MULT_BAND_n``).
        [per DN]
    add : array_like
        Reflectance additive factor :math:`A_\rho` (``REFLECTANCE_ADD_BAND_n``). [-]
    sun_elevation : array_like
        Sun elevation :math:`\theta_{SE}` (the metadata's ``SUN_ELEVATION`` is for the
        scene centre, in degrees: convert). [rad]

    Returns
    -------
    numpy.ndarray or float
        Top-of-atmosphere reflectance :math:`\rho_\lambda`, corrected for the sun angle. [-]

    Notes
    -----
    Landsat 8 Data Users Handbook [1]_:

    .. math::

        \rho'_\lambda = M_\rho Q_{cal} + A_\rho, \qquad
        \rho_\lambda = \frac{\rho'_\lambda}{\sin\theta_{SE}}

    :math:`\rho'_\lambda` lacks only the sun-angle correction (handbook wording, from
    memory); dividing by :math:`\sin\theta_{SE} = \cos\theta_s` gives the
    :math:`\rho_p` of :func:`toa_reflectance_from_radiance`.

    References
    ----------
    .. [1] U.S. Geological Survey, Landsat 8 (L8) Data Users Handbook.
    """
    rho_prime = mult * np.asarray(dn, dtype=np.float64) + add  # USGS L8 handbook
    return rho_prime / np.sin(sun_elevation)


def thermal_radiance(temperature: ArrayLike, k1: ArrayLike, k2: ArrayLike) -> np.ndarray | float:
    r"""Band radiance of a blackbody at a temperature (inverse of :func:`brightness_temperature`).

    Parameters
    ----------
    temperature : array_like
        Blackbody temperature. [K]
    k1, k2 : array_like
        The band's calibration constants (:data:`THERMAL_CONSTANTS`). [W m-2 sr-1 µm-1], [K]

    Returns
    -------
    numpy.ndarray or float
        Band radiance :math:`B(T)`. [W m-2 sr-1 µm-1]

    Notes
    -----
    Planck's law in the two-constant form of Chander et al. (2009) [1]_:

    .. math:: B(T) = \frac{K_1}{\exp(K_2 / T) - 1}

    References
    ----------
    .. [1] Chander, Markham and Helder (2009), Remote Sensing of Environment 113, 893–903.
    """
    return k1 / np.expm1(k2 / np.asarray(temperature, dtype=np.float64))


def brightness_temperature(radiance: ArrayLike, k1: ArrayLike, k2: ArrayLike) -> np.ndarray | float:
    r"""At-sensor brightness temperature of a thermal band.

    Parameters
    ----------
    radiance : array_like
        Spectral radiance at the sensor, :math:`L_\lambda`. [W m-2 sr-1 µm-1]
    k1, k2 : array_like
        The band's calibration constants (:data:`THERMAL_CONSTANTS`). [W m-2 sr-1 µm-1], [K]

    Returns
    -------
    numpy.ndarray or float
        Brightness temperature :math:`T_B`; NaN where the radiance is not positive. [K]

    Notes
    -----
    Chander et al. (2009) [1]_ (their thermal-band equation):

    .. math:: T_B = \frac{K_2}{\ln(K_1 / L_\lambda + 1)}

    the temperature of a blackbody with the observed band radiance (emissivity 1, no
    atmosphere).

    References
    ----------
    .. [1] Chander, Markham and Helder (2009), Remote Sensing of Environment 113, 893–903.
    """
    radiance = np.asarray(radiance, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        t_b = k2 / np.log(k1 / radiance + 1.0)  # Chander et al. (2009)
    return _scalar_or_array(np.where(radiance > 0.0, t_b, np.nan))


def surface_temperature(
    radiance: ArrayLike,
    k1: ArrayLike,
    k2: ArrayLike,
    emissivity: ArrayLike,
    transmittance: ArrayLike = 1.0,
    upwelling: ArrayLike = 0.0,
    downwelling: ArrayLike = 0.0,
) -> np.ndarray | float:
    r"""Surface temperature from one thermal band by inverting the radiative transfer equation.

    Parameters
    ----------
    radiance : array_like
        Spectral radiance at the sensor, :math:`L_\lambda`. [W m-2 sr-1 µm-1]
    k1, k2 : array_like
        The band's calibration constants (:data:`THERMAL_CONSTANTS`). [W m-2 sr-1 µm-1], [K]
    emissivity : array_like
        Surface emissivity in the band, :math:`\varepsilon` (e.g.
        :func:`thermal_emissivity_from_ndvi`; not the broadband emissivity). [-]
    transmittance : array_like, default 1
        Atmospheric transmittance of the band along the view path, :math:`\tau`. [-]
    upwelling : array_like, default 0
        Band radiance emitted by the atmosphere towards the sensor,
        :math:`L_\uparrow`. [W m-2 sr-1 µm-1]
    downwelling : array_like, default 0
        Band radiance of the sky onto the surface (hemispheric irradiance divided by
        :math:`\pi`), :math:`L_\downarrow`. [W m-2 sr-1 µm-1]

    Returns
    -------
    numpy.ndarray or float
        Surface (skin) temperature :math:`T_s`; NaN where :math:`R_c \le 0`. [K]

    Notes
    -----
    The clear-sky thermal radiative transfer equation for a single band, as written for
    Landsat by Barsi, Barker & Schott (2003) [1]_ and Sobrino, Jiménez-Muñoz & Paolini
    (2004) [2]_ (from memory):

    .. math::

        L_\lambda = \tau \left[\varepsilon B(T_s) + (1 - \varepsilon) L_\downarrow\right]
                    + L_\uparrow

    Solved for the radiance the surface emits, :math:`R_c = \varepsilon B(T_s)`,

    .. math::

        R_c = \frac{L_\lambda - L_\uparrow}{\tau} - (1 - \varepsilon) L_\downarrow, \qquad
        T_s = \frac{K_2}{\ln(K_1 \varepsilon / R_c + 1)}

    with :math:`B` in the form of :func:`thermal_radiance`. With the defaults
    (:math:`\tau = 1`, :math:`L_\uparrow = L_\downarrow = 0`) it is the emissivity-corrected
    brightness temperature, and with :math:`\varepsilon = 1` as well it is
    :func:`brightness_temperature`.

    References
    ----------
    .. [1] Barsi, Barker and Schott (2003), Proceedings of IGARSS 2003, 3014–3016.
    .. [2] Sobrino, Jiménez-Muñoz and Paolini (2004), Remote Sensing of Environment 90,
       434–440.
    """
    surface_radiance = (radiance - upwelling) / transmittance - (1.0 - emissivity) * downwelling
    surface_radiance = np.asarray(surface_radiance, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        t_s = k2 / np.log(k1 * emissivity / surface_radiance + 1.0)  # inverted thermal RTE
    return _scalar_or_array(np.where(surface_radiance > 0.0, t_s, np.nan))


def ndvi(red: ArrayLike, nir: ArrayLike) -> np.ndarray | float:
    r"""Normalized difference vegetation index.

    Parameters
    ----------
    red, nir : array_like
        Reflectance in the red and near-infrared bands (TM/ETM+ bands 3 and 4, OLI bands 4
        and 5), both top-of-atmosphere or both at the surface. [-]

    Returns
    -------
    numpy.ndarray or float
        :math:`NDVI`; NaN where both reflectances are 0. [-]

    Notes
    -----
    Rouse et al. (1974) [1]_ (from memory):

    .. math:: NDVI = \frac{\rho_{NIR} - \rho_{red}}{\rho_{NIR} + \rho_{red}}

    References
    ----------
    .. [1] Rouse, Haas, Schell and Deering (1974), Third ERTS Symposium, NASA SP-351,
       309–317.
    """
    red = np.asarray(red, dtype=np.float64)
    nir = np.asarray(nir, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        return _scalar_or_array((nir - red) / (nir + red))


def savi(red: ArrayLike, nir: ArrayLike, soil_factor: float = 0.5) -> np.ndarray | float:
    r"""Soil-adjusted vegetation index.

    Parameters
    ----------
    red, nir : array_like
        Reflectance in the red and near-infrared bands. [-]
    soil_factor : float, default 0.5
        Soil adjustment :math:`L`; Huete (1988) recommends 0.5 for intermediate vegetation
        densities (0 gives NDVI). [-]

    Returns
    -------
    numpy.ndarray or float
        :math:`SAVI`. [-]

    Notes
    -----
    Huete (1988) [1]_:

    .. math:: SAVI = \frac{(1 + L)(\rho_{NIR} - \rho_{red})}{\rho_{NIR} + \rho_{red} + L}

    References
    ----------
    .. [1] Huete (1988), Remote Sensing of Environment 25, 295–309.
    """
    red = np.asarray(red, dtype=np.float64)
    nir = np.asarray(nir, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        return _scalar_or_array((1.0 + soil_factor) * (nir - red) / (nir + red + soil_factor))


def lai_from_savi(
    savi: ArrayLike,
    savi_dense: float = 0.69,
    savi_bare: float = 0.10,
    extinction: float = 0.91,
    lai_max: float = 6.0,
) -> np.ndarray | float:
    r"""Leaf area index from SAVI by an exponential vegetation-index relation.

    Parameters
    ----------
    savi : array_like
        Soil-adjusted vegetation index (:func:`savi`, surface reflectance). [-]
    savi_dense : float, default 0.69
        :math:`SAVI_\infty`, SAVI of an infinitely dense canopy (from memory, see Notes). [-]
    savi_bare : float, default 0.10
        :math:`SAVI_g`, SAVI of bare ground (from memory, see Notes). [-]
    extinction : float, default 0.91
        :math:`K`, extinction coefficient of SAVI with LAI (from memory, see Notes). [-]
    lai_max : float, default 6
        Upper bound on the result, reached as SAVI approaches ``savi_dense``, where the
        relation has no information left (common practice). [m2 m-2]

    Returns
    -------
    numpy.ndarray or float
        Leaf area index, in :math:`[0, LAI_{max}]`: 0 at or below ``savi_bare``. [m2 m-2]

    Notes
    -----
    The semi-empirical form of Baret & Guyot (1991) [1]_,
    :math:`SAVI = SAVI_\infty + (SAVI_g - SAVI_\infty) \exp(-K \cdot LAI)`, solved for LAI:

    .. math::

        LAI = -\frac{1}{K} \ln\left(\frac{SAVI_\infty - SAVI}{SAVI_\infty - SAVI_g}\right)

    The defaults give the widely used Landsat relation
    :math:`LAI = -\ln((0.69 - SAVI)/0.59)/0.91`, an empirical fit over crops in southern Idaho,
    USA (coefficients and provenance from memory; the original publication was not checked
    here). It is a local calibration: expect errors of a unit of LAI or more elsewhere,
    especially for forest.

    References
    ----------
    .. [1] Baret and Guyot (1991), Remote Sensing of Environment 35, 161–173.
    """
    savi = np.asarray(savi, dtype=np.float64)
    gap = np.clip((savi_dense - savi) / (savi_dense - savi_bare), 0.0, 1.0)
    with np.errstate(divide="ignore"):
        lai = np.log(1.0 / gap) / extinction  # Baret & Guyot (1991) form, inverted
    return _scalar_or_array(np.minimum(lai, lai_max))


def fractional_vegetation_cover(
    ndvi: ArrayLike, ndvi_soil: float = 0.2, ndvi_vegetation: float = 0.5
) -> np.ndarray | float:
    r"""Fractional vegetation cover (proportion of vegetation) from NDVI.

    Parameters
    ----------
    ndvi : array_like
        Normalized difference vegetation index. [-]
    ndvi_soil : float, default 0.2
        NDVI of bare soil, Sobrino et al. (2004) for Landsat. [-]
    ndvi_vegetation : float, default 0.5
        NDVI of full vegetation cover, Sobrino et al. (2004). [-]

    Returns
    -------
    numpy.ndarray or float
        :math:`P_v` in :math:`[0, 1]`. [-]

    Notes
    -----
    Carlson & Ripley (1997) [1]_, as used by Sobrino et al. (2004) [2]_:

    .. math:: P_v = \left(\frac{NDVI - NDVI_s}{NDVI_v - NDVI_s}\right)^2

    clipped to :math:`[0, 1]`. The same :math:`P_v` is inside
    :func:`rasterbudget.physics.radiation.surface_emissivity_from_ndvi`.

    References
    ----------
    .. [1] Carlson and Ripley (1997), Remote Sensing of Environment 62, 241–252.
    .. [2] Sobrino, Jiménez-Muñoz and Paolini (2004), Remote Sensing of Environment 90,
       434–440.
    """
    scaled = np.clip((ndvi - ndvi_soil) / (ndvi_vegetation - ndvi_soil), 0.0, 1.0)
    return scaled**2  # Carlson & Ripley (1997)


def thermal_emissivity_from_ndvi(
    ndvi: ArrayLike,
    red: ArrayLike,
    ndvi_soil: float = 0.2,
    ndvi_vegetation: float = 0.5,
) -> np.ndarray | float:
    r"""Emissivity of the Landsat thermal band from NDVI (NDVI-threshold method).

    Parameters
    ----------
    ndvi : array_like
        Normalized difference vegetation index. [-]
    red : array_like
        Red reflectance (TM/ETM+ band 3), used for bare soil only. [-]
    ndvi_soil : float, default 0.2
        NDVI below which a pixel is bare soil (Sobrino et al. 2004). [-]
    ndvi_vegetation : float, default 0.5
        NDVI above which a pixel is fully vegetated (Sobrino et al. 2004). [-]

    Returns
    -------
    numpy.ndarray or float
        Band emissivity :math:`\varepsilon` for :func:`surface_temperature`. [-]

    Notes
    -----
    Sobrino, Jiménez-Muñoz & Paolini (2004) [1]_ for the TM band 6 (coefficients from
    memory):

    .. math::

        \varepsilon = \begin{cases}
            0.979 - 0.035 \rho_{red} & NDVI < NDVI_s \\
            0.004 P_v + 0.986 & NDVI_s \le NDVI \le NDVI_v \\
            0.99 & NDVI > NDVI_v
        \end{cases}

    with :math:`P_v` from :func:`fractional_vegetation_cover`. The mixed-pixel line is
    :math:`\varepsilon = \varepsilon_v P_v + \varepsilon_s (1 - P_v) + d\varepsilon` with
    :math:`\varepsilon_s = 0.97`, :math:`\varepsilon_v = 0.99` and the cavity term
    :math:`d\varepsilon = (1 - \varepsilon_s)(1 - P_v) F \varepsilon_v`, shape factor
    :math:`F = 0.55`, rounded (from memory).

    It reuses :func:`rasterbudget.physics.radiation.surface_emissivity_from_ndvi`, the
    linear mixture without the cavity term that the package uses for the *broadband*
    emissivity: with end members 0.986 and 0.990 that mixture is the line above, and it is
    0.99 above :math:`NDVI_v`; below :math:`NDVI_s` the soil rule replaces it. The band
    emissivity so exceeds that function's default broadband value by up to 0.016 (0.986
    against 0.970 at :math:`NDVI_s`). Water, snow and cloud are not
    covered by this method: take their emissivity from a land-cover table.

    References
    ----------
    .. [1] Sobrino, Jiménez-Muñoz and Paolini (2004), Remote Sensing of Environment 90,
       434–440.
    """
    mixed = radiation.surface_emissivity_from_ndvi(
        ndvi,
        soil_emissivity=0.986,  # Sobrino et al. (2004): 0.004 Pv + 0.986 (from memory)
        vegetation_emissivity=0.990,
        ndvi_soil=ndvi_soil,
        ndvi_vegetation=ndvi_vegetation,
    )
    soil = 0.979 - 0.035 * np.asarray(red, dtype=np.float64)  # Sobrino et al. (2004)
    return _scalar_or_array(np.where(np.asarray(ndvi) < ndvi_soil, soil, mixed))


def broadband_emissivity_from_lai(lai: ArrayLike) -> np.ndarray | float:
    r"""Broadband surface emissivity from leaf area index.

    Parameters
    ----------
    lai : array_like
        Leaf area index, not negative. [m2 m-2]

    Returns
    -------
    numpy.ndarray or float
        Broadband emissivity :math:`\varepsilon_0` for the outgoing longwave. [-]

    Notes
    -----
    A widely used empirical rule for Landsat energy-balance work (from memory; its
    original publication was not checked here):

    .. math::

        \varepsilon_0 = \begin{cases} 0.95 + 0.01\,LAI & LAI \le 3 \\ 0.98 & LAI > 3
        \end{cases}

    continuous at :math:`LAI = 3`. Water and snow need their own values (near 0.99).
    """
    lai = np.asarray(lai, dtype=np.float64)
    return _scalar_or_array(np.where(lai <= 3.0, 0.95 + 0.01 * lai, 0.98))  # from memory


def albedo_liang_tm_etm(
    blue: ArrayLike, red: ArrayLike, nir: ArrayLike, swir1: ArrayLike, swir2: ArrayLike
) -> np.ndarray | float:
    r"""Broadband shortwave albedo from TM or ETM+ surface reflectance.

    Parameters
    ----------
    blue, red, nir, swir1, swir2 : array_like
        Surface reflectance of TM/ETM+ bands 1, 3, 4, 5 and 7. [-]

    Returns
    -------
    numpy.ndarray or float
        Broadband surface albedo :math:`\alpha`. [-]

    Notes
    -----
    Liang (2001) [1]_, for Landsat TM and ETM+:

    .. math::

        \alpha = 0.356\rho_1 + 0.130\rho_3 + 0.373\rho_4 + 0.085\rho_5 + 0.072\rho_7 - 0.0018

    The weights were fitted to surface reflectance; top-of-atmosphere reflectance gives a
    different (top-of-atmosphere) quantity.

    References
    ----------
    .. [1] Liang (2001), Remote Sensing of Environment 76, 213–238.
    """
    return (  # Liang (2001), TM/ETM+
        0.356 * blue + 0.130 * red + 0.373 * nir + 0.085 * swir1 + 0.072 * swir2 - 0.0018
    )


def albedo_liang_oli_adapted(
    blue: ArrayLike, red: ArrayLike, nir: ArrayLike, swir1: ArrayLike, swir2: ArrayLike
) -> np.ndarray | float:
    r"""Broadband albedo from OLI surface reflectance with Liang's TM/ETM+ weights (adaptation).

    Parameters
    ----------
    blue, red, nir, swir1, swir2 : array_like
        Surface reflectance of OLI bands 2, 4, 5, 6 and 7. [-]

    Returns
    -------
    numpy.ndarray or float
        Broadband surface albedo :math:`\alpha`. [-]

    Notes
    -----
    Liang (2001) [1]_ gives no OLI coefficients (OLI flew from 2013). Applying the TM/ETM+
    weights of :func:`albedo_liang_tm_etm` to the OLI bands nearest in wavelength is a common
    adaptation, not Liang's result:

    .. math::

        \alpha = 0.356\rho_2 + 0.130\rho_4 + 0.373\rho_5 + 0.085\rho_6 + 0.072\rho_7 - 0.0018

    OLI's near-infrared band is narrower than ETM+'s, so the adaptation carries an extra
    error of unknown size.

    References
    ----------
    .. [1] Liang (2001), Remote Sensing of Environment 76, 213–238.
    """
    return albedo_liang_tm_etm(blue, red, nir, swir1, swir2)  # adaptation, see Notes


def earth_sun_distance(time_utc: datetime) -> float:
    r"""Earth–Sun distance at an instant, by NREL's solar position algorithm.

    Parameters
    ----------
    time_utc : datetime.datetime
        The instant (the scene's acquisition time), timezone-aware or naive UTC.

    Returns
    -------
    float
        Distance between the centres of the Earth and the Sun, :math:`d`. [au]

    Notes
    -----
    Reda & Andreas (2004) [1]_ through :func:`pvlib.solarposition.nrel_earthsun_distance`,
    the same source as :attr:`rasterbudget.physics.solar.SolarEphemeris.inverse_distance`
    (which is :math:`1/d^2`). Over one day :math:`d` changes by less than
    :math:`3 \times 10^{-4}` au, so the date alone is enough for reflectance.

    References
    ----------
    .. [1] Reda, I. and Andreas, A. (2004). Solar position algorithm for solar radiation
       applications. Solar Energy 76, 577–589.
    """
    import pandas as pd  # pvlib's interface, imported once per scene
    from pvlib.solarposition import nrel_earthsun_distance

    stamp = pd.Timestamp(time_utc)
    stamp = stamp.tz_localize("UTC") if stamp.tzinfo is None else stamp.tz_convert("UTC")
    return float(nrel_earthsun_distance(pd.DatetimeIndex([stamp])).iloc[0])
