"""Land-cover class tables: per-class surface properties read from TOML.

The default table ships as ``rasterbudget/data/classes.toml``; a recipe may name its own. Lookups
turn a land-cover code raster into per-pixel property arrays with a 256-entry table, so that a block
of any size is remapped with one fancy-indexing operation.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass
from importlib import resources
from pathlib import Path

import numpy as np

from ..errors import ClassTableError

#: Properties every class must define, with the Python type each must have.
REQUIRED_PROPERTIES: dict[str, type] = {
    "code": int,
    "name": str,
    "emissivity": float,
    "roughness_length": float,
    "ground_heat_ratio": float,
    "ground_heat_from_ndvi": bool,
    "albedo_min": float,
    "albedo_max": float,
    "cold_anchor": bool,
    "hot_anchor": bool,
    "residual_reliable": bool,
}

DEFAULT_TABLE = "builtin"


@dataclass(frozen=True)
class LandCoverClass:
    """Surface properties of one land-cover class (see ``data/classes.toml`` for units)."""

    code: int
    name: str
    emissivity: float
    roughness_length: float
    ground_heat_ratio: float
    ground_heat_from_ndvi: bool
    albedo_min: float
    albedo_max: float
    cold_anchor: bool
    hot_anchor: bool
    residual_reliable: bool


@dataclass(frozen=True)
class ClassTable:
    """A validated set of land-cover classes and 256-entry lookup arrays."""

    classes: tuple[LandCoverClass, ...]
    source: str

    @property
    def codes(self) -> list[int]:
        return [c.code for c in self.classes]

    def by_code(self, code: int) -> LandCoverClass:
        for c in self.classes:
            if c.code == code:
                return c
        raise KeyError(code)

    def lookup(self, prop: str, fill: float = np.nan) -> np.ndarray:
        """256-entry float64 array mapping code -> property (``fill`` for unknown codes)."""
        table = np.full(256, fill, dtype="float64")
        for c in self.classes:
            table[c.code] = float(getattr(c, prop))
        return table

    def known(self) -> np.ndarray:
        """256-entry boolean array: True for codes present in the table."""
        table = np.zeros(256, dtype=bool)
        table[self.codes] = True
        return table


def _check_class(entry: dict, index: int, source: str) -> LandCoverClass:
    where = f"class table {source}, [[class]] number {index + 1}"
    missing = [k for k in REQUIRED_PROPERTIES if k not in entry]
    if missing:
        raise ClassTableError(
            f"{where} lacks {', '.join(missing)}; every class needs "
            f"{', '.join(REQUIRED_PROPERTIES)} (see README, 'Class table')."
        )
    unknown = [k for k in entry if k not in REQUIRED_PROPERTIES]
    if unknown:
        raise ClassTableError(f"{where} has unknown key(s) {', '.join(unknown)}; remove them.")
    values = {}
    for key, kind in REQUIRED_PROPERTIES.items():
        value = entry[key]
        if kind is float and isinstance(value, int) and not isinstance(value, bool):
            value = float(value)
        if not isinstance(value, kind) or (kind is int and isinstance(value, bool)):
            raise ClassTableError(
                f"{where} key {key!r} = {value!r} must be of type {kind.__name__}."
            )
        values[key] = value
    cls = LandCoverClass(**values)
    checks = [
        (0 <= cls.code <= 255, "code must be between 0 and 255"),
        (0.5 < cls.emissivity <= 1.0, "emissivity must be in (0.5, 1]"),
        (0.0 < cls.roughness_length < 10.0, "roughness_length must be in (0, 10) m"),
        (0.0 <= cls.ground_heat_ratio < 1.0, "ground_heat_ratio must be in [0, 1)"),
        (0.0 <= cls.albedo_min < cls.albedo_max <= 1.0, "need 0 <= albedo_min < albedo_max <= 1"),
    ]
    for ok, message in checks:
        if not ok:
            raise ClassTableError(f"{where} ({cls.name}): {message}.")
    return cls


def load_remap(path: str | Path, table: ClassTable) -> dict[int, int]:
    """A remap table from a user's land-cover codes to the class table's codes.

    CSV: two columns with a header row, ``source_code,class_code``. TOML: a ``[codes]`` table,
    ``"11" = 1``. Every target code must exist in the class table.
    """
    import csv

    path = Path(path)
    if not path.is_file():
        raise ClassTableError(f"remap table {path} does not exist; fix inputs.land_cover.remap.")
    mapping: dict[int, int] = {}
    try:
        if path.suffix.lower() == ".toml":
            for key, value in tomllib.loads(path.read_text("utf-8")).get("codes", {}).items():
                mapping[int(key)] = int(value)
        else:
            with path.open(newline="", encoding="utf-8") as f:
                for row in csv.DictReader(f):
                    mapping[int(row["source_code"])] = int(row["class_code"])
    except (KeyError, ValueError, tomllib.TOMLDecodeError) as err:
        raise ClassTableError(
            f"remap table {path} cannot be read ({err}); write a CSV with the header "
            'source_code,class_code, or a TOML [codes] table of "your code" = class code.'
        ) from None
    if not mapping:
        raise ClassTableError(f"remap table {path} maps no code.")
    unknown = sorted({v for v in mapping.values() if v not in table.codes})
    if unknown:
        raise ClassTableError(
            f"remap table {path} maps to class code(s) {unknown} that the class table "
            f"({table.source}) does not define."
        )
    return mapping


def load_class_table(path: str | Path | None = None) -> ClassTable:
    """Read and validate a class table; ``None`` or ``"builtin"`` gives the shipped default."""
    if path is None or str(path) == DEFAULT_TABLE:
        text = resources.files("rasterbudget").joinpath("data/classes.toml").read_text("utf-8")
        source = "builtin classes.toml"
    else:
        path = Path(path)
        if not path.is_file():
            raise ClassTableError(
                f"class table {path} does not exist; fix run.class_table in the recipe "
                "or remove it to use the built-in table."
            )
        text = path.read_text("utf-8")
        source = str(path)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        raise ClassTableError(f"class table {source} is not valid TOML: {err}.") from err
    entries = data.get("class")
    if not isinstance(entries, list) or not entries:
        raise ClassTableError(f"class table {source} holds no [[class]] tables.")
    classes = tuple(_check_class(e, i, source) for i, e in enumerate(entries))
    codes = [c.code for c in classes]
    duplicates = sorted({c for c in codes if codes.count(c) > 1})
    if duplicates:
        raise ClassTableError(f"class table {source} defines code(s) {duplicates} twice.")
    if not any(c.cold_anchor for c in classes) or not any(c.hot_anchor for c in classes):
        raise ClassTableError(
            f"class table {source} needs at least one class with cold_anchor = true "
            "and one with hot_anchor = true."
        )
    return ClassTable(classes=classes, source=source)
