"""Soil (ground) heat flux.

Sources
-------
- Bastiaanssen, W. G. M. (2000). Journal of Hydrology 229, 87–100.
"""

import numpy as np
from numpy.typing import ArrayLike

from .constants import ZERO_CELSIUS

__all__ = ["ground_heat_flux", "ground_heat_ratio_ndvi"]


def ground_heat_ratio_ndvi(
    surface_temperature: ArrayLike, albedo: ArrayLike, ndvi: ArrayLike
) -> np.ndarray | float:
    r"""Daytime ratio of ground heat flux to net radiation from Ts, albedo and NDVI.

    Parameters
    ----------
    surface_temperature : array_like
        Land-surface (radiometric) temperature. [K]
    albedo : array_like
        Broadband surface albedo. [-]
    ndvi : array_like
        Normalized difference vegetation index. [-]

    Returns
    -------
    numpy.ndarray or float
        :math:`G/R_n`. [-]

    Notes
    -----
    Bastiaanssen (2000) [1]_, with :math:`T_s` in °C:

    .. math::

        \frac{G}{R_n} = \frac{T_s}{\alpha} (0.0038 \alpha + 0.0074 \alpha^2)
                        (1 - 0.98\, NDVI^4)

    computed in the algebraically equal form
    :math:`T_s (0.0038 + 0.0074 \alpha)(1 - 0.98\, NDVI^4)`, which stays finite at
    :math:`\alpha = 0`. The relation was fitted to daytime conditions over land; it is not
    meant for water, snow or night.

    References
    ----------
    .. [1] Bastiaanssen (2000), Journal of Hydrology 229, 87–100.
    """
    ts_celsius = surface_temperature - ZERO_CELSIUS
    return (  # Bastiaanssen (2000), divided through by albedo
        ts_celsius * (0.0038 + 0.0074 * albedo) * (1.0 - 0.98 * ndvi**4)
    )


def ground_heat_flux(net_radiation: ArrayLike, ratio: ArrayLike) -> np.ndarray | float:
    r"""Ground heat flux from net radiation and a G/Rn ratio.

    Parameters
    ----------
    net_radiation : array_like
        Net radiation :math:`R_n`. [W m-2]
    ratio : array_like
        Ratio :math:`G/R_n`, from :func:`ground_heat_ratio_ndvi` or a land-cover class. [-]

    Returns
    -------
    numpy.ndarray or float
        Ground heat flux :math:`G`, positive into the ground. [W m-2]

    Notes
    -----
    .. math:: G = (G/R_n) R_n
    """
    return ratio * net_radiation
