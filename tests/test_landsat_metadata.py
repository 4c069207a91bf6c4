"""Tests of rasterbudget.io.landsat_metadata on real Landsat metadata files.

The files in tests/data/landsat_metadata/ are verbatim copies of real USGS metadata (see the
PROVENANCE.md there): one old-layout MTL text, and the same Landsat 7 scene in the new layout;
one Collection 2 Level-2 product in all three forms (MTL text, JSON, XML). Error cases edit a copy
of a real file in tmp_path (each test says which line it changes); the few snippets written from
scratch are marked "synthetic".
"""

from __future__ import annotations

import copy
import dataclasses
import json
import pickle
import re
from datetime import UTC, date, datetime
from pathlib import Path

import pytest

from rasterbudget.errors import InputRasterError, InputValueError
from rasterbudget.io import landsat_metadata as lm
from rasterbudget.io.landsat_metadata import LandsatMetadata, read_landsat_metadata

DATA = Path(__file__).parent / "data" / "landsat_metadata"
OLD = DATA / "L71090081_08120090415_MTL.txt"  # old layout, Landsat 7 ETM+, 2009-04-15
NEW = DATA / "LE70900812009105ASA00_MTL.txt"  # the same scene, new layout (pre-collection)
C2 = "LC08_L2SP_001070_20190114_20200830_02_T2_MTL"
C2_TXT, C2_JSON, C2_XML = DATA / f"{C2}.txt", DATA / f"{C2}.json", DATA / f"{C2}.xml"
REAL_FILES = (OLD, NEW, C2_TXT, C2_JSON, C2_XML)


def edited_copy(tmp_path: Path, source: Path, old: str, new: str, name: str | None = None) -> Path:
    """A copy of a real file with one exact text replaced (the replaced text must occur once)."""
    text = source.read_text()
    assert text.count(old) == 1, f"{old!r} is not unique in {source.name}"
    target = tmp_path / (name or source.name)
    target.write_text(text.replace(old, new))
    return target


def raw_values(path: Path) -> dict[str, list[str]]:
    """Every ``KEY = value`` of MTL text by key (groups ignored), an independent plain reading."""
    out: dict[str, list[str]] = {}
    for line in path.read_text().splitlines():
        match = re.match(r'\s*(\w+)\s*=\s*"?([^"]*)"?\s*$', line)
        if match:
            out.setdefault(match.group(1), []).append(match.group(2))
    return out


# --- old layout -----------------------------------------------------------------------------


def test_old_layout_scene_facts() -> None:
    meta = read_landsat_metadata(OLD)
    assert (meta.form, meta.layout) == ("mtl_text", "old")
    assert meta.spacecraft == "LANDSAT_7"  # stated "Landsat7"
    assert meta.sensor == "ETM"  # stated "ETM+"
    assert meta.acquisition_date == date(2009, 4, 15)
    # 23:39:26.9314625Z: seven decimals, rounded half up to the microsecond
    assert meta.acquisition_time == datetime(2009, 4, 15, 23, 39, 26, 931463, tzinfo=UTC)
    assert meta.acquisition_time.utcoffset().total_seconds() == 0
    assert meta.sun_elevation == 37.9491813
    assert meta.sun_azimuth == 44.5023798
    assert (meta.wrs_path, meta.wrs_row) == (90, 81)
    assert meta.processing_level == "L1T"
    assert meta.collection is None and meta.product_id is None and meta.scene_id is None
    assert meta.earth_sun_distance is None  # not stated in the old layout
    assert "earth_sun_distance" not in meta.sources
    root = "L1_METADATA_FILE/PRODUCT_METADATA/"
    assert meta.source_of("wrs_row").keys == (f"{root}STARTING_ROW", f"{root}ENDING_ROW")
    assert meta.source_of("acquisition_time").keys == (
        f"{root}ACQUISITION_DATE",
        f"{root}SCENE_CENTER_SCAN_TIME",
    )
    assert meta.source_of("sun_elevation").keys == (
        "L1_METADATA_FILE/PRODUCT_PARAMETERS/SUN_ELEVATION",
    )


