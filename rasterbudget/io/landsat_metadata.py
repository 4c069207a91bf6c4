"""Landsat product metadata (MTL text, MTL JSON, MTL XML) read into one typed record.

USGS ships the metadata of a Landsat product in several generations and forms:

* **MTL text, old layout** (pre-collection products of older processing software; the real old
  file in the tests was written in 2012 by LPGS 11.6.0): ``ACQUISITION_DATE``,
  ``SCENE_CENTER_SCAN_TIME``, ``LMAX_BAND1``, ``QCALMAX_BAND1``, ``BAND1_FILE_NAME``; the two
  ETM+ thermal datasets are bands ``61`` and ``62``.
* **MTL text, new layout** (later pre-collection products, Collection 1, Collection 2):
  ``DATE_ACQUIRED``, ``SCENE_CENTER_TIME``, ``RADIANCE_MULT_BAND_1``, ``FILE_NAME_BAND_1``; the
  ETM+ thermal datasets are ``6_VCID_1`` and ``6_VCID_2``.
* **MTL JSON** and **MTL XML** (Collection 2): the same groups and key names as the new text
  layout, as nested objects or nested elements.

:func:`read_landsat_metadata` detects the form from the content (not from the file name) and
returns a :class:`LandsatMetadata`. Band names are normalised: old ``61``/``62`` become
``6_VCID_1``/``6_VCID_2`` (the same scene read from both layouts gives the same radiance limits
under these names, see the tests). Every fact in the record carries where it came from (file and
key path) so a manifest can cite it; :meth:`LandsatMetadata.provenance` lists them.

The record holds what the file states and nothing else: no value is filled in from tables or
defaults. The one derived quantity, radiance rescaling from LMIN/LMAX/QCALMIN/QCALMAX for the
old layout, is a separate method (:meth:`LandsatBand.radiance_rescaling`) that says it derived.
"""

from __future__ import annotations

import copy
import json
import math
import os
import re
import xml.etree.ElementTree as ET
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from datetime import UTC, date, datetime, timedelta
from pathlib import Path
from typing import Any, Literal

from rasterbudget.errors import InputRasterError, InputValueError

__all__ = [
    "FactSource",
    "LandsatBand",
    "LandsatMetadata",
    "read_landsat_metadata",
]

MetadataForm = Literal["mtl_text", "mtl_json", "mtl_xml"]
KeyLayout = Literal["old", "new"]

#: Outermost group of every Landsat MTL file: L1_METADATA_FILE up to Collection 1,
#: LANDSAT_METADATA_FILE in Collection 2.
ROOT_GROUPS = ("L1_METADATA_FILE", "LANDSAT_METADATA_FILE")

# An MTL file is 5-25 kB; refusing anything far larger keeps a raster passed by mistake from being
# read into memory before it is rejected.
_MAX_BYTES = 4 * 1024 * 1024

# Collection 2 Level-2 files repeat the parent products' records (LEVEL1_PROCESSING_RECORD names
# the Level-1 band files, PROCESSING_LEVEL = L1TP, ...). Those describe another product, so facts
# about *this* product never come from these groups.
_RECORD_GROUPS = frozenset({"LEVEL1_PROCESSING_RECORD", "LEVEL2_PROCESSING_RECORD"})

# Scopes an entry can be read in. "product": facts of this product and its Level-1 calibration;
# "level2": the Level-2 rescaling groups, where REFLECTANCE_MULT_BAND_n means something else
# (surface reflectance scale) than in LEVEL1_RADIOMETRIC_RESCALING (top-of-atmosphere);
# "any": also the parent-product records (only for identifiers shared by both products).
_Scope = Literal["product", "level2", "any"]


@dataclass(frozen=True)
class FactSource:
    """Where one fact of the record was read.

    Attributes
    ----------
    file : Path
        The metadata file.
    keys : tuple of str
        Key paths inside the file, groups and key joined by ``/``, e.g.
        ``"L1_METADATA_FILE/PRODUCT_METADATA/ACQUISITION_DATE"``. Two keys when the fact joins two
        (date and scene-centre time; old first and last WRS row).
    """

    file: Path
    keys: tuple[str, ...]

    def describe(self) -> str:
        """One line for a log or manifest: ``file: key, key``."""
        return f"{self.file}: {', '.join(self.keys)}"


