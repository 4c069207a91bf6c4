"""The Python interface, on xarray: compute a scene from DataArrays, run a recipe, open outputs.

:func:`energy_balance` takes the inputs as xarray DataArrays (numpy- or dask-backed, with a CRS
and transform in rioxarray's conventions), writes them chunk by chunk as GeoTIFFs and runs the
same pipeline as ``rasterbudget run`` on them: the same checks, block functions and outputs, so
the rasters equal the command line's bit for bit. The pipeline's two passes need the whole scene
before any output exists (pass 1 calibrates the anchors over every pixel), so the computation
runs when the function is called; what it returns is an ``xarray.Dataset`` opened lazily (dask)
from the outputs, with units, descriptions and the CRS (``ds.rio.crs``).

:func:`open_scene`, :func:`open_series` and :func:`open_season` open a run's outputs the same way;
:func:`run_recipe_file` runs a recipe file as the command line does.
"""

from __future__ import annotations

import datetime as dt
import json
import tempfile
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from .errors import InputRasterError, RecipeError


def energy_balance(
    inputs: Mapping[str, Any],
    *,
    acquired_utc: dt.datetime | str,
    overpass: Mapping[str, Any],
    daily: Mapping[str, Any] | None = None,
    settings: Mapping[str, Any] | None = None,
    scene_id: str = "scene",
    out: str | Path | None = None,
    chunk_size: int = 1024,
    write_components: bool = False,
):
    """Surface energy balance and ET of one scene from xarray inputs.

    Parameters
    ----------
    inputs : an ``xarray.Dataset`` or a mapping of input role to ``xarray.DataArray`` (2-D,
        dims y and x): ``albedo`` [-], ``surface_temperature`` [K], ``land_cover`` (class codes;
        optional with NDVI), ``ndvi``, ``elevation`` [m], ... as in a recipe's
        ``[scene.inputs]``. Each needs a CRS and transform rioxarray can read (``.rio.crs``,
        e.g. from ``rioxarray.open_rasterio``); a ``_FillValue``/nodata is kept.
    acquired_utc : the overpass time (a timezone-aware datetime, or ISO 8601 text with Z).
    overpass, daily : the recipe's ``[scene.overpass]`` and ``[scene.daily]`` tables.
    settings : any other keys of a recipe's ``[[scene]]`` (``sensible_heat``, ``anchors``,
        ``reference_et``, ``daily_scaling``, ``uncertainty``, ...), as nested dicts.
    scene_id : the scene's id (its folder under ``out``).
    out : where the outputs go (``out/<scene_id>/``); a new temporary folder when None (its
        path is the Dataset's ``source`` attribute; remove it when done).
    chunk_size : edge of the square blocks (sets the memory, as ``--chunk-size``).
    write_components : also the radiation terms and the surface state used.

    Returns
    -------
    xarray.Dataset, lazily read: every output raster of the scene (see :func:`open_scene`).
    """
    from .catalog.classes import load_class_table
    from .recipe import parse_recipe
    from .scene.run import RunOptions, run_scene

    out_dir = Path(out) if out is not None else Path(tempfile.mkdtemp(prefix="rasterbudget-"))
    when = acquired_utc.isoformat() if isinstance(acquired_utc, dt.datetime) else acquired_utc
    with tempfile.TemporaryDirectory(prefix="rasterbudget-inputs-") as scratch:
        paths = {
            role: str(_write_input(role, array, Path(scratch) / f"{role}.tif"))
            for role, array in _input_arrays(inputs).items()
        }
        scene = {
            **dict(settings or {}),
            "id": scene_id,
            "acquired_utc": when,
            "inputs": paths,
            "overpass": dict(overpass),
        }
        if daily is not None:
            scene["daily"] = dict(daily)
        recipe = parse_recipe({"scene": [scene]}, source="energy_balance()")
        options = RunOptions(
            out_dir=out_dir,
            chunk_size=chunk_size,
            tile_size=min(256, chunk_size),
            write_components=write_components,
            quicklook=False,
        )
        result = run_scene(recipe, recipe.scene[0], load_class_table(), options)
    return open_scene(result.out_dir)


def _input_arrays(inputs) -> dict[str, Any]:
    import xarray as xr

    if isinstance(inputs, xr.Dataset):
        return {str(name): inputs[name] for name in inputs.data_vars}
    if not isinstance(inputs, Mapping):
        raise RecipeError(
            "energy_balance() inputs must be an xarray Dataset or a mapping of input role to "
            f"DataArray, not {type(inputs).__name__}."
        )
    return dict(inputs)


def _write_input(role: str, array, path: Path) -> Path:
    """One input DataArray as a tiled GeoTIFF, written chunk by chunk when dask-backed."""
    import threading

    import rioxarray  # noqa: F401  (the .rio accessor)

    if array.ndim == 3 and array.sizes.get("band", 0) == 1:
        array = array.squeeze("band", drop=True)
    if array.ndim != 2:
        raise InputRasterError(
            f"input {role} has dimensions {array.dims}; give a 2-D DataArray (y, x)."
        )
    if array.rio.crs is None:
        raise InputRasterError(
            f"input {role} has no CRS; set one with array.rio.write_crs('EPSG:XXXX') (or open it "
            "with rioxarray.open_rasterio, which reads it from the file)."
        )
    array.rio.to_raster(path, tiled=True, lock=threading.Lock(), compress="none")
    return path


# ----------------------------------------------------------------------------- opening outputs