def test_old_layout_thermal_bands_61_62_are_normalised() -> None:
    meta = read_landsat_metadata(OLD)
    assert list(meta.bands) == ["1", "2", "3", "4", "5", "6_VCID_1", "6_VCID_2", "7", "8"]
    low, high = meta.bands["6_VCID_1"], meta.bands["6_VCID_2"]
    assert low.file_name == "L71090081_08120090415_B61.TIF"
    assert high.file_name == "L72090081_08120090415_B62.TIF"
    assert (low.lmin, low.lmax, low.qcalmin, low.qcalmax) == (0.0, 17.04, 1.0, 255.0)
    assert (high.lmin, high.lmax) == (3.2, 12.65)
    assert meta.source_of("bands.6_VCID_1.lmax").keys == (
        "L1_METADATA_FILE/MIN_MAX_RADIANCE/LMAX_BAND61",
    )
    assert meta.source_of("bands.6_VCID_2.file_name").keys == (
        "L1_METADATA_FILE/PRODUCT_METADATA/BAND62_FILE_NAME",
    )
    # the old layout states no rescaling factors and no thermal constants: none are invented
    assert low.radiance_mult is None and low.k1 is None and low.k2 is None
    assert meta.other_files["GCP"] == "L71090081_08120090415_GCP.txt"
    assert dict(meta.qa_files) == {}


# --- new layout, and the same scene in both layouts --------------------------------------


def test_new_layout_scene_facts() -> None:
    meta = read_landsat_metadata(NEW)
    assert (meta.form, meta.layout) == ("mtl_text", "new")
    assert (meta.spacecraft, meta.sensor) == ("LANDSAT_7", "ETM")
    assert (meta.wrs_path, meta.wrs_row) == (90, 81)  # stated "090", "081"
    assert meta.scene_id == "LE70900812009105ASA00"
    assert meta.earth_sun_distance == 1.0034929
    band = meta.bands["6_VCID_2"]
    assert band.file_name == "LE70900812009105ASA00_B6_VCID_2.TIF"
    assert (band.radiance_mult, band.radiance_add) == (3.7205e-02, 3.16280)
    assert (band.k1, band.k2) == (666.09, 1282.71)
    assert meta.source_of("bands.6_VCID_2.k2").keys == (
        "L1_METADATA_FILE/THERMAL_CONSTANTS/K2_CONSTANT_BAND_6_VCID_2",
    )
    assert meta.bands["4"].reflectance_mult == 2.9372e-03
    assert meta.bands["6_VCID_1"].reflectance_mult is None  # thermal: none stated


def test_same_scene_in_both_layouts_agrees() -> None:
    """Old 61/62 and new 6_VCID_1/6_VCID_2 name the same datasets: their limits are equal."""
    old, new = read_landsat_metadata(OLD), read_landsat_metadata(NEW)
    assert old.acquisition_time == new.acquisition_time
    assert list(old.bands) == list(new.bands)
    assert old.sun_elevation == pytest.approx(new.sun_elevation, abs=1e-3)
    assert old.sun_azimuth == pytest.approx(new.sun_azimuth, abs=1e-3)
    for name, band in old.bands.items():
        other = new.bands[name]
        assert (band.lmin, band.lmax, band.qcalmin, band.qcalmax) == (
            other.lmin,
            other.lmax,
            other.qcalmin,
            other.qcalmax,
        ), name
        # rescaling derived from the old limits equals the new file's stated, rounded factors
        mult, add, how = band.radiance_rescaling()
        stated_mult, stated_add, stated_how = other.radiance_rescaling()
        assert (how, stated_how) == ("derived from LMIN, LMAX, QCALMIN, QCALMAX", "stated")
        assert mult == pytest.approx(stated_mult, rel=1e-4), name
        assert add == pytest.approx(stated_add, abs=1e-5), name


# --- Collection 2 Level-2: text, JSON, XML ----------------------------------------------


