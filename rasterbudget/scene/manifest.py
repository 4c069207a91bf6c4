"""What a scene run records about itself: the manifest, the STAC Item, checksums, versions."""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import math
import platform
from dataclasses import asdict
from pathlib import Path

import numpy as np

from .. import __version__
from ..catalog.qa import QA, QA_DESCRIPTIONS
from ..catalog.variables import QA_OUTPUT, histogram_variables
from ..io.grid import (
    Grid,
)
from ..io.paths import is_remote, local_size
from ..io.writers import block_size_for, write_text_atomic
from ..recipe import Scene

CAUTION = (
    "These are model estimates with real uncertainty: field-scale errors of tens of percent are "
    "common, and results depend on input quality, weather data and anchor choice. They do not "
    "replace local regulations, licensed hydrologic or engineering judgement, or ground "
    "measurements in water-rights, irrigation or drought decisions."
)


def sha256_of(path: Path) -> str:
    """SHA-256 of a file; of a folder (a Zarr store), of its files' relative paths and bytes
    in sorted order."""
    path = Path(path)
    digest = hashlib.sha256()
    files = sorted(p for p in path.rglob("*") if p.is_file()) if path.is_dir() else [path]
    for file in files:
        if path.is_dir():
            digest.update(file.relative_to(path).as_posix().encode() + b"\0")
        with open(file, "rb") as f:
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


def scene_manifest(
    scene: Scene,
    table,
    files,
    described: dict,
    value_summary: dict,
    constants,
    facts: dict,
    method_facts: dict,
    layout,
    settings,
    second,
    classes: list[dict],
    outputs: dict[str, Path],
    out_dir: Path,
    fingerprint: str | None,
    timings: dict[str, float],
) -> dict:
    """The scene's manifest: inputs (with checksums), grid, parameters, scalars, the method's
    calibration, QA counts, scene means, outputs, timings and versions."""
    grid = files.grid
    _, class_moments, qa_bit_counts, _ = second.summary
    names = histogram_variables((*second.written, QA_OUTPUT))
    qa_counts = {b.name: int(n) for b, n in zip(QA, qa_bit_counts, strict=True)}
    return {
        "scene_id": scene.id,
        "status": "complete",
        "fingerprint": fingerprint,
        "written_utc": dt.datetime.now(dt.UTC).isoformat(timespec="seconds"),
        "caution": CAUTION,
        "inputs": {
            role: {
                **info,
                # Remote inputs are not fetched a third time just to size and hash them.
                "bytes": local_size(info["path"]),
                "sha256": None if is_remote(info["path"]) else sha256_of(Path(info["path"])),
                "values_on_grid": value_summary.get(role),
            }
            for role, info in described.items()
        },
        "class_table": table.source,
        "grid": {
            "crs": grid.crs.to_string(),
            "transform": list(grid.transform)[:6],
            "width": grid.width,
            "height": grid.height,
        },
        "chunking": {
            "chunk_size": layout.chunk,
            "tile_size": settings.tile_size,
            "geotiff_block": block_size_for(layout.chunk),
        },
        "formats": {"cog": settings.cog, "stac": settings.stac, "zarr": settings.zarr},
        "parameters": json.loads(scene.model_dump_json()),
        "scene_constants": asdict(constants),
        "scene_facts": facts,
        "sensible_heat_method": scene.sensible_heat,
        "daily_scaling": scene.daily_scaling,
        "reference_et": {
            "surface": scene.reference_et.surface,
            "hourly_mm": constants.reference_et_hourly,
            "daily_mm": constants.reference_et_daily,
        },
        **method_facts,
        "qa_bits": {
            f"bit {int(math.log2(b))}": {
                "name": b.name,
                "meaning": QA_DESCRIPTIONS[b],
                "pixels": qa_counts.get(b.name, 0),
            }
            for b in QA
        },
        "scene_means_all": {
            name: (
                float(class_moments[:, v, 1].sum() / class_moments[:, v, 0].sum())
                if class_moments[:, v, 0].sum()
                else None
            )
            for v, name in enumerate(names)
        },
        "scene_means": {c["name"]: {v: c.get(f"{v}_mean") for v in names} for c in classes},
        "outputs": {k: str(v.relative_to(out_dir)) for k, v in outputs.items()},
        "timings_s": timings,
        "versions": versions(),
    }


def write_manifest(out_dir: Path, manifest: dict) -> Path:
    """manifest.json, written last: it marks the scene complete."""
    return write_text_atomic(
        out_dir / "manifest.json", json.dumps(manifest, indent=2, default=json_default)
    )
