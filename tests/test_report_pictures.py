"""The report's pictures: shared and stated colour scales, grey no-data, unreliable residuals
marked, coordinates and scale bars, readable tables, a table of contents, and images linked as
files when the report is large."""

from __future__ import annotations

import base64
import io
import json
import math
import shutil
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest
import rasterio
from PIL import Image

from rasterbudget import report
from rasterbudget.catalog.qa import QA
from rasterbudget.scene import quicklook
from rasterbudget.scene.quicklook import MapFrame, nice_length, scale_bar, write_quicklook
from tests.conftest import render_in_chromium

SCENES = ["kessendry_20260614", "kessendry_20260823"]
GREY = (128, 128, 128)  # quicklook.NO_DATA_COLOUR
MAGENTA = (255, 0, 255)  # quicklook.UNRELIABLE_COLOUR
BIT10 = int(QA.RESIDUAL_UNRELIABLE_CLASS)


class _Page(HTMLParser):
    """Images, section ids, contents links, figure scales and stated scale rows of a report."""

    def __init__(self, text: str):
        super().__init__()
        self.images, self.sections, self.links, self.figures, self.scales = [], [], [], [], {}
        self._nav, self._row, self._cells = False, None, []
        self.feed(text)

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag == "img":
            self.images.append((attrs["src"], attrs.get("alt", "")))
        elif tag == "section":
            self.sections.append(attrs["id"])
        elif tag == "nav":
            self._nav = True
        elif tag == "a" and self._nav:
            self.links.append(attrs["href"])
        elif tag == "figure" and "data-scales" in attrs:
            self.figures.append(json.loads(attrs["data-scales"]))
        elif tag == "tr" and "data-variable" in attrs:
            self._row, self._cells = attrs["data-variable"], []

    def handle_endtag(self, tag):
        if tag == "nav":
            self._nav = False
        elif tag == "tr" and self._row:
            assert self._row not in self.scales, f"{self._row} stated twice"
            self.scales[self._row] = self._cells
            self._row = None

    def handle_data(self, data):
        if self._row:
            self._cells.append(data)


def _pixels(src: str, folder: Path) -> np.ndarray:
    if src.startswith("data:image/png;base64,"):
        data = base64.b64decode(src.split(",", 1)[1])
    else:
        data = (folder / src).read_bytes()
    return np.asarray(Image.open(io.BytesIO(data)).convert("RGB")).astype(int)


def _image(page: _Page, alt: str, folder: Path) -> np.ndarray:
    (src,) = [s for s, a in page.images if a == alt]
    return _pixels(src, folder)


def _where(pixels: np.ndarray, colour) -> np.ndarray:
    return (np.abs(pixels - np.array(colour)) <= 2).all(axis=2)


def _number(text: str) -> float:
    return float(text.replace(",", ""))


@pytest.fixture(scope="module")
def page(demo_run) -> _Page:
    return _Page((demo_run / "report.html").read_text())


def test_contents_link_every_section(page):
    assert {"colour-scales", *(f"scene-{s}" for s in SCENES)} <= set(page.sections)
    targets = {link.removeprefix("#") for link in page.links}
    assert set(page.sections) <= targets  # every section is in the contents
    assert targets <= set(page.sections)  # and every link lands on one


def test_one_stated_colour_scale_per_variable_shared_by_both_scenes(demo_run, page):
    names = [name for name, *_ in quicklook.MAP_PANELS]
    assert sorted(page.scales) == sorted(names)  # each stated once (_Page refuses a repeat)
    stated = {n: [_number(c) for c in cells[2:4]] for n, cells in page.scales.items()}
    assert len(page.figures) == 2 and page.figures[0] == page.figures[1]
    assert {n: page.figures[0][n] for n in names} == stated
    assert stated["evaporative_fraction"] == [0.0, 1.0]  # the catalogue's fixed range
    # et_daily: the 2nd-98th percentile of both scenes' pixels pooled, rounded outwards a little
    pooled = np.concatenate(
        [report._read_small(demo_run / s / "et_daily.tif")[0].ravel() for s in SCENES]
    )
    p2, p98 = np.nanpercentile(pooled, [2, 98])
    step = 2 * 10 ** (math.floor(math.log10(p98 - p2)) - 1)
    low, high = stated["et_daily"]
    assert low <= p2 + 0.01 and p2 - low <= step + 0.01
    assert high >= p98 - 0.01 and high - p98 <= step + 0.01
    # one scene alone would have stretched differently: the scale really is the pooled one
    alone = [
        np.nanpercentile(report._read_small(demo_run / s / "et_daily.tif")[0], [2, 98])
        for s in SCENES
    ]
    assert abs(alone[0][1] - alone[1][1]) > step