def test_collection2_level2_product_facts_come_from_the_product_groups() -> None:
    meta = read_landsat_metadata(C2_TXT)
    assert (meta.spacecraft, meta.sensor, meta.layout) == ("LANDSAT_8", "OLI_TIRS", "new")
    assert meta.acquisition_time == datetime(2019, 1, 14, 14, 34, 30, 439074, tzinfo=UTC)
    assert (meta.wrs_path, meta.wrs_row, meta.collection) == (1, 70, 2)
    # the file also holds the parent Level-1 record (PROCESSING_LEVEL = L1TP, L1 band files)
    assert meta.processing_level == "L2SP"
    assert meta.product_id == "LC08_L2SP_001070_20190114_20200830_02_T2"
    assert meta.source_of("processing_level").keys == (
        "LANDSAT_METADATA_FILE/PRODUCT_CONTENTS/PROCESSING_LEVEL",
    )
    assert meta.scene_id == "LC80010702019014LGN00"  # stated only in the Level-1 record
    assert meta.earth_sun_distance == 0.9835616

    b1 = meta.bands["1"]
    assert b1.file_name == "LC08_L2SP_001070_20190114_20200830_02_T2_SR_B1.TIF"
    # REFLECTANCE_MULT_BAND_1 is stated twice with two meanings; each lands in its own field
    assert (b1.reflectance_mult, b1.reflectance_add) == (2.0e-05, -0.1)  # Level-1 TOA
    assert (b1.l2_scale, b1.l2_offset) == (2.75e-05, -0.2)  # Level-2 surface reflectance
    assert meta.source_of("bands.1.reflectance_mult").keys == (
        "LANDSAT_METADATA_FILE/LEVEL1_RADIOMETRIC_RESCALING/REFLECTANCE_MULT_BAND_1",
    )
    assert meta.source_of("bands.1.l2_scale").keys == (
        "LANDSAT_METADATA_FILE/LEVEL2_SURFACE_REFLECTANCE_PARAMETERS/REFLECTANCE_MULT_BAND_1",
    )
    st = meta.bands["ST_B10"]
    assert st.file_name == "LC08_L2SP_001070_20190114_20200830_02_T2_ST_B10.TIF"
    assert (st.l2_scale, st.l2_offset) == (0.00341802, 149.0)
    b10 = meta.bands["10"]
    assert (b10.k1, b10.k2) == (774.8853, 1321.0789)
    assert (b10.radiance_mult, b10.radiance_add) == (3.3420e-04, 0.1)
    assert b10.file_name is None  # the Level-1 B10 file is not part of a Level-2 product

    assert meta.qa_files["QUALITY_L1_PIXEL"].endswith("_QA_PIXEL.TIF")
    assert meta.qa_files["QUALITY_L2_SURFACE_TEMPERATURE"].endswith("_ST_QA.TIF")
    assert meta.other_files["EMISSIVITY"].endswith("_ST_EMIS.TIF")
    assert "CPF" not in meta.other_files  # named only in the Level-1 record


def comparable(meta: LandsatMetadata) -> dict[str, object]:
    """The record without what legitimately differs between forms (path, form)."""
    fields = dataclasses.asdict(meta)
    fields.pop("path")
    fields.pop("form")
    fields["sources"] = {name: source.keys for name, source in meta.sources.items()}
    return fields


def test_collection2_text_json_and_xml_give_the_same_record() -> None:
    text, js, xml = (read_landsat_metadata(p) for p in (C2_TXT, C2_JSON, C2_XML))
    assert (text.form, js.form, xml.form) == ("mtl_text", "mtl_json", "mtl_xml")
    assert comparable(js) == comparable(text)
    assert comparable(xml) == comparable(text)
    assert js.source_of("sun_azimuth").file == C2_JSON


def test_form_is_detected_from_content_not_name(tmp_path: Path) -> None:
    for source, form in ((C2_JSON, "mtl_json"), (C2_XML, "mtl_xml"), (C2_TXT, "mtl_text")):
        target = tmp_path / f"renamed_{form}.dat"
        target.write_bytes(source.read_bytes())
        assert read_landsat_metadata(target).form == form