@dataclass(frozen=True)
class LandsatBand:
    """Calibration facts of one band, each None where the metadata file does not state it.

    Attributes
    ----------
    band : str
        Normalised band name: ``"1"`` ... ``"11"``, ``"6_VCID_1"`` / ``"6_VCID_2"`` for the two
        ETM+ thermal datasets (old ``61`` / ``62``), ``"ST_B6"`` / ``"ST_B10"`` for the Level-2
        surface temperature band.
    file_name : str or None
        File of this band in the product the metadata describes (for a Level-2 product the
        ``SR_`` / ``ST_`` file; the parent Level-1 band files are not part of it and are not
        listed here).
    radiance_mult, radiance_add : float or None
        Level-1 rescaling to at-sensor spectral radiance: ``L = mult * Q + add``.
    reflectance_mult, reflectance_add : float or None
        Level-1 rescaling to top-of-atmosphere reflectance. From memory, not from the files:
        USGS states this reflectance before division by the sine of the sun elevation.
    lmin, lmax : float or None
        Spectral radiance at QCALMIN and QCALMAX (old ``LMIN``/``LMAX``, new
        ``RADIANCE_MINIMUM``/``RADIANCE_MAXIMUM``).
    qcalmin, qcalmax : float or None
        Smallest and largest calibrated pixel value (old ``QCALMIN``/``QCALMAX``, new
        ``QUANTIZE_CAL_MIN``/``QUANTIZE_CAL_MAX``).
    k1, k2 : float or None
        Thermal conversion constants.
    l2_scale, l2_offset : float or None
        Level-2 rescaling of this band's file: surface reflectance for ``SR`` bands, surface
        temperature in kelvin for ``ST_B*`` bands (``value = scale * Q + offset``; the files'
        TEMPERATURE_MINIMUM/MAXIMUM of 149 and 373 show the unit).
    """

    band: str
    file_name: str | None = None
    radiance_mult: float | None = None
    radiance_add: float | None = None
    reflectance_mult: float | None = None
    reflectance_add: float | None = None
    lmin: float | None = None
    lmax: float | None = None
    qcalmin: float | None = None
    qcalmax: float | None = None
    k1: float | None = None
    k2: float | None = None
    l2_scale: float | None = None
    l2_offset: float | None = None

    def radiance_rescaling(self) -> tuple[float, float, str] | None:
        """Level-1 radiance rescaling ``(mult, add, how)``, stated or derived, or None.

        Returns
        -------
        tuple of (float, float, str) or None
            ``how`` is ``"stated"`` when the file gives RADIANCE_MULT/ADD, or
            ``"derived from LMIN, LMAX, QCALMIN, QCALMAX"`` when only the limits are given (old
            layout): ``mult = (LMAX - LMIN) / (QCALMAX - QCALMIN)``,
            ``add = LMIN - mult * QCALMIN``. On a real scene shipped in both layouts the derived
            pair equals the stated one within the rounding of the stated digits (see the tests).
            None when neither is complete.
        """
        if self.radiance_mult is not None and self.radiance_add is not None:
            return self.radiance_mult, self.radiance_add, "stated"
        lmin, lmax, qmin, qmax = self.lmin, self.lmax, self.qcalmin, self.qcalmax
        if lmin is None or lmax is None or qmin is None or qmax is None or qmax == qmin:
            return None
        mult = (lmax - lmin) / (qmax - qmin)
        return mult, lmin - mult * qmin, "derived from LMIN, LMAX, QCALMIN, QCALMAX"


