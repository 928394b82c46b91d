"""The HTML report: self-contained, carries the caution, shows scenario names as text."""

from __future__ import annotations

import datetime as dt
import re
from dataclasses import replace
from html.parser import HTMLParser
from importlib import resources
from pathlib import Path

import pytest
from builders import write_scenario

from sizer import CAUTION
from sizer.errors import ScenarioError
from sizer.model import Design, DesignStatus, Totals
from sizer.optimize import Objective, prepare
from sizer.report.html import render_report, write_report
from sizer.results import REPORT_FRONTIER_POINTS, Results, solve_results
from sizer.scenario import load_scenario

TITLE = "Tom & Jerry's <script>alert('title')</script> works"
PANEL = "P&Q <b>"
BRANCH = "<script>alert(1)</script>"
BRANCH_TEXT = "A & B <script>x</script> \"quoted\""

# A panel, a long branch whose name is markup, and a pinned motor circuit: every section
# and all four options have content.
NODES = f"""
[[node]]
id = "{PANEL}"
description = "panel & <i>stuff</i>"
parent = "SRC"
length = "30 m"
ocpd = "200 A"

[[node]]
id = "{BRANCH}"
description = '{BRANCH_TEXT}'
parent = "{PANEL}"
length = "90 m"
load = "40 kW"
continuous = true

[[node]]
id = "PUMP & FAN"
parent = "{PANEL}"
length = "60 m"
power_factor = 0.85
motor = {{ kw = 15, start_multiple = 6, start_pf = 0.3 }}
conductor = "6 AWG Cu"
"""

SECTIONS = ("scenario", "assumptions", "options", "justification", "schedule", "figures",
            "verification")
ALLOWED_TAGS = {"html", "head", "meta", "title", "style", "body", "header", "div", "h1", "h2",
                "h3", "p", "strong", "main", "nav", "a", "section", "table", "caption",
                "thead", "tbody", "tr", "th", "td", "ul", "li", "figure", "img", "figcaption",
                "footer",
                # the tree picture and the frontier chart (inline SVG), the controls and
                # the page's own script and data
                "svg", "g", "path", "rect", "circle", "line", "text", "span", "details",
                "summary", "label", "select", "option", "input", "button", "script"}


class Page(HTMLParser):
    """Tags, attributes and text of a page, as a browser's parser sees them."""

    def __init__(self, text: str) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[str] = []
        self.attrs: list[tuple[str, str, str]] = []
        self.text: list[str] = []
        self.ids: set[str] = set()
        self._in_title = False
        self.title = ""
        self.feed(text)
        self.close()

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        for k, v in attrs:
            self.attrs.append((tag, k, v or ""))
            if k == "id":
                self.ids.add(v or "")
        self._in_title = tag == "title"

    def handle_endtag(self, tag):
        self._in_title = False

    def handle_data(self, data):
        self.text.append(data)
        if self._in_title:
            self.title += data

    @property
    def all_text(self) -> str:
        return " ".join(self.text)


@pytest.fixture(scope="module")
def case(tmp_path_factory):
    folder = tmp_path_factory.mktemp("report")
    path = write_scenario(folder, NODES, title=TITLE,
                          materials='["Cu", "Al"]', energy_price="0.15 USD/kWh")
    prep = prepare(load_scenario(path))
    results = solve_results(prep, Objective.LIFECYCLE, compare=True,
                            frontier_points=REPORT_FRONTIER_POINTS)
    assert results.design.segments
    out = write_report(folder / "report.html", results, protect=[path])
    return results, results.design, path, out, out.read_text(encoding="utf-8")


def _bare(results: Results, design: Design) -> Results:
    """The same run with another design and no options or frontier."""
    return replace(results, design=design, options=(), frontier_points=(), frontier_designs=(),
                   frontier_figures=())


def test_self_contained(case):
    *_, text = case
    page = Page(text)
    for tag, attr, value in page.attrs:
        if attr in ("src", "href"):
            assert value.startswith(("data:image/png;base64,", "#")), (tag, attr, value[:40])
    assert not re.search(r"(?i)(src|href)\s*=\s*[\"']?\s*(https?:)?//", text)
    assert not re.search(r"(?i)url\(|@import", text)  # the style sheet loads nothing either
    assert "link" not in page.tags and "iframe" not in page.tags
    # Two scripts, both inline: the data (JSON, inert) and our own plain script.
    assert page.tags.count("script") == 2
    scripts = [(t, k, v) for t, k, v in page.attrs if t == "script"]
    assert scripts == [("script", "type", "application/json"), ("script", "id", "sizer-data")]
    own = resources.files("sizer.report").joinpath("report.js").read_text(encoding="utf-8")
    assert f"<script>\n{own}</script>" in text
    assert not re.search(r"fetch\(|XMLHttpRequest|WebSocket|import\(|https?:", own)
    # voltage profile, cost, cash flow (the frontier is the inline SVG chart)
    assert page.tags.count("img") == 3


