"""rasterbudget: per-pixel surface energy balance and actual evapotranspiration from rasters.

The Python interface (on xarray; see the README's "From Python"):

- :func:`energy_balance`: a scene from xarray DataArrays, returned as an ``xarray.Dataset``;
- :func:`run_recipe_file`: a recipe file, as ``rasterbudget run`` runs it;
- :func:`open_scene`, :func:`open_series`, :func:`open_season`: a run's outputs as Datasets.
"""

__version__ = "0.1.0"

# light: the interface imports xarray, rioxarray and the pipeline only when called
from .api import energy_balance, open_scene, open_season, open_series, run_recipe_file

__all__ = ["energy_balance", "open_scene", "open_season", "open_series", "run_recipe_file"]
