"""Exceptions raised by rasterbudget.

Every message is one sentence that names the file, key or value at fault and says what to do.
Several classes also inherit a built-in so callers can catch either.
"""


class RasterBudgetError(Exception):
    """Root of all rasterbudget errors. Its text is one line: line breaks that reach a message
    from user input (a key, an id, a path) are shown escaped."""

    def __str__(self) -> str:
        return super().__str__().replace("\r", "\\r").replace("\n", "\\n")


class RecipeError(RasterBudgetError, ValueError):
    """The recipe file is missing, unreadable, or holds an unknown key or a wrong value."""


class ClassTableError(RasterBudgetError, ValueError):
    """The land-cover class table is unreadable or lacks a property."""


class InputRasterError(RasterBudgetError, OSError):
    """An input raster is missing, unreadable, lacks a CRS, or does not fit the target grid."""


class InputValueError(RasterBudgetError, ValueError):
    """An input's values are implausible (wrong units, all nodata, ...)."""


class SunBelowHorizonError(RasterBudgetError, ValueError):
    """The sun is below the horizon (or too low) over the scene at the acquisition time."""


class AnchorError(RasterBudgetError, ValueError):
    """No usable cold or hot anchor could be found, or the calibration failed."""


class OutputError(RasterBudgetError, OSError):
    """An output could not be written."""
