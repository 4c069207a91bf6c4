"""Open a scene's input rasters as one aligned, lazy, dask-backed set of arrays on one grid.

The target grid is the albedo raster's. Inputs on another grid are warped to it on the fly, chunk
by chunk, through GDAL warped virtual datasets (nearest for class codes, bilinear otherwise), so
memory stays bounded by chunk size.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import rasterio
from rasterio.crs import CRS
from rasterio.enums import Resampling
from rasterio.errors import RasterioIOError
from rasterio.transform import Affine
from rasterio.vrt import WarpedVRT
from rasterio.warp import transform_bounds

from .errors import InputRasterError

#: GDAL settings for every read and write (block cache bounded; see DEVELOPERS.md).
GDAL_OPTIONS = {"GDAL_CACHEMAX": 64, "GDAL_NUM_THREADS": 1}

#: Inputs holding class codes are resampled with nearest neighbour; all others bilinearly.
CATEGORICAL = {"land_cover"}


@dataclass(frozen=True)
class Grid:
    """The target grid: CRS, affine transform and shape."""

    crs: CRS
    transform: Affine
    width: int
    height: int

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        return rasterio.transform.array_bounds(self.height, self.width, self.transform)[::1]

    @property
    def pixel_size(self) -> tuple[float, float]:
        return abs(self.transform.a), abs(self.transform.e)

    def same_as(self, src: rasterio.io.DatasetReader) -> bool:
        return (
            src.crs == self.crs
            and src.width == self.width
            and src.height == self.height
            and src.transform.almost_equals(self.transform)
        )


def _open(path: Path, role: str) -> rasterio.io.DatasetReader:
    if not path.exists():
        raise InputRasterError(
            f"{role} raster {path} does not exist; check inputs.{role} in the recipe "
            "(paths are relative to the recipe file)."
        )
    try:
        return rasterio.open(path)
    except RasterioIOError as err:
        raise InputRasterError(
            f"{role} raster {path} cannot be read as a raster ({str(err).splitlines()[0]}); "
            "give a GeoTIFF or another format GDAL reads."
        ) from None


def target_grid(albedo_path: Path) -> Grid:
    """The albedo raster's grid, refused when it has no CRS or is not north-up."""
    with _open(albedo_path, "albedo") as src:
        if src.crs is None:
            raise InputRasterError(
                f"albedo raster {albedo_path} has no CRS; assign one, e.g. "
                "`gdal_edit.py -a_srs EPSG:32613 FILE` or rioxarray's `.rio.write_crs()`."
            )
        if src.transform.b != 0 or src.transform.d != 0 or src.transform.e >= 0:
            raise InputRasterError(
                f"albedo raster {albedo_path} is rotated or not north-up; warp it to a "
                "north-up grid first (e.g. gdalwarp)."
            )
        return Grid(crs=src.crs, transform=src.transform, width=src.width, height=src.height)


def check_input(path: Path, role: str, grid: Grid) -> dict:
    """Check one input can be read and overlaps the grid; return a description for the manifest."""
    with _open(path, role) as src:
        if src.crs is None:
            raise InputRasterError(
                f"{role} raster {path} has no CRS; assign one (e.g. `gdal_edit.py -a_srs "
                "EPSG:XXXX FILE`) so it can be placed on the albedo grid."
            )
        try:
            left, bottom, right, top = transform_bounds(src.crs, grid.crs, *src.bounds)
        except Exception as err:  # pyproj/GDAL raise several types for impossible transforms
            raise InputRasterError(
                f"{role} raster {path} cannot be transformed to the albedo grid's CRS: {err}."
            ) from None
        g_left, g_bottom, g_right, g_top = grid.bounds
        if left >= g_right or right <= g_left or bottom >= g_top or top <= g_bottom:
            raise InputRasterError(
                f"{role} raster {path} does not overlap the albedo raster's extent "
                f"({g_left:.0f}, {g_bottom:.0f}, {g_right:.0f}, {g_top:.0f} in "
                f"{grid.crs.to_string()}); check that both cover the same region."
            )
        return {
            "path": str(path),
            "crs": src.crs.to_string(),
            "width": src.width,
            "height": src.height,
            "dtype": src.dtypes[0],
            "nodata": src.nodata,
            "scale": src.scales[0],
            "offset": src.offsets[0],
            "same_grid": grid.same_as(src),
        }


def open_input(path: Path, role: str, grid: Grid, chunk_size: int):
    """One input as a lazy float32 dask array on the target grid (NaN = nodata).

    Scale, offset and nodata come from the file's own metadata.
    """
    import rioxarray

    with rasterio.open(path) as src:
        same = grid.same_as(src)
    chunks = {"band": 1, "y": chunk_size, "x": chunk_size}
    if same:
        source = path
    else:
        resampling = Resampling.nearest if role in CATEGORICAL else Resampling.bilinear
        src = rasterio.open(path)
        source = WarpedVRT(
            src,
            crs=grid.crs,
            transform=grid.transform,
            width=grid.width,
            height=grid.height,
            resampling=resampling,
        )
    try:
        array = rioxarray.open_rasterio(
            source, chunks=chunks, lock=False, masked=True, mask_and_scale=True
        )
    except RasterioIOError as err:
        raise InputRasterError(f"{role} raster {path} cannot be read: {err}.") from None
    return array.isel(band=0).data.astype(np.float32)
