"""What a scene run records about itself: the manifest, the STAC Item, checksums, versions."""

from __future__ import annotations

import datetime as dt
import hashlib
import platform
from pathlib import Path

import numpy as np

from .. import __version__
from ..io.grid import (
    Grid,
)
from ..recipe import Scene

CAUTION = (
    "These are model estimates with real uncertainty: field-scale errors of tens of percent are "
    "common, and results depend on input quality, weather data and anchor choice. They do not "
    "replace local regulations, licensed hydrologic or engineering judgement, or ground "
    "measurements in water-rights, irrigation or drought decisions."
)


def sha256_of(path: Path) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as f:
        for chunk in iter(lambda: f.read(1 << 20), b""):
            digest.update(chunk)
    return digest.hexdigest()


def versions() -> dict[str, str]:
    import dask
    import pyproj
    import rasterio

    return {
        "rasterbudget": __version__,
        "python": platform.python_version(),
        "numpy": np.__version__,
        "dask": dask.__version__,
        "rasterio": rasterio.__version__,
        "gdal": rasterio.__gdal_version__,
        "pyproj": pyproj.__version__,
        "proj": pyproj.proj_version_str,
    }


def write_stac(
    scene: Scene,
    grid: Grid,
    raster_info: dict[str, tuple],
    outputs: dict[str, Path],
    out_dir: Path,
    cog: bool,
) -> Path:
    """The scene's STAC Item: the committed outputs, and the manifest written right after it."""
    from ..io.cloud import stac_item, write_stac_item

    files = [p.name for p in outputs.values() if p.suffix != ".tif"] + ["manifest.json"]
    item = stac_item(
        scene.id, scene.acquired_utc, grid, raster_info, files, cog, dt.datetime.now(dt.UTC)
    )
    return write_stac_item(item, out_dir / f"{scene.id}.stac.json")


def json_default(value):
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, Path):
        return str(value)
    if isinstance(value, dt.datetime):
        return value.isoformat()
    raise TypeError(f"cannot serialise {type(value).__name__}")
