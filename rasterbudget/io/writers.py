"""GeoTIFF writing: atomic (temporary name, rename when complete), one lock per file, band tags.

With ``cog=True`` each raster is made a Cloud Optimized GeoTIFF (GDAL's COG driver: tiles,
overviews, the same compression) before it takes its final name.
"""

from __future__ import annotations

import os
import shutil
import threading
from pathlib import Path

import numpy as np
import rasterio
from rasterio.windows import Window

from ..catalog.variables import QA_OUTPUT, VARIABLES
from .grid import Grid

PARTIAL_SUFFIX = ".partial"


#: Output codecs (``[run] compression``) and their GTiff creation options.
#:
#: Re-encoding the eight rasters of a 4096 x 4096 pipeline run on one thread (bench, this
#: machine): ZSTD level 1 with the predictor 1.56 s and 390 MB; DEFLATE level 1 5.18 s and
#: 405 MB; ZSTD level 3 2.54 s and 377 MB. ZSTD level 1 is the default: 3.3x faster to write
#: than DEFLATE and no larger. GDAL reads ZSTD GeoTIFFs since version 2.3 (2018); ``deflate``
#: is for older readers.
COMPRESSION: dict[str, dict] = {
    "zstd": {"compress": "zstd", "zstd_level": 1},
    "deflate": {"compress": "deflate", "zlevel": 1},
    "lzw": {"compress": "lzw"},
    "none": {},
}


def creation_options(block_size: int, dtype: str, compression: str = "zstd") -> dict:
    """GeoTIFF creation options: tiled, the codec of ``COMPRESSION`` and, when compressed, the
    predictor suited to the type (3: floating point, 2: horizontal differencing)."""
    options = {
        "driver": "GTiff",
        "tiled": True,
        "blockxsize": block_size,
        "blockysize": block_size,
        "bigtiff": "if_safer",
        **COMPRESSION[compression],
    }
    if compression != "none":
        options["predictor"] = 3 if np.dtype(dtype).kind == "f" else 2
    return options


def overview_resampling(dtype: str) -> str:
    """Resampling for overviews: average for continuous floats, nearest for integer codes.

    Averaging QA bit masks or class codes would invent values no pixel has; nearest keeps every
    overview pixel a real pixel's flags.
    """
    return "average" if np.dtype(dtype).kind == "f" else "nearest"


def cog_options(block_size: int, dtype: str, compression: str = "zstd") -> dict:
    """Creation options of GDAL's COG driver matching :func:`creation_options`.

    Same tile edge (so a COG tile still lies inside one chunk), the same codec at level 1 with the
    predictor suited to the type (YES: floating-point for floats, horizontal differencing for
    integers), and overviews down to one tile, resampled by :func:`overview_resampling`.
    """
    options = {
        "driver": "COG",
        "blocksize": block_size,
        "bigtiff": "if_safer",
        "overviews": "auto",
        "resampling": overview_resampling(dtype),
    }
    if compression != "none":
        options.update(compress=compression, predictor="yes")
        if compression in ("zstd", "deflate"):
            options["level"] = 1
    return options


def block_size_for(chunk_size: int) -> int:
    """GeoTIFF block edge that divides the chunk size (so chunks never share a block)."""
    for size in (512, 256, 128, 64, 32, 16):
        if chunk_size % size == 0:
            return size
    raise ValueError(f"chunk size {chunk_size} is not a multiple of 16")


