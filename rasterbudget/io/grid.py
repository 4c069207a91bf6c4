"""Open a scene's input rasters as one aligned, lazy, dask-backed set of arrays on one grid.

The target grid is the albedo raster's. Every block task reads its own windows of every input
(:func:`read_window`), warping inputs on another grid on the fly through GDAL warped virtual
datasets (nearest for class codes, bilinear otherwise). Reads inside the block task, rather than as
separate dask tasks, keep input blocks from being read far ahead of their use, so memory stays
bounded by chunk size and each task opens its own handles (safe for threads and processes).
"""

from __future__ import annotations

import os
import threading
import warnings
from collections import OrderedDict
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import rasterio
from rasterio.crs import CRS
from rasterio.enums import MaskFlags, Resampling
from rasterio.errors import RasterioIOError
from rasterio.transform import Affine
from rasterio.vrt import WarpedVRT
from rasterio.warp import transform_bounds
from rasterio.windows import Window

from ..catalog.inputs import CATEGORICAL, WEATHER_ROLES
from ..errors import InputRasterError
from .paths import is_remote, is_subdataset

#: GDAL settings for every read and write (block cache bounded; see DEVELOPERS.md). rasterio
#: hands an integer GDAL_CACHEMAX to GDALSetCacheMax64, in bytes: the earlier value 32 (meant as
#: MB) was a 32-byte cache. 8 MiB: a 32 MiB cache added 26 MB to the peak at 4096 x 4096 and
#: nothing measurable to the speed (the threads' own input datasets share no decoded tiles).
GDAL_CACHE_BYTES = 8 * 2**20
GDAL_OPTIONS = {"GDAL_CACHEMAX": GDAL_CACHE_BYTES, "GDAL_NUM_THREADS": 1}


@dataclass(frozen=True)
class Grid:
    """The target grid: CRS, affine transform and shape."""

    crs: CRS
    transform: Affine
    width: int
    height: int

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        """(left, bottom, right, top) in the grid's CRS."""
        return rasterio.transform.array_bounds(self.height, self.width, self.transform)

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


def _open(path: Path | str, role: str) -> rasterio.io.DatasetReader:
    key = f"overpass.{role}" if role in WEATHER_ROLES else f"inputs.{role}"
    remote = is_remote(path)
    # A remote location has no file to look for, nor has a variable of a NetCDF or Zarr stack
    # (GDAL's NETCDF:"file":variable; its file was checked when the stack was opened): GDAL
    # opening it is the check.
    if not remote and not is_subdataset(path) and not Path(path).exists():
        raise InputRasterError(
            f"{role} raster {path} does not exist; check {key} in the recipe "
            "(paths are relative to the recipe file)."
        )
    try:
        return rasterio.open(path)
    except RasterioIOError as err:
        reason = str(err).splitlines()[0] if str(err) else type(err).__name__
        if remote:
            raise InputRasterError(
                f"{role} raster {path} could not be opened ({reason}); check the address in "
                f"{key}, that this machine can reach it, and that GDAL reads its format "
                "(URLs and GDAL /vsi paths are passed to GDAL as written)."
            ) from None
        raise InputRasterError(
            f"{role} raster {path} cannot be read as a raster ({reason}); "
            "give a GeoTIFF or another format GDAL reads."
        ) from None


def target_grid(albedo_path: Path | str) -> Grid:
    """The albedo raster's grid, refused when it has no CRS or is not north-up."""
    with _open(albedo_path, "albedo") as src:
        if src.crs is None:
            raise InputRasterError(
                f"albedo raster {albedo_path} has no CRS; assign one, e.g. "
                "`rio edit-info --crs EPSG:32613 FILE` (rasterio's command line) or "
                "`gdal_edit.py -a_srs EPSG:32613 FILE`."
            )
        if src.transform.b != 0 or src.transform.d != 0 or src.transform.e >= 0:
            raise InputRasterError(
                f"albedo raster {albedo_path} is rotated or not north-up; warp it to a "
                "north-up grid first (e.g. gdalwarp)."
            )
        return Grid(crs=src.crs, transform=src.transform, width=src.width, height=src.height)


def grid_from_settings(settings) -> Grid:
    """A north-up target grid from a CRS, a resolution and bounds (or lon/lat bounds)."""
    import math

    from rasterio.errors import CRSError
    from rasterio.transform import from_origin

    try:
        crs = CRS.from_user_input(settings.crs)
    except CRSError as err:
        raise InputRasterError(
            f'grid.crs = {settings.crs!r} is not a CRS GDAL knows ({err}); give e.g. "EPSG:32613".'
        ) from None
    if settings.bounds is not None:
        left, bottom, right, top = settings.bounds
    else:
        left, bottom, right, top = transform_bounds("EPSG:4326", crs, *settings.lonlat_bounds)
    res = settings.resolution
    width, height = math.ceil((right - left) / res), math.ceil((top - bottom) / res)
    if width * height > 2_000_000_000:
        raise InputRasterError(
            f"grid of {width} x {height} pixels is implausibly large; check grid.resolution "
            f"({res}) is in the units of {crs.to_string()}."
        )
    return Grid(crs=crs, transform=from_origin(left, top, res, res), width=width, height=height)


