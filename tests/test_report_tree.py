"""The tree picture: every run drawn once, marks readable, large trees folded into detail."""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

from hypothesis import given
from hypothesis import strategies as st

from sizer.report import tree as tr

SVG = "{http://www.w3.org/2000/svg}"


def runs_of(parents: list[int], **marks: set[int]) -> list[tr.RunView]:
    """Runs of a tree given each run's parent index (-1: the source)."""
    has_children = {p for p in parents if p >= 0}
    return [tr.RunView(index=i, id=f"N{i}", parent=p,
                       node_kind=tr.node_kind(i in has_children, p < 0, False),
                       conductor="4 AWG Cu", drop_pct=1.0 + i / 100,
                       upsized=i in marks.get("up", set()),
                       binds=i in marks.get("bind", set()))
            for i, p in enumerate(parents)]


def pictures(page: str) -> list[ET.Element]:
    """Every tree picture of the page, parsed as XML (so each is well formed)."""
    return [ET.fromstring(m) for m in re.findall(r"<svg class=\"tree\".*?</svg>", page, re.S)]


def drawn_runs(page: str) -> list[int]:
    """Run indices with an edge of their own or a place in a group, over all pictures."""
    out = []
    for svg in pictures(page):
        for el in svg.iter(f"{SVG}path"):
            if "data-i" in el.attrib:
                out.append(int(el.attrib["data-i"]))
    return out


def campus(panels: int, circuits: int) -> list[int]:
    """A switchboard, ``panels`` panels under it, ``circuits`` loads on each."""
    parents = [-1]
    for _ in range(panels):
        panel = len(parents)
        parents.append(0)
        parents += [panel] * circuits
    return parents


def test_fifty_runs_are_all_drawn_in_one_picture():
    parents = campus(7, 6)  # 1 + 7 + 42 = 50 runs, no panel over the group size
    page = tr.tree_html("SRC", runs_of(parents), drop_basis="AC load flow")
    assert len(pictures(page)) == 1
    assert sorted(drawn_runs(page)) == list(range(50))
    assert "<details" not in page


def test_five_hundred_runs_fold_into_an_overview_and_details():
    parents = campus(16, 30)  # 1 + 16 + 480 = 497 runs
    page = tr.tree_html("SRC", runs_of(parents), drop_basis="AC load flow")
    overview, *details = pictures(page)
    height = float(overview.attrib["height"])
    assert height <= 2 * tr.MARGIN + tr.MAX_ROWS * tr.ROW
    # every panel's circuits are one group in the overview, each with its own picture
    assert len(details) == 16
    # every run drawn: feeders in the overview, each circuit in its group's picture
    assert sorted(drawn_runs(page)) == list(range(len(parents)))
    for anchor in re.findall(r'<details class="tree-detail" id="([^"]+)"', page):
        assert f'href="#{anchor}"' in page


def test_a_very_wide_tree_closes_its_largest_panels():
    # 70 panels of 3 loads each under one switchboard: 70 rows of groups would not fit,
    # so the overview closes sub-panels until it does.
    parents = [-1]
    for _ in range(12):
        sub = len(parents)
        parents.append(0)
        for _ in range(6):
            panel = len(parents)
            parents.append(sub)
            parents += [panel] * 3
    page = tr.tree_html("SRC", runs_of(parents), drop_basis="linear estimate")
    overview, *details = pictures(page)
    assert float(overview.attrib["height"]) <= 2 * tr.MARGIN + tr.MAX_ROWS * tr.ROW
    assert details
    assert sorted(set(drawn_runs(page))) == list(range(len(parents)))


def test_marks_for_upsized_and_binding_runs():
    page = tr.tree_html("SRC", runs_of([-1, 0, 0], up={1}, bind={2}),
                        drop_basis="AC load flow")
    svg = pictures(page)[0]
    edges = {int(e.attrib["data-i"]): e.attrib["class"] for e in svg.iter(f"{SVG}path")}
    assert edges == {0: "run", 1: "run up", 2: "run bind"}
    texts = {(t.attrib["class"], t.attrib.get("data-i")): t.text for t in svg.iter(f"{SVG}text")}
    assert texts[("c up", "1")] == "4 AWG Cu ↑"
    assert texts[("d bind", "2")] == "1.02 % at limit"
    assert '(<span class="basis">AC load flow</span>)' in page  # which drop the labels are


def test_names_are_text_not_markup():
    runs = [tr.RunView(0, "<b>PANEL</b> & co", -1, "panel", "4 AWG Cu", 1.0),
            tr.RunView(1, "L1", 0, "load", "4 AWG Cu", 2.0, description="<script>x</script>")]
    page = tr.tree_html("<SRC>", runs, drop_basis="AC load flow")
    assert "<b>" not in page and "<script>" not in page and "<SRC>" not in page
    assert "&lt;b&gt;PANEL&lt;/b&gt; &amp; co" in page
    pictures(page)  # still well formed


@given(st.lists(st.integers(min_value=0, max_value=10**6), min_size=1, max_size=400))
def test_every_run_is_drawn_in_some_picture(seeds):
    # A random tree: each run hangs under an earlier one (or the source).
    parents = [-1 if i == 0 or s % 7 == 0 else s % i for i, s in enumerate(seeds)]
    page = tr.tree_html("SRC", runs_of(parents), drop_basis="AC load flow")
    assert set(drawn_runs(page)) == set(range(len(parents)))
    overview = pictures(page)[0]
    # the first level stays open: only runs that feed others (and one group) add rows
    feeders = {p for p in parents if p >= 0}
    first_level = sum(1 for i, p in enumerate(parents) if p == -1 and i in feeders) + 1
    assert float(overview.attrib["height"]) <= 2 * tr.MARGIN + max(
        tr.MAX_ROWS, first_level) * tr.ROW


def test_loads_fed_straight_from_the_source_group_too():
    parents = [-1] * 30
    page = tr.tree_html("SRC", runs_of(parents), drop_basis="AC load flow")
    overview, _detail = pictures(page)
    assert float(overview.attrib["height"]) == 2 * tr.MARGIN + tr.ROW  # one group row
    assert "the source: 30 circuits" in page
    assert sorted(drawn_runs(page)) == list(range(30))