def test_tables_print_counts_with_separators_and_no_exponents(demo_run):
    text = (demo_run / "report.html").read_text()
    cells = [c.split("</td>", 1)[0] for c in text.split("<td>")[1:]]
    assert cells and not [c for c in cells if "e+" in c or "e-0" in c]
    manifest = json.loads((demo_run / SCENES[0] / "manifest.json").read_text())
    clipped = manifest["qa_bits"]["bit 5"]["pixels"]
    assert clipped > 10_000 and f"<td>{clipped:,}</td>" in text
    assert text.count("<table") == text.count("<div class='table-wrap'><table")


@pytest.mark.parametrize(
    ("column", "value", "shown"),
    [
        ("valid_pixels", "13009", "13,009"),
        ("pixels", 13009.0, "13,009"),
        ("pixels", "1.301e+04", "13,010"),
        ("volume_m3", "1234567.89", "1,234,568"),
        ("net_radiation_mean", "685.5094963", "685.5"),
        ("evaporative_fraction_mean", "0.63746", "0.6375"),
        ("share", "0.0012346", "0.001235"),
        ("share", "0", "0"),
        ("difference_mean", "-12.3456", "-12.35"),
        ("mean", "nan", "n/a"),
        ("mean", "", ""),
        ("zone_id", "1001", "1001"),
        ("bit", 10, "10"),
        ("name", "open_water", "open_water"),
    ],
)
def test_table_cells(column, value, shown):
    assert report._cell(column, value) == shown


def test_scale_bar_lengths():
    assert [nice_length(x) for x in (2400, 5000, 0.7, 19.9)] == [2000, 5000, 0.5, 10]
    utm = rasterio.crs.CRS.from_epsg(32613).to_wkt()
    assert scale_bar(MapFrame(utm, (480_000, 492_000, 4_421_000, 4_430_000))) == (2000, "2 km")
    assert scale_bar(MapFrame(utm, (0, 900, 0, 500)))[1] == "100 m"
    from pyproj import Geod

    per_degree = Geod(ellps="WGS84").inv(10, 60, 11, 60)[2]  # about 55.8 km at 60 N
    length, label = scale_bar(
        MapFrame(rasterio.crs.CRS.from_epsg(4326).to_wkt(), (10, 11, 59.5, 60.5))
    )
    assert label == "10 km at 60.0°N"
    assert length == pytest.approx(10_000 / per_degree, rel=1e-6)
    assert scale_bar(MapFrame(None, (0, 1, 0, 1))) is None


@pytest.fixture(scope="module")
def doctored(demo_run, tmp_path_factory) -> Path:
    """One demo scene with a block of missing daily ET (top left) and QA bit 10 set only in a
    block at the bottom right, and its report."""
    out = tmp_path_factory.mktemp("doctored") / "out"
    shutil.copytree(demo_run / SCENES[0], out / SCENES[0])
    with rasterio.open(out / SCENES[0] / "et_daily.tif", "r+") as dst:
        et = dst.read(1)
        et[20:100, 20:140] = np.nan
        dst.write(et, 1)
    with rasterio.open(out / SCENES[0] / "qa_flags.tif", "r+") as dst:
        qa = dst.read(1) & ~np.uint16(BIT10)
        qa[200:280, 260:380] |= BIT10
        dst.write(qa, 1)
    report.write_report(out, SCENES[:1], [])
    return out


def test_map_draws_missing_pixels_grey_and_unreliable_ones_magenta(doctored):
    page = _Page((doctored / "report.html").read_text())
    pixels = _image(page, "anchors", doctored)  # the daily-ET map alone
    grey, magenta = _where(pixels, GREY), _where(pixels, MAGENTA)
    # each block is 80 x 120 raster pixels, drawn at about one screen pixel each
    assert 5_000 < grey.sum() < 12_000 and 5_000 < magenta.sum() < 12_000
    assert 0.7 < grey.sum() / magenta.sum() < 1.4
    (gy, gx), (my, mx) = np.median(np.argwhere(grey), 0), np.median(np.argwhere(magenta), 0)
    assert my - gy > 100 and mx - gx > 150  # grey at the top left, magenta at the bottom right
    # the six maps: the missing daily ET is grey on its own panel (bottom right), the
    # unreliable residual magenta on the latent heat, evaporative fraction and daily ET panels
    maps = _image(page, "maps on the shared colour scales", doctored)
    grey, magenta = _where(maps, GREY), _where(maps, MAGENTA)
    height, width, _ = maps.shape
    gy, gx = np.median(np.argwhere(grey), 0)
    assert gy > height / 2 and gx > 2 * width / 3
    assert 2.3 < magenta.sum() / grey.sum() < 3.7