def overlap_fraction(src, grid: Grid) -> float:
    """Share of the target grid's extent that the raster covers (bounding boxes)."""
    left, bottom, right, top = transform_bounds(src.crs, grid.crs, *src.bounds)
    g_left, g_bottom, g_right, g_top = grid.bounds
    width = max(0.0, min(right, g_right) - max(left, g_left))
    height = max(0.0, min(top, g_top) - max(bottom, g_bottom))
    return width * height / ((g_right - g_left) * (g_top - g_bottom))


def check_input(path: Path | str, role: str, grid: Grid, band: int | None = None) -> dict:
    """Check one input can be read, names its band when it has several, and overlaps the grid;
    return a description for the manifest."""
    with _open(path, role) as src:
        if band is None and src.count > 1:
            raise InputRasterError(
                f"{role} raster {path} has {src.count} bands; name the one to use, e.g. "
                f'{role} = {{ path = "...", band = 1 }} (only band 1 would be read).'
            )
        if band is not None and band > src.count:
            raise InputRasterError(
                f"{role} raster {path} has {src.count} band(s), not band {band}; fix its band."
            )
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
            "dtype": src.dtypes[(band or 1) - 1],
            "band": band or 1,
            "nodata": src.nodata,
            "scale": src.scales[(band or 1) - 1],
            "offset": src.offsets[(band or 1) - 1],
            "same_grid": grid.same_as(src),
            "covers": overlap_fraction(src, grid),
        }


#: Unit conversions to the SI/kelvin values used inside: (factor, offset) after scale/offset.
UNIT_CONVERSIONS = {
    "percent": (0.01, 0.0),
    "fraction": (1.0, 0.0),
    "K": (1.0, 0.0),
    "C": (1.0, 273.15),
}


@dataclass(frozen=True)
class InputSource:
    """How to read one input onto the target grid, window by window (small and picklable)."""

    role: str
    path: str
    grid: Grid
    same_grid: bool
    scale: float | None = None  # None: the file's own
    offset: float | None = None
    nodata: float | None = None
    units: str | None = None
    resampling_name: str | None = None
    band: int = 1  # the file's band to read (1-based)

    @property
    def resampling(self) -> Resampling:
        if self.resampling_name is not None:
            return Resampling[self.resampling_name]
        return Resampling.nearest if self.role in CATEGORICAL else Resampling.bilinear


def input_source(path: Path | str, role: str, grid: Grid, spec=None) -> InputSource:
    """Describe how to read ``path`` as ``role``; ``spec`` holds recipe overrides (or None)."""
    with rasterio.open(path) as src:
        same = grid.same_as(src)
    if spec is None:
        return InputSource(role=role, path=str(path), grid=grid, same_grid=same)
    return InputSource(
        role=role,
        path=str(path),
        grid=grid,
        same_grid=same,
        scale=spec.scale,
        offset=spec.offset,
        nodata=spec.nodata,
        units=spec.units,
        resampling_name=spec.resampling,
        band=spec.band or 1,
    )


def _read(src, window: Window, source: InputSource | None = None) -> np.ndarray:
    index = 1 if source is None else source.band
    nodata = source.nodata if source is not None and source.nodata is not None else None
    flags = src.mask_flag_enums[index - 1]
    if nodata is None and MaskFlags.nodata not in flags and MaskFlags.all_valid not in flags:
        # a mask band of its own (per-dataset mask, alpha): GDAL's mask says what is valid
        band = src.read(index, window=window, masked=True, boundless=False)
        return _calibrated(band.astype(np.float64).filled(np.nan), src, index, source)
    # the nodata value (the recipe's, else the file's) marks the invalid pixels: compared here,
    # a quarter of the time of reading GDAL's mask band beside the values
    data = src.read(index, window=window).astype(np.float64)
    if nodata is None:
        nodata = src.nodatavals[index - 1]
    if nodata is not None and not np.isnan(nodata):
        data[data == nodata] = np.nan
    return _calibrated(data, src, index, source)


def _warp_band(src, window: Window, source: InputSource) -> np.ndarray:
    """One band of a multi-band file warped onto a window of the target grid.

    A warped VRT of a daily stack warps every band of the window for each band read (0.1 s a
    read on a 92-band NetCDF against 2 ms here): one band is reprojected alone, with the same
    GDAL warper and resampling.
    """
    from rasterio.warp import reproject
    from rasterio.windows import transform as window_transform

    g = source.grid
    index = source.band
    out = np.full((int(window.height), int(window.width)), np.nan)
    with warnings.catch_warnings():
        # rasterio warns while it wraps the destination array, before its transform is set
        warnings.simplefilter("ignore", rasterio.errors.NotGeoreferencedWarning)
        reproject(
            rasterio.band(src, index),
            out,
            src_nodata=source.nodata if source.nodata is not None else src.nodatavals[index - 1],
            dst_transform=window_transform(window, g.transform),
            dst_crs=g.crs,
            dst_nodata=np.nan,
            resampling=source.resampling,
        )
    return _calibrated(out, src, index, source)


