"""Sensible-heat methods with an image-wide calibration, and their registry.

``METHODS`` maps a recipe's ``sensible_heat`` value to its method (``base.SensibleHeatMethod``);
the built-in ones register themselves here.
"""

from .base import METHODS, SensibleHeatMethod, get_method, register

__all__ = ["METHODS", "SensibleHeatMethod", "get_method", "register"]

# the built-in methods register themselves
from . import anchors, edges  # noqa: F401