def test_byte_order_mark_and_crlf_line_ends_are_accepted(tmp_path: Path) -> None:
    # the real old file re-encoded with a UTF-8 byte-order mark and Windows line ends
    target = tmp_path / OLD.name
    target.write_bytes(b"\xef\xbb\xbf" + OLD.read_bytes().replace(b"\n", b"\r\n"))
    assert read_landsat_metadata(target).bands["6_VCID_2"].lmax == 12.65


# --- provenance -------------------------------------------------------------------------


@pytest.mark.parametrize("path", REAL_FILES, ids=lambda p: p.name)
def test_every_fact_has_a_source_in_the_file(path: Path) -> None:
    meta = read_landsat_metadata(path)
    rows = meta.provenance()
    json.dumps(rows)  # manifest-ready
    text = path.read_text()
    for row in rows:
        assert row["file"] == str(path)
        for key_path in row["keys"]:
            assert key_path.rsplit("/", 1)[-1] in text, key_path
    stated = {row["fact"] for row in rows}
    assert {"spacecraft", "sensor", "acquisition_date", "sun_elevation", "wrs_path"} <= stated
    for name, band in meta.bands.items():
        for field in dataclasses.fields(band):
            value = getattr(band, field.name)
            fact = f"bands.{name}.{field.name}"
            assert (fact in meta.sources) == (value is not None and field.name != "band"), fact


@pytest.mark.parametrize("path", (OLD, NEW, C2_TXT), ids=lambda p: p.name)
def test_cited_numbers_are_the_stated_numbers(path: Path) -> None:
    """Each numeric fact equals a value its cited key has in the file (read independently)."""
    raw = raw_values(path)
    meta = read_landsat_metadata(path)
    for row in meta.provenance():
        if isinstance(row["value"], float) and len(row["keys"]) == 1:
            key = row["keys"][0].rsplit("/", 1)[-1]
            assert row["value"] in [float(v) for v in raw[key]], row


def test_source_of_an_unstated_fact_names_the_file() -> None:
    meta = read_landsat_metadata(OLD)
    with pytest.raises(KeyError, match="does not state 'earth_sun_distance'"):
        meta.source_of("earth_sun_distance")


def test_record_copies_pickles_and_converts_like_plain_data() -> None:
    meta = read_landsat_metadata(C2_XML)
    assert copy.deepcopy(meta) == meta
    assert pickle.loads(pickle.dumps(meta)) == meta
    as_dict = dataclasses.asdict(meta)
    assert as_dict["bands"]["ST_B10"]["l2_offset"] == 149.0
    assert as_dict["sources"]["sun_azimuth"]["keys"] == (
        "LANDSAT_METADATA_FILE/IMAGE_ATTRIBUTES/SUN_AZIMUTH",
    )


def test_record_is_read_only() -> None:
    meta = read_landsat_metadata(NEW)
    with pytest.raises(dataclasses.FrozenInstanceError):
        meta.sun_elevation = 0.0  # type: ignore[misc]
    with pytest.raises(TypeError):
        meta.bands["1"] = meta.bands["2"]  # type: ignore[index]
    with pytest.raises(TypeError):
        meta.qa_files.clear()  # type: ignore[attr-defined]
    with pytest.raises(dataclasses.FrozenInstanceError):
        meta.bands["1"].radiance_mult = 1.0  # type: ignore[misc]


# --- facts that may be missing ------------------------------------------------------------


def test_missing_scene_centre_time_gives_none(tmp_path: Path) -> None:
    # real old file with its SCENE_CENTER_SCAN_TIME line removed
    path = edited_copy(tmp_path, OLD, "    SCENE_CENTER_SCAN_TIME = 23:39:26.9314625Z\n", "")
    meta = read_landsat_metadata(path)
    assert meta.acquisition_time is None
    assert meta.acquisition_date == date(2009, 4, 15)
    assert "acquisition_time" not in meta.sources


