"""Daily stacks in NetCDF or Zarr: a variable with a time axis, one 2-D field per day.

xarray opens the stack and decodes its CF time axis (any calendar and units it knows); the
pixels are then read by GDAL, band by band, through the same warped window reads as every other
input (:func:`rasterbudget.io.grid.read_window`): GDAL's netCDF and Zarr drivers give a 3-D
variable one band per step of its leading dimension, in order, so band k is time step k - 1.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

from ..errors import InputRasterError

#: File endings read as stacks (a Zarr store is a folder).
STACK_SUFFIXES = (".nc", ".nc4", ".netcdf", ".zarr")

#: Units accepted for a daily depth; a stack without a units attribute is taken as mm d-1.
DAILY_DEPTH_UNITS = {"mm", "mm d-1", "mm/d", "mm/day", "mm day-1", "mm d^-1", "mm.d-1"}


def is_stack(path: Path) -> bool:
    return path.suffix.lower() in STACK_SUFFIXES


def _open(path: Path):
    import xarray as xr

    try:
        if path.suffix.lower() == ".zarr":
            return xr.open_zarr(path, consolidated=None)
        return xr.open_dataset(path)
    except (ImportError, ValueError, OSError, KeyError) as err:
        reason = str(err).splitlines()[0] if str(err) else type(err).__name__
        raise InputRasterError(
            f"daily stack {path} cannot be opened with xarray ({reason}); give a NetCDF file or a "
            "Zarr store (Zarr needs: pip install 'rasterbudget[cloud]')."
        ) from None


def _day(value) -> dt.date:
    """A date from a decoded time value: numpy datetime64, pandas or cftime."""
    import pandas as pd

    if hasattr(value, "year") and not isinstance(value, dt.date):  # cftime
        return dt.date(value.year, value.month, value.day)
    return pd.Timestamp(value).date()


def daily_stack_bands(path: Path, variable: str | None, what: str) -> tuple[str, dict]:
    """GDAL's name of the stack's daily variable and its band per date.

    ``variable`` names the variable; without it the stack must hold exactly one variable with
    a time axis. The time axis must lead (time, y, x); its values are decoded by xarray. One
    line naming the file and what to change where the stack is not such a stack.
    """
    with _open(path) as ds:
        timed = [n for n, v in ds.data_vars.items() if v.ndim == 3 and _time_dim(v) is not None]
        if variable is None:
            if len(timed) != 1:
                raise InputRasterError(
                    f"daily stack {path} has {len(timed)} variables with a time axis "
                    f"({', '.join(map(str, timed)) or 'none'}); name the {what} one with "
                    "season.reference_et_variable."
                )
            variable = str(timed[0])
        if variable not in ds.data_vars:
            raise InputRasterError(
                f"daily stack {path} has no variable {variable!r} (it has "
                f"{', '.join(map(str, ds.data_vars))}); fix season.reference_et_variable."
            )
        field = ds[variable]
        time = _time_dim(field)
        if field.ndim != 3 or time is None or field.dims[0] != time:
            raise InputRasterError(
                f"daily stack {path}: {variable} has dimensions {field.dims}; it needs a leading "
                "time axis of decoded dates and two spatial ones (time, y, x)."
            )
        units = str(field.attrs.get("units", "mm d-1")).strip()
        if units not in DAILY_DEPTH_UNITS:
            raise InputRasterError(
                f"daily stack {path}: {variable} is in {units!r}; {what} must be a daily depth in "
                "mm (units 'mm d-1' or 'mm/day'): convert it first."
            )
        days = [_day(v) for v in field[time].values]
    if len(set(days)) != len(days):
        raise InputRasterError(f"daily stack {path}: {variable} has a date more than once.")
    if path.suffix.lower() == ".zarr":
        gdal_name = f'ZARR:"{path}":/{variable}'
    else:
        gdal_name = f'NETCDF:"{path}":{variable}'
    return gdal_name, {day: k + 1 for k, day in enumerate(days)}


def _time_dim(field) -> str | None:
    """The dimension of ``field`` whose coordinate holds decoded dates, or None."""
    import numpy as np

    for dim in field.dims:
        if dim not in field.coords:
            continue
        values = field.coords[dim].values
        if np.issubdtype(values.dtype, np.datetime64):
            return str(dim)
        if values.dtype == object and values.size and hasattr(values.flat[0], "calendar"):
            return str(dim)  # cftime dates (non-standard calendars)
    return None