class AtomicRaster:
    """A GeoTIFF written window by window under a temporary name: one band, or with ``bands``
    one band per name (a window then takes a (bands, rows, cols) array).

    ``__setitem__`` takes the (row-slice, col-slice) keys that ``dask.array.store`` sends; each file
    has its own lock (a lock shared by all files serialised the writes: DESIGN.md). ``finish``
    closes the file and, with ``cog``, copies it to a Cloud Optimized GeoTIFF (still under a
    temporary name); ``commit`` renames the result to its final name; ``abort`` removes every
    temporary file. Finishing all files before committing any means a failed conversion leaves no
    final name behind.
    """

    @classmethod
    def for_variable(
        cls,
        name: str,
        out_dir: Path,
        grid: Grid,
        block_size: int,
        tags: dict | None = None,
        fill: dict[str, str] | None = None,
        bands: tuple[str, ...] | None = None,
        **options,
    ) -> AtomicRaster:
        """The writer of a catalogue variable (``catalog.variables``): ``OUT/<name>.tif`` with its
        data type, nodata, units and description (``fill`` completes their placeholders)."""
        v = VARIABLES[name]
        fill = fill or {}
        if name == QA_OUTPUT:  # each bit's meaning in the band's metadata
            from ..catalog.qa import QA, QA_DESCRIPTIONS

            meanings = {bit: f"{bit.name.lower()}: {QA_DESCRIPTIONS[bit]}" for bit in QA}
            options["band_tags"] = {
                1: {f"bit_{int(bit).bit_length() - 1}": text for bit, text in meanings.items()}
            }
        if v.categories:
            options["categories"] = v.categories
        return cls(
            Path(out_dir) / f"{name}.tif",
            grid,
            v.dtype,
            v.nodata,
            block_size,
            name,
            v.units.format(**fill),
            v.description.format(**fill),
            tags,
            bands=bands,
            **options,
        )

    def __init__(
        self,
        path: Path,
        grid: Grid,
        dtype: str,
        nodata: float | int | None,
        block_size: int,
        name: str,
        units: str,
        description: str,
        tags: dict | None = None,
        cog: bool = False,
        compression: str = "zstd",
        bands: tuple[str, ...] | None = None,
        band_tags: dict[int, dict[str, str]] | None = None,
        categories: tuple[tuple[int, str, str], ...] | None = None,
    ) -> None:
        self.path = Path(path)
        self.partial = self.path.with_name(self.path.name + PARTIAL_SUFFIX)
        # The COG copy also ends in .partial, so remove_stale_partials clears it after a crash.
        self.cog_partial = self.path.with_name(self.path.name + ".cog" + PARTIAL_SUFFIX)
        self.cog = cog
        self.compression = compression
        self.block_size = block_size
        self._ready: Path | None = None
        self.committed = False
        self.lock = threading.Lock()
        self._shape = (len(bands), grid.height, grid.width) if bands else (grid.height, grid.width)
        self.dtype = dtype
        self.nodata = nodata
        self.units = units
        self.description = description
        profile = {
            "width": grid.width,
            "height": grid.height,
            "count": len(bands) if bands else 1,
            "dtype": dtype,
            "crs": grid.crs.to_wkt(),
            "transform": grid.transform,
            "nodata": nodata,
            **creation_options(block_size, dtype, compression),
        }
        band = {
            "names": tuple(bands) if bands else (name,),
            "units": units,
            "description": description,
            "tags": tags or {},
            "band_tags": band_tags or {},
            "colormap": colour_table(categories) if categories else None,
        }
        self.categories = categories
        from .cluster import distributed_client

        client = distributed_client()
        # Under dask.distributed one worker holds each file open, as a dask actor, and every
        # window goes to it: one GDAL writer per file, creating the file with the codec level
        # (reopening it in update mode per window compressed at GDAL's default level, 4x slower).
        self.shared = client is not None
        self.dataset = None
        self._actor = None
        if self.shared:
            self._actor = client.submit(
                WindowWriter, str(self.partial), profile, band, actor=True, pure=False
            ).result()
        else:
            self.dataset = _create(self.partial, profile, band)

    @property
    def shape(self) -> tuple[int, ...]:
        return self._shape

    def __getstate__(self) -> dict:
        # Sent to worker processes (shared mode): metadata and the actor, no handle or lock.
        state = self.__dict__.copy()
        state["dataset"] = state["lock"] = None
        return state

    def __setstate__(self, state: dict) -> None:
        self.__dict__.update(state)
        self.lock = threading.Lock()

    def __setitem__(self, key: tuple[slice, ...], value: np.ndarray) -> None:
        rows, cols = key[-2:]  # (rows, cols), or (bands, rows, cols) from dask's store
        window = Window(cols.start, rows.start, cols.stop - cols.start, rows.stop - rows.start)
        data = np.asarray(value, dtype=self.dtype)
        if not self.shared:
            with self.lock:
                if self.dataset.closed:  # aborted while another block was still on its way
                    raise RuntimeError(f"{self.path.name} is closed: the run was aborted")
                self.dataset.write(data, None if data.ndim == 3 else 1, window=window)
            return
        self._actor.write(rows.start, rows.stop, cols.start, cols.stop, data).result()

    def finish(self) -> None:
        """Close the file; with ``cog``, convert it to a COG under its temporary name."""
        if self.dataset is not None and not self.dataset.closed:
            self.dataset.close()
        if self._actor is not None:
            self._actor.close().result()
        if not self.cog:
            self._ready = self.partial
            return
        write_cog(self.partial, self.cog_partial, self.block_size, self.dtype, self.compression)
        self.partial.unlink()
        self._ready = self.cog_partial

    def commit(self) -> Path:
        """Give the finished file its final name (finishing it first if needed)."""
        if self._ready is None:
            self.finish()
        os.replace(self._ready, self.path)
        if self.categories:  # GDAL keeps a GeoTIFF's category names in its .aux.xml (PAM)
            write_text_atomic(self.path.with_name(self.path.name + ".aux.xml"), self._pam())
        self.committed = True
        return self.path

    def _pam(self) -> str:
        """GDAL's PAM sidecar with the band's category names (index = code; 0 = no value)."""
        from xml.sax.saxutils import escape

        names = {code: name for code, name, _ in self.categories}
        entries = "".join(
            f"<Category>{escape(names.get(code, 'no value' if code == 0 else ''))}</Category>"
            for code in range(max(names) + 1)
        )
        return (
            f'<PAMDataset><PAMRasterBand band="1"><CategoryNames>{entries}</CategoryNames>'
            "</PAMRasterBand></PAMDataset>\n"
        )

    def abort(self) -> None:
        # under the lock: after a failed block dask's other threads may still be writing, and
        # GDAL crashes on a handle closed mid-write
        with self.lock:
            if self.dataset is not None and not self.dataset.closed:
                self.dataset.close()
        if self._actor is not None:
            try:
                self._actor.close().result()
            except Exception:  # the worker may be gone; the file is removed below anyway
                pass
        self.partial.unlink(missing_ok=True)
        self.cog_partial.unlink(missing_ok=True)