@dataclass(frozen=True)
class LandsatMetadata:
    """The facts of one Landsat metadata file, whatever its generation and form.

    Attributes
    ----------
    path : Path
        The file read.
    form : {"mtl_text", "mtl_json", "mtl_xml"}
        Form detected from the content.
    layout : {"old", "new"}
        Key layout: ``"old"`` for pre-collection files with ``ACQUISITION_DATE``/``LMAX_BAND1``,
        ``"new"`` for ``DATE_ACQUIRED``/``RADIANCE_MULT_BAND_1`` (later pre-collection, C1, C2).
    spacecraft : str
        ``"LANDSAT_1"`` ... ``"LANDSAT_9"`` (old ``"Landsat7"`` is normalised).
    sensor : str
        Sensor as stated, upper case, with old ``"ETM+"`` written ``"ETM"`` as in newer files.
    acquisition_date : date
        Date acquired (UTC).
    acquisition_time : datetime or None
        Date plus scene-centre time, timezone-aware UTC, rounded to the microsecond; None when
        the file states no scene-centre time.
    sun_elevation, sun_azimuth : float
        Sun angles at the scene centre, degrees, as stated.
    wrs_path : int
        WRS path.
    wrs_row : int or None
        WRS row; None for an old-layout product spanning several rows (STARTING_ROW differs from
        ENDING_ROW).
    processing_level : str or None
        ``PROCESSING_LEVEL`` (C2), ``DATA_TYPE`` (C1, new pre-collection) or ``PRODUCT_TYPE``
        (old), e.g. ``"L1TP"``, ``"L2SP"``, ``"L1T"``.
    collection : int or None
        Collection number; None for pre-collection products.
    product_id, scene_id : str or None
        ``LANDSAT_PRODUCT_ID`` and ``LANDSAT_SCENE_ID`` where stated.
    earth_sun_distance : float or None
        Earth-Sun distance in astronomical units where stated (not in old-layout files).
    bands : Mapping[str, LandsatBand]
        Per band, by normalised band name.
    qa_files : Mapping[str, str]
        Quality-band files by the key's name part, e.g. ``"QUALITY_L1_PIXEL"``,
        ``"BAND_QUALITY"`` (Collection 1).
    other_files : Mapping[str, str]
        Other files the metadata names (angle coefficients, Level-2 emissivity and atmospheric
        layers, ground control points, ...), by the key's name part.
    sources : Mapping[str, FactSource]
        Where each fact was read, by fact name: ``"sun_elevation"``,
        ``"bands.6_VCID_1.radiance_mult"``, ``"qa_files.QUALITY_L1_PIXEL"``, ...
    """

    path: Path
    form: MetadataForm
    layout: KeyLayout
    spacecraft: str
    sensor: str
    acquisition_date: date
    acquisition_time: datetime | None
    sun_elevation: float
    sun_azimuth: float
    wrs_path: int
    wrs_row: int | None
    processing_level: str | None
    collection: int | None
    product_id: str | None
    scene_id: str | None
    earth_sun_distance: float | None
    bands: Mapping[str, LandsatBand]
    qa_files: Mapping[str, str]
    other_files: Mapping[str, str]
    sources: Mapping[str, FactSource]

    def source_of(self, fact: str) -> FactSource:
        """Where ``fact`` (a key of :attr:`sources`) was read.

        Raises
        ------
        KeyError
            The file does not state that fact.
        """
        try:
            return self.sources[fact]
        except KeyError:
            raise KeyError(
                f"{self.path} does not state {fact!r}; stated facts are: "
                f"{', '.join(sorted(self.sources))}"
            ) from None

    def fact(self, name: str) -> object:
        """The value of a fact by its :attr:`sources` name, e.g. ``"bands.4.radiance_mult"``."""
        head, _, rest = name.partition(".")
        value: object = getattr(self, head)
        if rest:
            item, _, attribute = rest.partition(".")
            if not isinstance(value, Mapping):
                raise KeyError(name)
            value = value[item]  # bands, qa_files or other_files
            if attribute:
                value = getattr(value, attribute)
        return value

    def provenance(self) -> list[dict[str, object]]:
        """Every stated fact with its value and origin, JSON-ready, sorted by fact name.

        Returns
        -------
        list of dict
            ``{"fact": ..., "value": ..., "file": ..., "keys": [...]}``; dates and times are ISO
            8601 strings.
        """
        rows: list[dict[str, object]] = []
        for name in sorted(self.sources):
            value = self.fact(name)
            if isinstance(value, date):  # datetime is a date too
                value = value.isoformat()
            source = self.sources[name]
            rows.append(
                {"fact": name, "value": value, "file": str(source.file), "keys": list(source.keys)}
            )
        return rows


class _ReadOnlyDict(dict[str, Any]):
    """A dict that refuses changes, so the frozen record is read-only all the way down.

    Unlike ``types.MappingProxyType`` it still copies, pickles and goes through
    ``dataclasses.asdict`` like a plain dict (a manifest writer may do any of these).
    """

    def _refuse(self, *args: object, **kwargs: object) -> None:
        raise TypeError("a Landsat metadata record is read-only")

    __setitem__ = __delitem__ = __ior__ = _refuse  # type: ignore[assignment]
    clear = pop = popitem = setdefault = update = _refuse  # type: ignore[assignment]

    def __reduce__(self) -> tuple[type, tuple[dict[str, Any]]]:
        # rebuilt from a plain dict copy, never item by item through the refused __setitem__
        return (type(self), (dict(self),))

    def __deepcopy__(self, memo: dict[int, object]) -> _ReadOnlyDict:
        return type(self)(copy.deepcopy(dict(self), memo))


# --------------------------------------------------------------------------------------------
# Reading: bytes -> form -> flat list of (groups, key, value) entries -> record
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class _Entry:
    """One key of the file with the groups enclosing it (outermost first) and its text value."""

    groups: tuple[str, ...]
    key: str
    value: str

    @property
    def key_path(self) -> str:
        return "/".join((*self.groups, self.key))

    @property
    def in_record(self) -> bool:
        return any(g in _RECORD_GROUPS for g in self.groups)

    @property
    def in_level2(self) -> bool:
        return any(g.startswith("LEVEL2_") for g in self.groups)

    def in_scope(self, scope: _Scope) -> bool:
        if scope == "any":
            return True
        if self.in_record:
            return False
        return self.in_level2 if scope == "level2" else not self.in_level2