def test_time_without_fraction(tmp_path: Path) -> None:
    # real C2 file with the scene-centre time shortened to whole seconds
    path = edited_copy(tmp_path, C2_TXT, '"14:34:30.4390740Z"', '"14:34:30Z"')
    assert read_landsat_metadata(path).acquisition_time == datetime(
        2019, 1, 14, 14, 34, 30, tzinfo=UTC
    )


def test_multi_row_old_product_has_no_single_row(tmp_path: Path) -> None:
    # real old file with ENDING_ROW changed from 81 to 82
    path = edited_copy(tmp_path, OLD, "ENDING_ROW = 81", "ENDING_ROW = 82")
    meta = read_landsat_metadata(path)
    assert (meta.wrs_path, meta.wrs_row) == (90, None)
    assert "wrs_row" not in meta.sources


def test_repeated_equal_value_is_accepted_but_a_conflict_is_refused(tmp_path: Path) -> None:
    # real old file with a new-layout key for band 61 added to the same group
    anchor = "    LMIN_BAND61 = 0.000\n"
    same = edited_copy(tmp_path, OLD, anchor, anchor + "    RADIANCE_MINIMUM_BAND_6_VCID_1 = 0.0\n")
    assert read_landsat_metadata(same).bands["6_VCID_1"].lmin == 0.0
    clash = edited_copy(
        tmp_path, OLD, anchor, anchor + "    RADIANCE_MINIMUM_BAND_6_VCID_1 = 1.5\n", "clash.txt"
    )
    with pytest.raises(InputValueError, match=r"LMIN_BAND61 and .*RADIANCE_MINIMUM_BAND_6_VCID_1"):
        read_landsat_metadata(clash)


# --- errors ------------------------------------------------------------------------------


def test_missing_file_and_directory(tmp_path: Path) -> None:
    missing = tmp_path / "nothing_MTL.txt"
    with pytest.raises(InputRasterError, match="not found") as err:
        read_landsat_metadata(missing)
    assert str(missing) in str(err.value)
    with pytest.raises(InputRasterError, match="is a directory"):
        read_landsat_metadata(tmp_path)


@pytest.mark.parametrize(
    ("content", "message"),
    [
        (b"", "empty"),
        (b"   \n\n", "empty"),
        # synthetic: plain prose, a TIFF header, and a CSV line
        (b"scene acquired on a sunny day\n", "not a Landsat metadata file"),
        (b"II*\x00\x08\x00\x00\x00", "not a Landsat metadata file"),
        (b"band,mult,add\n1,0.7,-6\n", "not a Landsat metadata file"),
        # synthetic: valid JSON / XML / ODL of another kind
        (b'{"type": "Feature", "properties": {}}', "key 'type' is not inside"),
        (b'{"LANDSAT_METADATA_FILE": {}}', "holds no metadata keys"),
        (b'{"LANDSAT_METADATA_FILE": []}', "key 'LANDSAT_METADATA_FILE' is not inside"),
        (b"[1, 2]", "not an object"),
        (b"<other_metadata><x>1</x></other_metadata>", "outermost group is other_metadata"),
        (b"GROUP = OTHER_FILE\n  A = 1\nEND_GROUP = OTHER_FILE\nEND\n", "outermost group"),
        (b"\xff\xfe\x00G", "not a Landsat metadata file"),
    ],
)
def test_not_landsat_metadata(tmp_path: Path, content: bytes, message: str) -> None:
    path = tmp_path / "input_MTL.txt"
    path.write_bytes(content)
    with pytest.raises(InputValueError, match=message) as err:
        read_landsat_metadata(path)
    assert str(path) in str(err.value)


