"""Where an input raster lives: a local file, or anything GDAL opens itself (URLs, /vsi paths).

Local paths are checked before a run (exists, readable) so a typo is named at once. Remote
locations - ``https://...``, ``s3://...``, ``/vsicurl/...``, ``/vsizip/...`` and the like - cannot
be checked with the file system, so they go to rasterio (GDAL) as given and any failure to open
them is reported then. They must stay strings: ``pathlib.Path`` folds the ``//`` of a URL into
``/``.
"""

from __future__ import annotations

from pathlib import Path

#: GDAL's virtual file systems all start with this prefix (/vsicurl/, /vsis3/, /vsizip/, ...).
VSI_PREFIX = "/vsi"


def is_remote(location: str | Path) -> bool:
    """True when ``location`` is a URL or a GDAL virtual-file-system path, not a plain file."""
    text = str(location)
    return "://" in text or text.startswith(VSI_PREFIX)


#: GDAL's names of one variable of a multi-variable file: DRIVER:"file":variable.
SUBDATASET_PREFIXES = ("NETCDF:", "ZARR:", "HDF5:")


def is_subdataset(location: str | Path) -> bool:
    """True when ``location`` names one variable of a NetCDF, Zarr or HDF5 file for GDAL."""
    return str(location).startswith(SUBDATASET_PREFIXES)


def local_size(location: str | Path) -> int | None:
    """Size in bytes of a local file; None for a remote location (not fetched to measure it)."""
    return None if is_remote(location) else Path(location).stat().st_size


def output_folder(out_dir: str | Path, name: str | None = None) -> Path:
    """``out_dir / name`` created (with its parents), refused unless it lies inside ``out_dir``;
    an OS error while creating it becomes one line naming the folder."""
    from ..errors import OutputError

    base = Path(out_dir)
    folder = base if name is None else base / name
    if name is not None and folder.resolve().parent != base.resolve():
        raise OutputError(f"{name!r} would write outside the output folder {base}; rename it.")
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except FileExistsError:
        raise OutputError(
            f"cannot create the output folder {folder}: a file of that name is in the way; "
            "move it or choose another --out."
        ) from None
    except OSError as err:
        reason = err.strerror or type(err).__name__
        raise OutputError(
            f"cannot create the output folder {folder} ({reason}); check the path and write "
            "permission, or choose another --out."
        ) from None
    return folder