def test_quicklook_marks_no_data_and_unreliable_residuals(tmp_path):
    rng = np.random.default_rng(1)
    panels = {name: rng.uniform(0, 1, (120, 160)) for name, *_ in quicklook.MAP_PANELS}
    panels["et_daily"][10:50, 10:60] = np.nan
    qa = np.zeros((120, 160))
    qa[70:110, 100:150] = BIT10 | int(QA.LATENT_HEAT_CLIPPED_AT_ZERO)
    frame = MapFrame(rasterio.crs.CRS.from_epsg(32613).to_wkt(), (480_000, 484_800, 0, 3_600))
    path = write_quicklook(panels | {"qa_flags": qa}, tmp_path / "quicklook.png", "t", frame)
    pixels = _pixels(path.name, tmp_path)
    grey, magenta = _where(pixels, GREY), _where(pixels, MAGENTA)
    assert grey.sum() > 2_000 and 2.3 < magenta.sum() / grey.sum() < 3.7  # on three panels
    # without the QA flags nothing is marked (the legend's swatch aside)
    path = write_quicklook(panels, tmp_path / "plain.png", "t", frame)
    assert _where(_pixels(path.name, tmp_path), MAGENTA).sum() < 50


def test_the_runs_quicklook_marks_unreliable_residuals(demo_run):
    pixels = _pixels("quicklook.png", demo_run / SCENES[0])
    assert _where(pixels, MAGENTA).sum() > 1_000  # open water, snow and built-up of the demo


@pytest.fixture(scope="module")
def two_reports(demo_run, tmp_path_factory) -> tuple[Path, Path]:
    """The demo's report written self-contained, and written again with its images linked."""
    base = tmp_path_factory.mktemp("linked")
    outs = []
    for name in ("embedded", "linked"):
        out = base / name
        for scene in SCENES:
            shutil.copytree(demo_run / scene, out / scene)
        shutil.copytree(demo_run / report.SECTION_CACHE, out / report.SECTION_CACHE)
        outs.append(out)
    report.write_report(outs[0], SCENES, [])
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(report, "IMAGE_BYTES_INLINE", 100_000)
        report.write_report(outs[1], SCENES, [])
    return outs[0], outs[1]


def test_a_large_report_links_its_images_as_files(two_reports):
    embedded, linked = two_reports
    page = _Page((linked / "report.html").read_text())
    files = linked / report.REPORT_FILES
    sources = [s for s, _ in page.images]
    assert sources and all(s.startswith(f"{report.REPORT_FILES}/") for s in sources)
    assert {linked / s for s in sources} == set(files.iterdir())  # every file linked, none stray
    for source in sources:
        assert _pixels(source, linked).shape[2] == 3  # a whole PNG
    small = (linked / "report.html").stat().st_size
    whole = (embedded / "report.html").stat().st_size
    images = sum(p.stat().st_size for p in files.iterdir())
    assert small < whole / 5 and small + images == pytest.approx(whole * 3 / 4, rel=0.1)
    assert not (embedded / report.REPORT_FILES).exists()


def test_many_scenes_link_and_a_small_report_embeds_again(two_reports, monkeypatch):
    _, linked = two_reports
    out = linked.parent / "again"
    shutil.copytree(linked, out)
    report.write_report(out, SCENES, [])  # small again: self-contained, the files removed
    assert all(s.startswith("data:") for s, _ in _Page((out / "report.html").read_text()).images)
    assert not (out / report.REPORT_FILES).exists()
    monkeypatch.setattr(report, "SCENES_INLINE", 1)
    report.write_report(out, SCENES, [])
    assert not list(out.rglob("*.partial"))
    assert (out / report.REPORT_FILES).is_dir()
    assert all((out / s).is_file() for s, _ in _Page((out / "report.html").read_text()).images)


@pytest.mark.skipif(shutil.which("chromium") is None, reason="headless Chromium not installed")
def test_linked_report_renders_like_the_embedded_one(two_reports, tmp_path):
    shots = []
    for out in two_reports:
        (tmp_path / out.name).mkdir()
        shot = render_in_chromium(out / "report.html", tmp_path / out.name)
        shots.append(np.asarray(Image.open(shot).convert("RGB")).astype(int))
    assert shots[0].shape == shots[1].shape and shots[0].std() > 20  # maps, not a blank page
    assert np.abs(shots[0] - shots[1]).mean() < 1  # the linked images load and look the same
