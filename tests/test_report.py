"""The HTML report: self-contained, every section present, renders in headless Chromium."""

from __future__ import annotations

import re
import shutil
from html.parser import HTMLParser

import pytest
from click.testing import CliRunner

from rasterbudget.cli import main
from tests.conftest import ROOT, render_in_chromium


class _Collector(HTMLParser):
    def __init__(self):
        super().__init__()
        self.sources, self.headings, self._in_heading = [], [], False

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag in ("img", "script", "link"):
            self.sources.append(attrs.get("src") or attrs.get("href") or "")
        self._in_heading = tag in ("h1", "h2", "h3")

    def handle_data(self, data):
        if self._in_heading:
            self.headings.append(data.strip())
            self._in_heading = False


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    out = tmp_path_factory.mktemp("report") / "out"
    result = CliRunner().invoke(
        main, ["run", str(ROOT / "workflows" / "demo_season.toml"), "--out", str(out), "--quiet"]
    )
    assert result.exit_code == 0, result.output
    return out / "report.html"


def test_report_is_self_contained_with_every_section(report):
    text = report.read_text()
    parser = _Collector()
    parser.feed(text)
    assert parser.sources and all(s.startswith("data:image/png;base64,") for s in parser.sources)
    headings = " | ".join(parser.headings)
    for title in (
        "Scene kessendry_20260614",
        "Scene kessendry_20260823",
        "Season kessendry_summer_2026",
        "How available energy splits",
        "Daily ET with the anchors",
        "QA flags set",
        "Zones",
    ):
        assert title in headings, title
    assert "do not replace local regulations" in text.replace("They do not", "do not")
    assert not re.search(r"(src|href)=\"https?:", text)


@pytest.mark.skipif(shutil.which("chromium") is None, reason="headless Chromium not installed")
def test_report_renders_in_headless_chromium(report, tmp_path):
    shot = render_in_chromium(report, tmp_path)
    assert shot.stat().st_size > 50_000  # a page of maps and charts, not a blank one


def test_contents_link_every_scene_season_and_the_zone_series(report):
    text = report.read_text()
    sections = set(re.findall(r'<section id="([^"]+)">', text))
    contents = text.split("<nav class='toc'>", 1)[1].split("</nav>", 1)[0]
    targets = set(re.findall(r"href='#([^']+)'", contents))
    assert sections == targets
    assert {
        "colour-scales",
        "scene-kessendry_20260614",
        "scene-kessendry_20260823",
        "season-kessendry_summer_2026",
        "zone-series",
    } <= sections
    # the season map's colour scale is stated with the scenes' ones
    assert text.count("<tr data-variable='et_season'>") == 1