def read_landsat_metadata(path: str | os.PathLike[str]) -> LandsatMetadata:
    """Read a Landsat metadata file (MTL text in either layout, MTL JSON or MTL XML).

    Parameters
    ----------
    path : str or path-like
        A local file. The form is detected from the content, so the name does not matter.

    Returns
    -------
    LandsatMetadata
        The stated facts, each with its source.

    Raises
    ------
    InputRasterError
        The file is missing or cannot be read.
    InputValueError
        The file is not Landsat metadata, is damaged, lacks a fact every Landsat product states
        (date, spacecraft, sensor, sun angles, WRS path), states one fact twice with different
        values, or states an implausible value. The message names the file and the key.
    """
    file = Path(path)
    try:
        size = file.stat().st_size
        if size > _MAX_BYTES:
            raise InputValueError(
                f"{file}: {size} bytes is far larger than any Landsat metadata file "
                "(a few tens of kB); pass the *_MTL.txt, *_MTL.json or *_MTL.xml file."
            )
        data = file.read_bytes()
    except FileNotFoundError:
        raise InputRasterError(
            f"{file}: Landsat metadata file not found; check the path."
        ) from None
    except IsADirectoryError:
        raise InputRasterError(
            f"{file}: is a directory; pass the product's *_MTL.txt, *_MTL.json or *_MTL.xml file."
        ) from None
    except OSError as exc:
        raise InputRasterError(
            f"{file}: cannot read the Landsat metadata file ({exc.strerror or exc}); "
            "check permissions."
        ) from exc

    form = _detect_form(data, file)
    if form == "mtl_xml":
        entries = _entries_from_xml(data, file)
    else:
        text = _decode(data, file)
        entries = (
            _entries_from_json(text, file) if form == "mtl_json" else _entries_from_text(text, file)
        )
    _check_root(entries, file)
    return _Builder(file, form, entries).build()


def _detect_form(data: bytes, file: Path) -> MetadataForm:
    """MTL text, JSON or XML from the first significant character; anything else is refused."""
    head = data.removeprefix(b"\xef\xbb\xbf").lstrip()
    if head.startswith((b"{", b"[")):
        return "mtl_json"
    if head.startswith(b"<"):
        return "mtl_xml"
    if re.match(rb"GROUP\s*=", head):
        return "mtl_text"
    if not head:
        raise InputValueError(f"{file}: the file is empty; it is not Landsat metadata.")
    raise InputValueError(
        f"{file}: neither MTL text (starting 'GROUP = ...'), JSON nor XML; "
        "this is not a Landsat metadata file."
    )


def _decode(data: bytes, file: Path) -> str:
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputValueError(
            f"{file}: byte {exc.start} is not UTF-8 text; this is not a Landsat metadata file "
            "or it is damaged."
        ) from None


# `KEY = value`; keys are upper-case identifiers in every MTL seen, but lower case is accepted
# (the check that matters is the group structure and the root name).
_TEXT_LINE = re.compile(r"^\s*([A-Za-z0-9_]+)\s*=\s*(.*?)\s*$")


def _entries_from_text(text: str, file: Path) -> list[_Entry]:
    """Parse MTL text: nested GROUP / END_GROUP blocks of ``KEY = value`` lines, then END."""
    entries: list[_Entry] = []
    stack: list[str] = []
    ended = False
    for number, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip().strip("\x00")
        if not stripped:
            continue
        if ended:
            raise InputValueError(
                f"{file}: line {number} follows END ({stripped[:60]!r}); the file holds more than "
                "one metadata record or is damaged."
            )
        if stripped == "END":
            ended = True
            continue
        match = _TEXT_LINE.match(stripped)
        if match is None:
            raise InputValueError(
                f"{file}: line {number} is not 'KEY = value' ({stripped[:60]!r}); "
                "the MTL text is damaged."
            )
        key, raw = match.groups()
        if key == "GROUP":
            stack.append(raw)
        elif key == "END_GROUP":
            if not stack or stack[-1] != raw:
                open_group = stack[-1] if stack else "no open group"
                raise InputValueError(
                    f"{file}: line {number} closes group {raw!r} but the open group is "
                    f"{open_group!r}; the MTL text is damaged."
                )
            stack.pop()
        elif not stack:
            raise InputValueError(
                f"{file}: line {number} ({key}) lies outside any GROUP; the MTL text is damaged."
            )
        else:
            entries.append(_Entry(tuple(stack), key, _unquote(raw, key, number, file)))
    if stack:
        raise InputValueError(
            f"{file}: group {stack[-1]!r} is never closed (no 'END_GROUP = {stack[-1]}'); "
            "the file looks truncated."
        )
    return entries