@pytest.mark.parametrize(
    ("source", "old", "new", "message"),
    [
        # each: a real file with the quoted text replaced
        (C2_TXT, "    SUN_ELEVATION = 59.49769288\n", "", "no SUN_ELEVATION"),
        (OLD, "    SUN_AZIMUTH = 44.5023798\n", "", "no SUN_AZIMUTH"),
        (NEW, "DATE_ACQUIRED = 2009-04-15", "DATE_ACQUIRED = 2009-04-31", "not a date"),
        (NEW, "DATE_ACQUIRED = 2009-04-15", "DATE_ACQUIRED = 20090415", "not a date"),
        (OLD, "SUN_ELEVATION = 37.9491813", "SUN_ELEVATION = high", "not a finite number"),
        (OLD, "SUN_ELEVATION = 37.9491813", "SUN_ELEVATION = 137.9", r"outside -90\.0\.\.90\.0"),
        (C2_TXT, '"LANDSAT_8"', '"SENTINEL_2A"', "not a Landsat spacecraft"),
        (NEW, "WRS_PATH = 090", "WRS_PATH = 90.5", "not a whole number"),
        (
            NEW,
            '"23:39:26.9314625Z"',
            '"25:39:26.9314625Z"',
            "SCENE_CENTER_TIME = '25:39:26.9314625Z' is not a time of day",
        ),
        (NEW, "EARTH_SUN_DISTANCE = 1.0034929", "EARTH_SUN_DISTANCE = 149597870.7", "outside"),
        (OLD, "END_GROUP = MIN_MAX_RADIANCE", "END_GROUP = MIN_MAX_RADIANC", "closes group"),
        (OLD, '    BANDING = "N"\n', '    BANDING "N"\n', "is not 'KEY = value'"),
        (NEW, '"LE70900812009105ASA00_B1.TIF"', '"LE70900812009105ASA00_B1.TIF', "unbalanced"),
        (OLD, "END_GROUP = L1_METADATA_FILE\nEND\n", "", "never closed"),
        (OLD, "END\n", "END\nGROUP = L1_METADATA_FILE\n", "follows END"),
        (C2_JSON, '"SUN_AZIMUTH": "107.50935585"', '"SUN_AZIMUTH": 107.5,', "not valid JSON"),
        (
            C2_JSON,
            '"SUN_AZIMUTH": "107.50935585"',
            '"SUN_AZIMUTH": "107.50935585", "SUN_AZIMUTH": "1.0"',
            "'SUN_AZIMUTH' appears twice",
        ),
        (C2_JSON, '"SUN_ELEVATION": "59.49769288"', '"SUN_ELEVATION": null', "not a finite"),
        (C2_XML, "</LANDSAT_METADATA_FILE>\n", "", "not well-formed XML"),
        (C2_XML, "<WRS_PATH>1</WRS_PATH>", "<WRS_PATH>one</WRS_PATH>", "not a whole number"),
    ],
)
def test_damaged_real_files_are_refused_naming_file_and_key(
    tmp_path: Path, source: Path, old: str, new: str, message: str
) -> None:
    path = edited_copy(tmp_path, source, old, new)
    with pytest.raises(InputValueError, match=message) as err:
        read_landsat_metadata(path)
    assert str(path) in str(err.value)
    assert isinstance(err.value, ValueError)  # callers may catch the built-in


def test_truncated_real_file_is_refused(tmp_path: Path) -> None:
    path = tmp_path / OLD.name
    path.write_bytes(OLD.read_bytes()[:2000])  # cut inside PRODUCT_METADATA
    with pytest.raises(InputValueError, match=r"truncated|damaged"):
        read_landsat_metadata(path)


def test_oversized_file_is_refused_without_reading_it(tmp_path: Path) -> None:
    path = tmp_path / "scene_B4.TIF"
    with path.open("wb") as handle:
        handle.truncate(5 * 1024 * 1024)  # sparse: nothing is written
    with pytest.raises(InputValueError, match="far larger than any Landsat metadata file"):
        read_landsat_metadata(path)


# --- the project's own real case -------------------------------------------------------


def test_module_does_not_depend_on_the_project_real_case_file() -> None:
    """The shared Landsat 7 case ships a project-made metadata.json, not a provider file.

    This reader must stand on provider files alone, so its source names neither that folder nor
    that file (the record is checked on provider files above).
    """
    source = Path(lm.__file__).read_text()
    for needle in ("/work/shared", "landsat7_etm_p015r032", "metadata.json"):
        assert needle not in source