def colour_table(categories: tuple[tuple[int, str, str], ...]) -> dict[int, tuple]:
    """A GeoTIFF colour table of categories' #rrggbb colours (code 0: transparent)."""
    table = {0: (0, 0, 0, 0)}
    for code, _, colour in categories:
        table[code] = (*(int(colour[k : k + 2], 16) for k in (1, 3, 5)), 255)
    return table


def _create(path: Path | str, profile: dict, band: dict):
    """Create a GeoTIFF open for writing, with its band names, units and tags."""
    dataset = rasterio.open(path, "w", **profile)
    for index, name in enumerate(band["names"], start=1):
        dataset.set_band_description(index, name)
        dataset.update_tags(index, units=band["units"], long_name=band["description"])
    # GDAL's own unit type of each band (gdalinfo "Unit Type", rasterio ``units``)
    dataset.units = [band["units"]] * len(band["names"])
    for index, tags in band.get("band_tags", {}).items():
        dataset.update_tags(index, **tags)
    if band.get("colormap"):
        dataset.write_colormap(1, band["colormap"])
    if band["tags"]:
        dataset.update_tags(**{k: str(v) for k, v in band["tags"].items()})
    return dataset


class WindowWriter:
    """Holds one output GeoTIFF open on a dask.distributed worker (run there as an actor) and
    writes the windows sent to it, one at a time."""

    def __init__(self, path: str, profile: dict, band: dict) -> None:
        self.dataset = _create(path, profile, band)
        self.lock = threading.Lock()

    def write(self, r0: int, r1: int, c0: int, c1: int, data: np.ndarray) -> None:
        with self.lock:
            window = Window(c0, r0, c1 - c0, r1 - r0)
            self.dataset.write(data, None if data.ndim == 3 else 1, window=window)

    def close(self) -> None:
        with self.lock:
            if not self.dataset.closed:
                self.dataset.close()


def write_cog(
    source: Path, target: Path, block_size: int, dtype: str, compression: str = "zstd"
) -> Path:
    """Copy a GeoTIFF to a Cloud Optimized GeoTIFF at ``target`` (removed again on failure).

    Tags and band descriptions are copied by GDAL's CreateCopy along with the pixels.
    """
    from rasterio.shutil import copy

    try:
        copy(source, target, **cog_options(block_size, dtype, compression))
    except BaseException:
        target.unlink(missing_ok=True)
        raise
    return target


def write_text_atomic(path: Path, text: str) -> Path:
    """Write a text file under a temporary name and rename it when complete."""
    return _written_then_renamed(path, lambda partial: partial.write_text(text, encoding="utf-8"))


def write_bytes_atomic(path: Path, data: bytes) -> Path:
    """Write a binary file under a temporary name and rename it when complete."""
    return _written_then_renamed(path, lambda partial: partial.write_bytes(data))


def _written_then_renamed(path: Path, write) -> Path:
    partial = path.with_name(path.name + PARTIAL_SUFFIX)
    try:
        write(partial)
        os.replace(partial, path)
    except BaseException:  # a full disk, an interrupt: no half-written file is left
        partial.unlink(missing_ok=True)
        raise
    return path


def remove_stale_partials(folder: Path) -> None:
    """Remove temporary files (and temporary Zarr folders) left by an interrupted run."""
    for stale in folder.glob("*" + PARTIAL_SUFFIX):
        if stale.is_dir() and not stale.is_symlink():
            shutil.rmtree(stale, ignore_errors=True)
        else:
            stale.unlink(missing_ok=True)