def _unquote(raw: str, key: str, number: int, file: Path) -> str:
    """Strip the double quotes of a quoted MTL string; refuse an unbalanced quote."""
    starts, ends = raw.startswith('"'), raw.endswith('"') and len(raw) > 1
    if starts and ends:
        return raw[1:-1]
    if starts or raw.endswith('"'):
        raise InputValueError(
            f"{file}: line {number}: the value of {key} has an unbalanced quote ({raw[:60]!r}); "
            "the MTL text is damaged."
        )
    return raw


def _entries_from_json(text: str, file: Path) -> list[_Entry]:
    """Flatten the nested objects of the Collection 2 JSON form into entries."""

    def no_duplicates(pairs: list[tuple[str, object]]) -> dict[str, object]:
        # json.loads would silently keep the last of two equal keys; a metadata file stating one
        # key twice is damaged, so say so instead of guessing.
        out: dict[str, object] = {}
        for key, value in pairs:
            if key in out:
                raise InputValueError(f"{file}: key {key!r} appears twice in one JSON object.")
            out[key] = value
        return out

    try:
        document = json.loads(text, object_pairs_hook=no_duplicates)
    except json.JSONDecodeError as exc:
        raise InputValueError(
            f"{file}: not valid JSON ({exc.msg} at line {exc.lineno}, column {exc.colno})."
        ) from None
    if not isinstance(document, dict):
        raise InputValueError(f"{file}: the JSON is not an object; this is not Landsat metadata.")

    entries: list[_Entry] = []

    def walk(groups: tuple[str, ...], obj: Mapping[str, object]) -> None:
        for key, value in obj.items():
            if isinstance(value, dict):
                walk((*groups, key), value)
            elif isinstance(value, str):
                entries.append(_Entry(groups, key, value))
            else:
                # USGS writes every value as a string; numbers, lists or null would be another
                # writer's. They are kept as JSON text so a key this reader does not use cannot
                # stop the read, and a used one fails its own conversion with a clear message.
                entries.append(_Entry(groups, key, json.dumps(value)))

    walk((), document)
    return entries


def _entries_from_xml(data: bytes, file: Path) -> list[_Entry]:
    """Flatten the nested elements of the Collection 2 XML form into entries.

    Elements with children are groups; leaf elements are keys with their text. The standard
    library parser does not fetch external entities, and the expat it links refuses entity
    expansion bombs, so a hostile file cannot reach out or exhaust memory through entities.
    """
    try:
        root = ET.fromstring(data)
    except ET.ParseError as exc:
        line, column = exc.position
        raise InputValueError(
            f"{file}: not well-formed XML (line {line}, column {column}); "
            "the metadata file is damaged."
        ) from None

    entries: list[_Entry] = []

    def local(tag: str) -> str:
        return tag.rsplit("}", 1)[-1]  # a namespace, if a writer adds one, is not part of the key

    def walk(groups: tuple[str, ...], element: ET.Element) -> None:
        for child in element:
            if not isinstance(child.tag, str):  # comments and processing instructions
                continue
            if len(child):
                walk((*groups, local(child.tag)), child)
            else:
                entries.append(_Entry(groups, local(child.tag), (child.text or "").strip()))

    walk((local(root.tag),), root)
    return entries


def _check_root(entries: list[_Entry], file: Path) -> None:
    """Refuse files whose outermost group is not a Landsat MTL root (STAC, ESPA XML, ...)."""
    if not entries:
        raise InputValueError(f"{file}: holds no metadata keys; this is not Landsat metadata.")
    loose = next((e for e in entries if not e.groups), None)
    if loose is not None:
        raise InputValueError(
            f"{file}: key {loose.key!r} is not inside a {' or '.join(ROOT_GROUPS)} group; "
            "this is not a Landsat MTL metadata file."
        )
    roots = sorted({e.groups[0] for e in entries})
    if len(roots) != 1 or roots[0] not in ROOT_GROUPS:
        raise InputValueError(
            f"{file}: the outermost group is {', '.join(roots)}, not "
            f"{' or '.join(ROOT_GROUPS)}; this is not a Landsat MTL metadata file."
        )


# --------------------------------------------------------------------------------------------
# Facts
# --------------------------------------------------------------------------------------------