def open_scene(folder: str | Path, chunks: int = 1024):
    """A scene folder's output rasters as one lazily read ``xarray.Dataset`` (dask chunks of
    ``chunks`` pixels square).

    One variable per raster (multi-band member stacks get a ``member`` dimension), with
    ``units`` and ``long_name`` attributes, the CRS and transform where rioxarray finds them
    (``ds.rio.crs``) and a scalar ``time`` coordinate, the overpass. The manifest's scene id and
    method are attributes; ``source`` is the folder.
    """
    folder = Path(folder)
    manifest = _manifest(folder, "scene_id")
    data = _open_rasters(folder, manifest["outputs"], chunks)
    acquired = manifest["parameters"]["acquired_utc"]
    data = data.assign_coords(time=_as_utc_naive(acquired))
    data.attrs.update(
        scene_id=manifest["scene_id"],
        sensible_heat_method=manifest.get("sensible_heat_method", ""),
        daily_scaling=manifest.get("daily_scaling", ""),
        source=str(folder),
    )
    return data


def open_series(out_dir: str | Path, chunks: int = 1024):
    """Every complete scene folder under a run's output folder, on one grid, as one Dataset
    with a ``time`` dimension (sorted by overpass)."""
    import xarray as xr

    out_dir = Path(out_dir)
    scenes = []
    for manifest_path in sorted(out_dir.glob("*/manifest.json")):
        try:
            manifest = json.loads(manifest_path.read_text())
        except (OSError, ValueError):
            continue
        if manifest.get("status") == "complete" and "scene_id" in manifest:
            scenes.append(open_scene(manifest_path.parent, chunks))
    if not scenes:
        raise InputRasterError(f"{out_dir} holds no complete scene folder; run a recipe first.")
    scenes.sort(key=lambda d: d.time.values)
    shared = set.intersection(*(set(d.data_vars) for d in scenes))
    series = xr.concat(
        [d[sorted(shared)] for d in scenes], dim="time", combine_attrs="drop_conflicts"
    )
    series = series.assign_coords(scene_id=("time", [d.attrs["scene_id"] for d in scenes]))
    series.attrs["source"] = str(out_dir)
    return series


def open_season(folder: str | Path, chunks: int = 1024):
    """A season folder's rasters (``et_season``, ``mean_fraction``, ...) as one Dataset, with
    the season's id, start and end as attributes."""
    folder = Path(folder)
    manifest = _manifest(folder, "season_id")
    outputs = {Path(p).stem: Path(p).name for p in manifest["outputs"].values()}
    data = _open_rasters(folder, outputs, chunks)
    data.attrs.update(
        season_id=manifest["season_id"],
        start=str(manifest["start"]),
        end=str(manifest["end"]),
        source=str(folder),
    )
    return data


def _manifest(folder: Path, key: str) -> dict:
    try:
        manifest = json.loads((folder / "manifest.json").read_text())
    except (OSError, ValueError) as err:
        raise InputRasterError(
            f"{folder} has no readable manifest.json ({err}); give a folder a run wrote."
        ) from None
    if key not in manifest or manifest.get("status") != "complete":
        raise InputRasterError(
            f"{folder} is not a complete {key.removesuffix('_id')} folder "
            f"(status {manifest.get('status')!r}); run it again first."
        )
    return manifest


def _open_rasters(folder: Path, outputs: Mapping[str, Any], chunks):
    """The folder's GeoTIFFs among ``outputs`` as one Dataset (rioxarray, lazily)."""
    import rioxarray
    import xarray as xr

    variables = {}
    for name, href in outputs.items():
        path = folder / Path(str(href)).name
        if path.suffix != ".tif" or not path.is_file():
            continue
        array = rioxarray.open_rasterio(
            path, chunks={"band": 1, "y": chunks, "x": chunks}, mask_and_scale=False
        )
        if array.sizes["band"] == 1:
            array = array.squeeze("band", drop=True)
        else:  # one band per ensemble member
            names = list(array.attrs.get("long_name") or [])
            array = array.rename(band="member")
            if len(names) == array.sizes["member"]:
                array = array.assign_coords(member=names)
        units = array.attrs.get("units")
        array.attrs = {
            "units": units[0] if isinstance(units, tuple) else units,
            "long_name": _band_description(path),
            "_FillValue": array.attrs.get("_FillValue"),
        }
        array.attrs = {k: v for k, v in array.attrs.items() if v is not None}
        variables[Path(str(name)).stem] = array
    return xr.Dataset(variables)


def _band_description(path: Path) -> str:
    import rasterio

    with rasterio.open(path) as src:
        return src.tags(1).get("long_name", "")


def _as_utc_naive(text: str):
    """An ISO time as numpy datetime64 in UTC (xarray's time coordinates carry no zone)."""
    import numpy as np

    when = dt.datetime.fromisoformat(str(text).replace("Z", "+00:00"))
    if when.tzinfo is not None:
        when = when.astimezone(dt.UTC).replace(tzinfo=None)
    return np.datetime64(when, "ns")


def run_recipe_file(path: str | Path, out: str | Path | None = None, force: bool = False):
    """Run a recipe file as ``rasterbudget run`` does (scenes, seasons, zones, report) and
    return what it did (each scene's outcome, each season's manifest, the zone tables)."""
    from .recipe import load_recipe
    from .workflow import recipe_class_table, run_options, run_recipe

    recipe = load_recipe(path)
    return run_recipe(recipe, recipe_class_table(recipe), run_options(recipe, out), force=force)
