"""Partition of available energy: latent heat as the residual, evaporative fraction, ET depth.

Sources
-------
- Allen, R. G., Pereira, L. S., Raes, D. and Smith, M. (1998). Crop evapotranspiration:
  guidelines for computing crop water requirements. FAO Irrigation and Drainage Paper 56.
  FAO, Rome.
- Shuttleworth, W. J., Gurney, R. J., Hsu, A. Y. and Ormsby, J. P. (1989). FIFE: the
  variation in energy partition at surface flux sites. IAHS Publication 186, 67–74
  (from memory).
- Crago, R. D. (1996). Conservation and variability of the evaporative fraction during the
  daytime. Journal of Hydrology 180, 173–194 (from memory).
"""

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "available_energy",
    "clip_latent_heat",
    "et_daily_from_evaporative_fraction",
    "et_depth",
    "evaporative_fraction",
    "latent_heat_residual",
]


def available_energy(net_radiation: ArrayLike, ground_heat_flux: ArrayLike) -> np.ndarray | float:
    r"""Energy available for the turbulent fluxes.

    Parameters
    ----------
    net_radiation : array_like
        Net radiation :math:`R_n`. [W m-2]
    ground_heat_flux : array_like
        Ground heat flux :math:`G`, positive into the ground. [W m-2]

    Returns
    -------
    numpy.ndarray or float
        Available energy :math:`R_n - G`. [W m-2]
    """
    return net_radiation - ground_heat_flux


def latent_heat_residual(
    net_radiation: ArrayLike, ground_heat_flux: ArrayLike, sensible_heat_flux: ArrayLike
) -> np.ndarray | float:
    r"""Latent heat flux as the residual of the surface energy balance.

    Parameters
    ----------
    net_radiation : array_like
        Net radiation :math:`R_n`. [W m-2]
    ground_heat_flux : array_like
        Ground heat flux :math:`G`, positive into the ground. [W m-2]
    sensible_heat_flux : array_like
        Sensible heat flux :math:`H`, positive upwards. [W m-2]

    Returns
    -------
    numpy.ndarray or float
        Latent heat flux :math:`LE`, not clipped (see :func:`clip_latent_heat`). [W m-2]

    Notes
    -----
    .. math:: LE = R_n - G - H
    """
    return net_radiation - ground_heat_flux - sensible_heat_flux


def clip_latent_heat(
    latent_heat_flux: ArrayLike, available_energy: ArrayLike
) -> np.ndarray | float:
    r"""Limit a residual latent heat flux to the physically plausible range.

    Parameters
    ----------
    latent_heat_flux : array_like
        Latent heat flux :math:`LE`. [W m-2]
    available_energy : array_like
        Available energy :math:`R_n - G`. [W m-2]

    Returns
    -------
    numpy.ndarray or float
        :math:`LE` clipped to :math:`[0, \max(R_n - G, 0)]`; NaN stays NaN. [W m-2]

    Notes
    -----
    Negative residuals (condensation or, more often, an overestimated :math:`H`) become 0
    and residuals above the available energy (advection or an underestimated :math:`H`)
    become :math:`R_n - G`. Callers flag the clipped pixels.
    """
    upper = np.maximum(available_energy, 0.0)
    return np.minimum(np.maximum(latent_heat_flux, 0.0), upper)


def evaporative_fraction(
    latent_heat_flux: ArrayLike, available_energy: ArrayLike, min_available: float = 1.0
) -> np.ndarray | float:
    r"""Evaporative fraction, the share of available energy spent on evaporation.

    Parameters
    ----------
    latent_heat_flux : array_like
        Latent heat flux :math:`LE`. [W m-2]
    available_energy : array_like
        Available energy :math:`R_n - G`. [W m-2]
    min_available : float, default 1.0
        Smallest available energy for which the ratio is computed; below it (and where
        the available energy is NaN) the result is NaN. The default only guards against
        division by values near zero (common practice). [W m-2]

    Returns
    -------
    numpy.ndarray or float
        Evaporative fraction :math:`\Lambda`. [-]

    Notes
    -----
    .. math:: \Lambda = \frac{LE}{R_n - G}
    """
    latent = np.asarray(latent_heat_flux)
    available = np.asarray(available_energy)
    shape = np.broadcast_shapes(latent.shape, available.shape)
    out = np.full(shape, np.nan, dtype=np.result_type(latent, available, 1.0))
    np.divide(latent, available, out=out, where=available >= min_available)
    return out[()]


def et_depth(
    latent_heat_flux: ArrayLike, latent_heat_of_vaporization: ArrayLike, seconds: ArrayLike
) -> np.ndarray | float:
    r"""Depth of water evaporated by a constant latent heat flux over a period.

    Parameters
    ----------
    latent_heat_flux : array_like
        Latent heat flux :math:`LE`. [W m-2]
    latent_heat_of_vaporization : array_like
        Latent heat of vaporization :math:`\lambda`. [J kg-1]
    seconds : array_like
        Length of the period (3600 for one hour). [s]

    Returns
    -------
    numpy.ndarray or float
        Evapotranspiration depth over the period. [mm]

    Notes
    -----
    .. math:: ET = \frac{LE\, \Delta t}{\lambda}

    in kg m-2, which equals mm of liquid water (density 1000 kg m-3).
    """
    return latent_heat_flux * seconds / latent_heat_of_vaporization  # 1 kg m-2 = 1 mm


def et_daily_from_evaporative_fraction(
    evaporative_fraction: ArrayLike,
    net_radiation_daily: ArrayLike,
    latent_heat_of_vaporization: ArrayLike,
) -> np.ndarray | float:
    r"""Daily evapotranspiration from an instantaneous evaporative fraction.

    Parameters
    ----------
    evaporative_fraction : array_like
        Evaporative fraction at the overpass, taken as the daily mean. [-]
    net_radiation_daily : array_like
        Daily net radiation, e.g. from
        :func:`~rasterbudget.physics.radiation.net_radiation_daily`. [MJ m-2 d-1]
    latent_heat_of_vaporization : array_like
        Latent heat of vaporization :math:`\lambda`. [J kg-1]

    Returns
    -------
    numpy.ndarray or float
        Daily evapotranspiration. [mm d-1]

    Notes
    -----
    .. math:: ET_{24} = \frac{\Lambda\, R_{n,24} \times 10^6}{\lambda}

    This rests on the evaporative fraction staying nearly constant through the daytime
    (Shuttleworth et al. 1989 [1]_; Crago 1996 [2]_, who also shows where it does not), and
    on the daily ground heat flux being negligible against daily net radiation (FAO-56
    eq. 42 [3]_ takes :math:`G \approx 0` for a day).

    References
    ----------
    .. [1] Shuttleworth, Gurney, Hsu and Ormsby (1989), IAHS Publication 186, 67–74
       (from memory).
    .. [2] Crago (1996), Journal of Hydrology 180, 173–194 (from memory).
    .. [3] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eq. 42.
    """
    return evaporative_fraction * net_radiation_daily * 1e6 / latent_heat_of_vaporization