_BAND_FIELDS: tuple[tuple[re.Pattern[str], str, _Scope], ...] = tuple(
    (re.compile(pattern), field, scope)
    for pattern, field, scope in (
        (r"^FILE_NAME_BAND_(.+)$", "file_name", "product"),
        (r"^BAND(\d+)_FILE_NAME$", "file_name", "product"),  # old layout
        (r"^RADIANCE_MULT_BAND_(.+)$", "radiance_mult", "product"),
        (r"^RADIANCE_ADD_BAND_(.+)$", "radiance_add", "product"),
        (r"^REFLECTANCE_MULT_BAND_(.+)$", "reflectance_mult", "product"),
        (r"^REFLECTANCE_ADD_BAND_(.+)$", "reflectance_add", "product"),
        (r"^RADIANCE_MINIMUM_BAND_(.+)$", "lmin", "product"),
        (r"^LMIN_BAND(\d+)$", "lmin", "product"),
        (r"^RADIANCE_MAXIMUM_BAND_(.+)$", "lmax", "product"),
        (r"^LMAX_BAND(\d+)$", "lmax", "product"),
        (r"^QUANTIZE_CAL_MIN_BAND_(.+)$", "qcalmin", "product"),
        (r"^QCALMIN_BAND(\d+)$", "qcalmin", "product"),
        (r"^QUANTIZE_CAL_MAX_BAND_(.+)$", "qcalmax", "product"),
        (r"^QCALMAX_BAND(\d+)$", "qcalmax", "product"),
        (r"^K1_CONSTANT_BAND_(.+)$", "k1", "product"),
        (r"^K2_CONSTANT_BAND_(.+)$", "k2", "product"),
        # Collection 2 Level-2 groups reuse REFLECTANCE_MULT/ADD for the surface-reflectance
        # scale; the surface-temperature band has TEMPERATURE_MULT/ADD.
        (r"^REFLECTANCE_MULT_BAND_(.+)$", "l2_scale", "level2"),
        (r"^REFLECTANCE_ADD_BAND_(.+)$", "l2_offset", "level2"),
        (r"^TEMPERATURE_MULT_BAND_(.+)$", "l2_scale", "level2"),
        (r"^TEMPERATURE_ADD_BAND_(.+)$", "l2_offset", "level2"),
    )
)

# File-name keys that are not band files: FILE_NAME_QUALITY_L1_PIXEL (C2), GCP_FILE_NAME (old),
# ANGLE_COEFFICIENT_FILE_NAME (C1), ...
_FILE_KEY = (re.compile(r"^FILE_NAME_(.+)$"), re.compile(r"^(.+)_FILE_NAME$"))


def _band_name(token: str) -> str | None:
    """Normalised band name of a key's band part, or None if it is not a band."""
    token = token.upper()
    if token in ("61", "6_VCID_1"):
        return "6_VCID_1"
    if token in ("62", "6_VCID_2"):
        return "6_VCID_2"
    if re.fullmatch(r"\d{1,2}", token):
        return str(int(token))
    if re.fullmatch(r"ST_B\d{1,2}", token):
        return token
    return None