def _calibrated(data: np.ndarray, src, index: int, source: InputSource | None) -> np.ndarray:
    """A band's values with the file's (or the recipe's) scale and offset and units applied."""
    scale, offset = src.scales[index - 1], src.offsets[index - 1]
    if source is not None:
        scale = scale if source.scale is None else source.scale
        offset = offset if source.offset is None else source.offset
    if scale != 1.0 or offset != 0.0:
        data = data * scale + offset
    if source is not None and source.units is not None:
        factor, shift = UNIT_CONVERSIONS[source.units]
        data = data * factor + shift
    return data


#: Each thread's open input datasets, and every one of them for closing.
_THREAD_HANDLES = threading.local()
_ALL_HANDLES: list = []
_HANDLES_LOCK = threading.Lock()
_GENERATION = [0]  # bumped by close_read_handles: older thread caches are stale
MAX_HANDLES_PER_THREAD = 32


def open_for_reading(path: str):
    """This thread's open dataset of ``path``, opened once per thread and run.

    Opening a GeoTIFF costs about 2.3 ms (measured: 64 reads of the 512-pixel blocks of a
    4096-square input took 0.20 s opening the file each time, 0.05 s on one handle); every block
    of both passes reads every input. A dataset is never shared between threads (GDAL handles
    are not thread-safe); a local file changed on disk (its size or time) is opened anew.
    :func:`close_read_handles` closes them all after a computation.
    """
    try:
        stat = os.stat(path)
        key = (path, stat.st_mtime_ns, stat.st_size)
    except OSError:  # a remote location or a subdataset name: no file to look at
        key = (path, None, None)
    cache = getattr(_THREAD_HANDLES, "datasets", None)
    if cache is None or _THREAD_HANDLES.generation != _GENERATION[0]:
        for stale in (cache or {}).values():  # after a failed computation: closed here, safely
            stale.close()
        cache = _THREAD_HANDLES.datasets = OrderedDict()
        _THREAD_HANDLES.generation = _GENERATION[0]
    dataset = cache.get(key)
    if dataset is not None and not dataset.closed:
        cache.move_to_end(key)
        return dataset
    dataset = rasterio.open(path)
    cache[key] = dataset
    with _HANDLES_LOCK:
        _ALL_HANDLES.append(dataset)
    while len(cache) > MAX_HANDLES_PER_THREAD:
        cache.popitem(last=False)[1].close()
    return dataset


def close_read_handles(finished: bool = True) -> None:
    """Close every thread's cached input datasets after a computation that ``finished`` (no
    task is reading). After a failed one, dask's other threads may still be reading: each
    thread then closes its own handles at its next read (GDAL crashes on a handle closed
    mid-read)."""
    with _HANDLES_LOCK:
        _GENERATION[0] += 1
        if finished:
            for dataset in _ALL_HANDLES:
                dataset.close()
        _ALL_HANDLES.clear()


def read_window(source: InputSource, rows: slice, cols: slice, halo: int = 0) -> np.ndarray:
    """Read a window of one input on the target grid as float64 (NaN = nodata).

    Scale and offset come from the file's own metadata. Inputs on another grid are warped on the
    fly through a GDAL warped virtual dataset (nearest for class codes, bilinear otherwise). With
    ``halo`` > 0 the window grows by that many pixels on each side; beyond the grid's edge the
    edge pixels are repeated, so the result does not depend on where the window lies.
    """
    g = source.grid
    r0, r1 = max(rows.start - halo, 0), min(rows.stop + halo, g.height)
    c0, c1 = max(cols.start - halo, 0), min(cols.stop + halo, g.width)
    window = Window(c0, r0, c1 - c0, r1 - r0)
    try:
        src = open_for_reading(source.path)
        if source.same_grid:
            data = _read(src, window, source)
        elif src.count > 1:
            data = _warp_band(src, window, source)
        else:
            extra = (
                {}
                if source.nodata is None
                else {"src_nodata": source.nodata, "nodata": source.nodata}
            )
            with WarpedVRT(
                src,
                crs=g.crs,
                transform=g.transform,
                width=g.width,
                height=g.height,
                resampling=source.resampling,
                **extra,
            ) as vrt:
                data = _read(vrt, window, source)
    except RasterioIOError as err:
        raise InputRasterError(
            f"{source.role} raster {source.path} could not be read at rows {r0}-{r1}, columns "
            f"{c0}-{c1} ({str(err).splitlines()[0]}); the file may be truncated or corrupt: "
            "copy or produce it again."
        ) from None
    if halo:
        pad = (
            (r0 - (rows.start - halo), (rows.stop + halo) - r1),
            (c0 - (cols.start - halo), (cols.stop + halo) - c1),
        )
        data = np.pad(data, pad, mode="edge")
    return data