def test_caution_at_the_top_and_the_foot(case):
    *_, text = case
    assert text.count(CAUTION) == 2
    assert "authority having jurisdiction" in CAUTION
    assert "licensed professional" in CAUTION
    # Prominent: before the first section.
    assert text.index(CAUTION) < text.index('id="scenario"')


def test_scenario_names_render_as_text(case):
    *_, text = case
    page = Page(text)
    assert set(page.tags) <= ALLOWED_TAGS  # no <script>, <b> or <i> from the scenario
    words = page.all_text
    for name in (PANEL, BRANCH, BRANCH_TEXT, "PUMP & FAN", "panel & <i>stuff</i>"):
        assert name in words, name
    assert TITLE in page.title
    assert text.lower().count("<script") == 2  # the page's own data and script only
    assert "<script>alert" not in text and "</script>x" not in text
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in text
    # In the embedded data every "<" is escaped, so no name can close the data element.
    data = text[text.index('id="sizer-data">'):]
    data = data[:data.index("</script>")]
    assert "<" not in data.removeprefix('id="sizer-data">')
    assert "\\u003cscript\\u003ealert(1)" in data
    assert "P&amp;Q &lt;b&gt;" in text


def test_sections_and_tables(case):
    _prep, design, *_, text = case
    page = Page(text)
    assert set(SECTIONS) <= page.ids
    words = page.all_text
    for heading in ("Options side by side", "Why upsize", "Cable schedule", "Verification",
                    "Motor starting", "Price list", "Edition", "Grid emission factor"):
        assert heading in words
    # One schedule row per segment (plus the options, justification and other tables).
    assert page.tags.count("tr") > len(design.segments) + 3
    assert "converged in" in words
    for option in ("Code minimum", "Lifecycle optimum", "All copper", "Your pinned design"):
        assert option in words


def test_date_only_in_the_footer(case):
    results, design, *_ = case
    text = render_report(_bare(results, design), today=dt.date(2031, 2, 3))
    assert text.count("2031-02-03") == 1
    assert "Generated 2031-02-03" in text


def test_refuses_to_overwrite_the_scenario(case):
    results, design, path, *_ = case
    before = path.read_bytes()
    with pytest.raises(ScenarioError, match="refusing to overwrite"):
        write_report(path, _bare(results, design), protect=[path])
    assert path.read_bytes() == before


def test_a_design_without_segments_shows_its_diagnosis(case):
    results, *_ = case
    empty = Design(DesignStatus.INFEASIBLE, "lifecycle", "nec", "USD", Totals(0, 0, 0), (),
                   diagnosis=("path SRC → <X>: best reachable drop 6 % & more",))
    text = render_report(replace(_bare(results, empty), verification=None))
    assert "path SRC → &lt;X&gt;: best reachable drop 6 % &amp; more" in text
    assert CAUTION in text


def test_notes_and_findings_are_escaped(case):
    results, design, *_ = case
    noisy = replace(design, notes=("<img src=http://example.invalid/x>",))
    text = render_report(_bare(results, noisy))
    assert "&lt;img src=http://example.invalid/x&gt;" in text
    assert Page(text).tags.count("img") == 2  # only our own figures (no frontier, no options)


def test_report_path_is_written(case):
    *_, out, _text = case
    assert Path(out).is_file()


def test_rendering_reads_the_results_and_solves_nothing(case, monkeypatch):
    import sizer.engines as engines
    import sizer.optimize as optimize
    import sizer.workflow as workflow

    def forbidden(*_a, **_k):
        raise AssertionError("the report must not solve or verify")

    for module, name in ((engines, "solve"), (optimize, "solve"), (workflow, "solve"),
                         (workflow, "verify_design"), (workflow, "solve_verified"),
                         (workflow, "compare_options"), (workflow, "frontier")):
        monkeypatch.setattr(module, name, forbidden)
    results, *_ = case
    text = render_report(results)
    assert "Options side by side" in text and "Why upsize" in text