class _Builder:
    """Turns entries into a :class:`LandsatMetadata`, recording each fact's source."""

    def __init__(self, file: Path, form: MetadataForm, entries: list[_Entry]) -> None:
        self.file = file
        self.form = form
        self.entries = entries
        self.sources: dict[str, FactSource] = {}

    # -- lookup ---------------------------------------------------------------------------------

    def find(self, keys: Iterable[str], scope: _Scope = "product") -> _Entry | None:
        """The entry stating one of ``keys`` in ``scope``; an error if two disagree."""
        wanted = set(keys)
        hits = [e for e in self.entries if e.key in wanted and e.in_scope(scope)]
        if not hits:
            return None
        if len({e.value for e in hits}) > 1:
            stated = "; ".join(f"{e.key_path} = {e.value!r}" for e in hits)
            raise InputValueError(
                f"{self.file}: states one fact with different values ({stated}); "
                "cannot tell which describes this product."
            )
        return hits[0]

    def require(self, fact: str, keys: tuple[str, ...], scope: _Scope = "product") -> _Entry:
        entry = self.find(keys, scope)
        if entry is None or not entry.value:
            raise InputValueError(
                f"{self.file}: no {' or '.join(keys)} ({fact}); every Landsat metadata file "
                "states it, so this file is incomplete or not Landsat metadata."
            )
        return entry

    def note(self, fact: str, *entries: _Entry) -> None:
        self.sources[fact] = FactSource(self.file, tuple(e.key_path for e in entries))

    # -- conversions ----------------------------------------------------------------------------

    def number(self, entry: _Entry) -> float:
        try:
            value = float(entry.value)
        except ValueError:
            value = math.nan
        if not math.isfinite(value):
            raise InputValueError(
                f"{self.file}: {entry.key_path} = {entry.value!r} is not a finite number."
            )
        return value

    def integer(self, entry: _Entry) -> int:
        if not re.fullmatch(r"[+-]?\d+", entry.value.strip()):
            raise InputValueError(
                f"{self.file}: {entry.key_path} = {entry.value!r} is not a whole number."
            )
        return int(entry.value)

    def in_range(self, entry: _Entry, low: float, high: float, what: str) -> float:
        value = self.number(entry)
        if not low <= value <= high:
            raise InputValueError(
                f"{self.file}: {entry.key_path} = {entry.value} is outside {low}..{high} ({what})."
            )
        return value

    # -- facts ----------------------------------------------------------------------------------

    def optional_text(
        self, fact: str, keys: tuple[str, ...], scope: _Scope = "product"
    ) -> str | None:
        entry = self.find(keys, scope)
        if entry is None or not entry.value:
            return None
        self.note(fact, entry)
        return entry.value

    def spacecraft(self) -> str:
        entry = self.require("spacecraft", ("SPACECRAFT_ID",))
        match = re.fullmatch(r"LANDSAT[_ ]?(\d{1,2})", entry.value.strip().upper())
        if match is None:
            raise InputValueError(
                f"{self.file}: {entry.key_path} = {entry.value!r} is not a Landsat spacecraft; "
                "this reader takes Landsat metadata only."
            )
        self.note("spacecraft", entry)
        return f"LANDSAT_{int(match.group(1))}"

    def sensor(self) -> str:
        entry = self.require("sensor", ("SENSOR_ID",))
        self.note("sensor", entry)
        sensor = entry.value.strip().upper()
        # Old files say "ETM+", newer ones "ETM" for the same instrument; one spelling lets
        # callers compare products of both generations.
        return "ETM" if sensor == "ETM+" else sensor

    def acquisition(self) -> tuple[date, datetime | None, KeyLayout]:
        day_entry = self.require("acquisition_date", ("DATE_ACQUIRED", "ACQUISITION_DATE"))
        layout: KeyLayout = "old" if day_entry.key == "ACQUISITION_DATE" else "new"
        try:
            # fromisoformat alone would also take week dates and compact forms no MTL uses
            if not re.fullmatch(r"\d{4}-\d{2}-\d{2}", day_entry.value.strip()):
                raise ValueError
            day = date.fromisoformat(day_entry.value.strip())
        except ValueError:
            raise InputValueError(
                f"{self.file}: {day_entry.key_path} = {day_entry.value!r} is not a date "
                "(YYYY-MM-DD)."
            ) from None
        self.note("acquisition_date", day_entry)
        time_entry = self.find(("SCENE_CENTER_TIME", "SCENE_CENTER_SCAN_TIME"))
        if time_entry is None or not time_entry.value.strip():
            return day, None, layout
        moment = self.scene_centre(day, time_entry)
        self.note("acquisition_time", day_entry, time_entry)
        return day, moment, layout

    def scene_centre(self, day: date, entry: _Entry) -> datetime:
        """Date plus ``HH:MM:SS.fffffffZ``, rounded half up to the microsecond, in UTC."""
        match = re.fullmatch(r"(\d{2}):(\d{2}):(\d{2})(?:\.(\d+))?Z?", entry.value.strip())
        hour, minute, second = (int(g) for g in match.groups()[:3]) if match else (-1, -1, -1)
        if match is None or not (0 <= hour <= 23 and 0 <= minute <= 59 and 0 <= second <= 59):
            raise InputValueError(
                f"{self.file}: {entry.key_path} = {entry.value!r} is not a time of day "
                "(HH:MM:SS.fffffffZ)."
            )
        # Every file read here ends the time with Z (UTC); a time without it is taken as UTC too,
        # since Landsat metadata state no other time zone.
        fraction = match.group(4) or "0"
        # USGS writes 7 decimals (100 ns); datetime keeps 6. Integer arithmetic avoids a float
        # rounding 0.5 us the wrong way.
        micro = (int(fraction) * 10**6 * 2 + 10 ** len(fraction)) // (2 * 10 ** len(fraction))
        start = datetime(day.year, day.month, day.day, hour, minute, second, tzinfo=UTC)
        return start + timedelta(microseconds=micro)

    def wrs(self) -> tuple[int, int | None]:
        path_entry = self.require("wrs_path", ("WRS_PATH",))
        wrs_path = self.integer(path_entry)
        self.note("wrs_path", path_entry)
        row_entry = self.find(("WRS_ROW",))
        if row_entry is not None:
            self.note("wrs_row", row_entry)
            return wrs_path, self.integer(row_entry)
        first, last = self.find(("STARTING_ROW",)), self.find(("ENDING_ROW",))
        if first is None:
            return wrs_path, None
        row = self.integer(first)
        if last is not None and self.integer(last) != row:
            return wrs_path, None  # a multi-row product has no single row
        self.note("wrs_row", *(e for e in (first, last) if e is not None))
        return wrs_path, row

    def bands(self) -> dict[str, LandsatBand]:
        values: dict[str, dict[str, object]] = {}
        for entry in self.entries:
            if entry.in_record:
                continue
            for pattern, field, scope in _BAND_FIELDS:
                match = pattern.match(entry.key)
                if match is None or not entry.in_scope(scope):
                    continue
                band = _band_name(match.group(1))
                if band is None:
                    continue
                value: object = entry.value if field == "file_name" else self.number(entry)
                if field == "file_name" and not entry.value:
                    continue
                fact = f"bands.{band}.{field}"
                known = values.setdefault(band, {})
                if field in known and known[field] != value:
                    # e.g. old LMAX_BAND61 and new RADIANCE_MAXIMUM_BAND_6_VCID_1 both present
                    raise InputValueError(
                        f"{self.file}: {self.sources[fact].keys[0]} and {entry.key_path} both "
                        f"give {field} of band {band}, with different values ({known[field]} and "
                        f"{value}); cannot tell which describes this product."
                    )
                if field not in known:
                    known[field] = value
                    self.note(fact, entry)
        return {
            band: LandsatBand(band=band, **fields)  # type: ignore[arg-type]  # fields by name
            for band, fields in sorted(values.items(), key=lambda item: _band_order(item[0]))
        }

    def files(self) -> tuple[dict[str, str], dict[str, str]]:
        qa: dict[str, str] = {}
        other: dict[str, str] = {}
        for entry in self.entries:
            if not entry.in_scope("product") or not entry.value:
                continue
            name = next((m.group(1) for p in _FILE_KEY if (m := p.match(entry.key))), None)
            if name is None:
                continue
            if name.startswith("BAND") and _band_name(name.removeprefix("BAND").lstrip("_")):
                continue  # a band file: FILE_NAME_BAND_4 / BAND4_FILE_NAME, taken by bands()
            target, kind = (qa, "qa_files") if "QUALITY" in name else (other, "other_files")
            if name not in target:
                target[name] = entry.value
                self.note(f"{kind}.{name}", entry)
        return qa, other

    def build(self) -> LandsatMetadata:
        spacecraft = self.spacecraft()
        sensor = self.sensor()
        day, moment, layout = self.acquisition()
        elevation_entry = self.require("sun_elevation", ("SUN_ELEVATION",))
        azimuth_entry = self.require("sun_azimuth", ("SUN_AZIMUTH",))
        elevation = self.in_range(elevation_entry, -90.0, 90.0, "sun elevation in degrees")
        # Stated azimuths are kept as they are; the loose bound only catches a garbled value.
        azimuth = self.in_range(azimuth_entry, -360.0, 360.0, "sun azimuth in degrees")
        self.note("sun_elevation", elevation_entry)
        self.note("sun_azimuth", azimuth_entry)
        wrs_path, wrs_row = self.wrs()

        distance: float | None = None
        distance_entry = self.find(("EARTH_SUN_DISTANCE",))
        if distance_entry is not None and distance_entry.value:
            # Loose bound: the true distance stays within about 2 % of 1 AU (from memory); this
            # catches km or a wrong key, not a subtle error.
            distance = self.in_range(distance_entry, 0.9, 1.1, "Earth-Sun distance in AU")
            self.note("earth_sun_distance", distance_entry)

        collection: int | None = None
        collection_entry = self.find(("COLLECTION_NUMBER",))
        if collection_entry is not None and collection_entry.value:
            collection = self.integer(collection_entry)
            self.note("collection", collection_entry)

        bands = self.bands()
        qa_files, other_files = self.files()
        return LandsatMetadata(
            path=self.file,
            form=self.form,
            layout=layout,
            spacecraft=spacecraft,
            sensor=sensor,
            acquisition_date=day,
            acquisition_time=moment,
            sun_elevation=elevation,
            sun_azimuth=azimuth,
            wrs_path=wrs_path,
            wrs_row=wrs_row,
            processing_level=self.optional_text(
                "processing_level", ("PROCESSING_LEVEL", "DATA_TYPE", "PRODUCT_TYPE")
            ),
            collection=collection,
            product_id=self.optional_text("product_id", ("LANDSAT_PRODUCT_ID",)),
            # The scene identifier names the acquisition, shared by a Level-2 product and its
            # Level-1 parent, and C2 Level-2 files state it only in the parent's record.
            scene_id=self.optional_text("scene_id", ("LANDSAT_SCENE_ID",), scope="any"),
            earth_sun_distance=distance,
            bands=_ReadOnlyDict(bands),
            qa_files=_ReadOnlyDict(qa_files),
            other_files=_ReadOnlyDict(other_files),
            sources=_ReadOnlyDict(sorted(self.sources.items())),
        )


def _band_order(band: str) -> tuple[int, str]:
    """Sort key: numeric bands in order, 6_VCID_* after 6, ST_B* last."""
    match = re.match(r"(?:ST_B)?(\d+)", band)
    number = int(match.group(1)) if match else 99
    return (number + (100 if band.startswith("ST_") else 0), band)
