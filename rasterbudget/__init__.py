"""rasterbudget: per-pixel surface energy balance and actual evapotranspiration from rasters."""

__version__ = "0.1.0"
