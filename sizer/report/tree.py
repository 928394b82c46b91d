"""The distribution tree as a picture: a layered layout drawn as inline SVG.

Pure text from plain data: a list of runs (who feeds whom, what each run is and what is
chosen for it). The source sits at the left; each level of the tree is a column and each
load a row, parents centred on their children. A panel with many branch circuits is
drawn as one group box; when the tree still has more rows than fit one picture, the
largest panels are drawn closed in the overview and each gets its own detail picture.
Every run's edge carries its conductor and its path drop; upsized runs are drawn thick,
runs where a drop limit binds dashed. Marks are line width, dash and text, so the picture
reads the same in greyscale and in print.

Elements that change with the chosen design carry ``data-i`` (the run's index) so the
page's script can relabel them; nothing here needs the script to be read.
"""

from __future__ import annotations

import heapq
import html
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field

from sizer.results import LARGE_TREE_RUNS

# Layout in SVG user units (px at 100 %).
COLUMN = 250          # one tree level
BOX_W = 122           # node box width
BOX_H = 24
ROW = 36              # one load (or group) per row
MARGIN = 12
GROUP_OVER = 8        # a panel with more leaf circuits than this shows them as one group
MAX_ROWS = 60         # more rows than this: the largest panels close into detail pictures
MAX_DEPTH = 12        # levels of one picture: deeper runs continue in a detail picture
# A large tree's page draws at most this many boxes in its detail pictures, and no
# picture of single leaf circuits (the schedule lists them); the overview is always whole.
DETAIL_BOX_BUDGET = 3000
ID_CHARS = 17         # characters of a node id shown in its box (the full id in its title)

# Drop within this many percentage points of its limit counts as binding (common practice
# for reading a solver's answer: it is at the limit, up to rounding).
BINDING_TOLERANCE_PCT = 0.05


@dataclass(frozen=True)
class RunView:
    """One run as the picture draws it: the node it feeds and what is chosen for it."""

    index: int                 # position in the design (parents first)
    id: str                    # the node it feeds
    parent: int                # index of the feeding run, -1 for the source
    node_kind: str             # "switchboard" | "panel" | "transformer" | "load"
    conductor: str             # "2x 500 kcmil Al"
    drop_pct: float | None     # path drop at the far end
    upsized: bool = False      # larger than the code minimum
    binds: bool = False        # a voltage-drop limit binds here
    description: str = ""


@dataclass
class _Item:
    """A box of one picture: a run's node, a group of leaf circuits, or a closed panel."""

    kind: str                                  # "node" | "group" | "closed"
    run: int = -1                              # the run it is (node, closed) or is fed by
    members: list[int] = field(default_factory=list)   # group: the runs it stands for
    children: list[_Item] = field(default_factory=list)
    anchor: str = ""                           # detail picture id (group, closed)
    rows: int = 1
    y: float = 0.0
    depth: int = 0
    below: int = 0                             # node, closed: runs fed through it


def node_kind(has_children: bool, fed_by_source: bool, transformer: bool) -> str:
    """How a node is drawn: transformer, switchboard (fed by the source), panel or load."""
    if transformer:
        return "transformer"
    if not has_children:
        return "load"
    return "switchboard" if fed_by_source else "panel"


def esc(value: object) -> str:
    """Escape any value for SVG text and attributes."""
    return html.escape(str(value), quote=True)


def drop_text(value: float | None, binds: bool) -> str:
    """The path drop as the picture writes it."""
    if value is None:
        return "—"
    return f"{value:.2f} %" + (" at limit" if binds else "")


def conductor_label(run: RunView) -> str:
    """The conductor as the picture writes it; an up arrow marks an upsized run."""
    return run.conductor + (" ↑" if run.upsized else "")


class _Builder:
    """Turns the runs into pictures: the overview and the detail pictures it links to."""

    def __init__(self, runs: Sequence[RunView]) -> None:
        self.runs = list(runs)
        self.kids: dict[int, list[int]] = {i: [] for i in range(-1, len(runs))}
        for r in self.runs:
            self.kids[r.parent].append(r.index)
        self.details: list[tuple[str, str, _Item]] = []   # (anchor, title, root item)
        self._anchors = 0
        # Runs fed through each run, summed children before parents (no recursion).
        order = [-1]
        for run in order:
            order.extend(self.kids[run])
        self.below = dict.fromkeys(order, 0)
        for run in reversed(order[1:]):
            self.below[self.runs[run].parent] += 1 + self.below[run]

    def anchor(self, prefix: str, run: int) -> str:
        self._anchors += 1
        return f"tree-{prefix}{self._anchors}-{run}"

    def item(self, run: int) -> _Item:
        """The item of ``run`` with its children (leaf circuits grouped when many).

        Built without recursion (a chain of 20,000 runs is 20,000 levels deep), visiting
        runs in the order of a depth-first walk, so anchors and details come in tree
        order. A run MAX_DEPTH levels (or a multiple) below ``run`` that feeds others is
        closed: what is below it continues in a detail picture of its own.
        """
        root = _Item("node", run=run)
        stack = [root]
        while stack:
            it = stack.pop()
            kids = self.kids[it.run]
            it.below = self.below[it.run]
            if it.depth and it.depth % MAX_DEPTH == 0 and kids:
                it.kind = "closed"
                it.anchor = self.anchor("d", it.run)
                self.details.append((it.anchor, f"{self.runs[it.run].id}: "
                                     f"{it.below} runs below", it))
            leaves = [k for k in kids if not self.kids[k]]
            if len(leaves) > GROUP_OVER:
                g = _Item("group", run=it.run, members=leaves, anchor=self.anchor("g", it.run),
                          depth=it.depth + 1)
                self.details.append((g.anchor, self._group_title(it.run, leaves), g))
                inner = [_Item("node", run=k, depth=it.depth + 1) for k in kids if self.kids[k]]
                it.children = [*inner, g]
            else:
                inner = it.children = [_Item("node", run=k, depth=it.depth + 1) for k in kids]
            stack.extend(reversed(inner))   # the first child is visited next
        return root

    def _group_title(self, run: int, leaves: list[int]) -> str:
        name = self.runs[run].id if run >= 0 else "the source"
        return f"{name}: {len(leaves)} circuits"

    def close_largest(self, root: _Item, max_rows: int) -> None:
        """Close the largest panels (not the root's own children) until the rows fit.

        Greedy, largest first (the first in tree order among equals). One pass sets
        every item's rows; a heap then gives each next panel to close. Closing a panel
        only lowers the rows of the panels above it, and each of those has at least as
        many rows and comes earlier, so it was closed first or is not a candidate: the
        rows in the heap never go stale.
        """
        total = _rows(root)
        if total <= max_rows:
            return
        order = list(_walk(root, into_closed=False))
        position = {id(it): i for i, it in enumerate(order)}
        above: dict[int, _Item | None] = {id(root): None}
        for it in order:
            if it.kind != "closed" or it is root:
                for c in it.children:
                    above[id(c)] = it
        heap = [(-it.rows, position[id(it)], it) for it in order
                if it is not root and it.kind == "node" and it.children
                and self.runs[it.run].parent != root.run]   # the first level stays open
        heapq.heapify(heap)
        while total > max_rows and heap:
            _neg, _pos, best = heapq.heappop(heap)
            if best.rows <= 1:
                return
            up = above[id(best)]
            hidden = False
            while up is not None:   # inside a panel closed already: not drawn here
                if up.kind == "closed" and up is not root:
                    hidden = True
                    break
                up = above[id(up)]
            if hidden:
                continue
            best.kind = "closed"
            best.anchor = self.anchor("p", best.run)
            self.details.append((best.anchor, f"{self.runs[best.run].id}: "
                                 f"{best.below} runs below", best))
            total -= best.rows - 1
        _rows(root)


def _walk(it: _Item, into_closed: bool = True) -> Iterator[_Item]:
    """The item and every item below it, depth first (without recursion)."""
    stack = [it]
    while stack:
        cur = stack.pop()
        yield cur
        if cur.kind == "closed" and not into_closed:
            continue
        stack.extend(reversed(cur.children))


def _rows(it: _Item) -> int:
    """Rows the item takes when drawn (sets ``rows`` on every item below)."""
    order = list(_walk(it, into_closed=False))
    for cur in reversed(order):   # children before their parent
        if cur.kind in ("group", "closed") or not cur.children:
            cur.rows = 1
        else:
            cur.rows = sum(c.rows for c in cur.children)
    return it.rows


def _place(it: _Item, depth: int, first_row: int) -> None:
    """Depth and vertical centre of every item drawn below ``it``."""
    order: list[_Item] = []
    stack = [(it, depth, first_row)]
    while stack:
        cur, d, row = stack.pop()
        cur.depth = d
        order.append(cur)
        if cur.kind in ("group", "closed") or not cur.children:
            cur.y = MARGIN + row * ROW + ROW / 2
            continue
        for c in cur.children:
            stack.append((c, d + 1, row))
            row += c.rows
    for cur in reversed(order):   # a parent centred on its children, once they are placed
        if not (cur.kind in ("group", "closed") or not cur.children):
            cur.y = (cur.children[0].y + cur.children[-1].y) / 2


class Drawing:
    """SVG text of one picture rooted at an item."""

    def __init__(self, runs: Sequence[RunView], source_id: str) -> None:
        self.runs = runs
        self.source_id = source_id

    def svg(self, root: _Item, title: str) -> str:
        """The picture; the root drawn at the left."""
        _rows(root)
        _place(root, 0, 0)
        depth = max(it.depth for it in _walk(root, into_closed=False))
        width = MARGIN * 2 + depth * COLUMN + BOX_W + 40
        height = MARGIN * 2 + root.rows * ROW
        parts = [f'<svg class="tree" xmlns="http://www.w3.org/2000/svg" role="img" '
                 f'viewBox="0 0 {width} {height}" width="{width}" height="{height}" '
                 f'aria-label="{esc(title)}"><title>{esc(title)}</title>']
        shown = list(_walk(root, into_closed=False))
        for it in shown:
            if it.kind == "closed" and it is not root:
                continue
            for c in it.children:
                parts.append(self.edge(it, c))
        for it in shown:
            parts.append(self.box(it, is_root=it is root))
        parts.append("</svg>")
        return "".join(parts)

    @staticmethod
    def x(it: _Item) -> float:
        """Left edge of an item's box."""
        return MARGIN + it.depth * COLUMN

    def edge(self, parent: _Item, child: _Item) -> str:
        """The run from a parent's box to a child's, with its two labels."""
        x0 = self.x(parent) + BOX_W
        x1 = self.x(child)
        xm = x0 + 14
        y0, y1 = parent.y, child.y
        d = f"M{x0:.0f},{y0:.0f}H{xm:.0f}V{y1:.0f}H{x1:.0f}"
        tx = xm + 6
        if child.kind == "group":
            members = child.members
            drops = [d for d in (self.runs[m].drop_pct for m in members) if d is not None]
            worst = max(drops) if drops else None
            up = sum(self.runs[m].upsized for m in members)
            runs = " ".join(str(m) for m in members)
            return (f'<path class="run" d="{d}"/>'
                    f'<text class="c g" data-runs="{runs}" x="{tx:.0f}" y="{y1 - 5:.0f}">'
                    f'{esc(_group_upsized(up))}</text><text class="d g" data-runs="{runs}" '
                    f'x="{tx:.0f}" y="{y1 + 13:.0f}">{esc(_group_worst(worst))}</text>')
        r = self.runs[child.run]
        cls = "run" + (" up" if r.upsized else "") + (" bind" if r.binds else "")
        return (f'<path class="{cls}" data-i="{r.index}" d="{d}"/>'
                f'<text class="c{" up" if r.upsized else ""}" data-i="{r.index}" '
                f'x="{tx:.0f}" y="{y1 - 5:.0f}">{esc(conductor_label(r))}</text>'
                f'<text class="d{" bind" if r.binds else ""}" data-i="{r.index}" '
                f'x="{tx:.0f}" y="{y1 + 13:.0f}">{esc(drop_text(r.drop_pct, r.binds))}</text>')

    def box(self, it: _Item, is_root: bool) -> str:
        """A node's box (a link to its picture when it stands for several runs)."""
        x, y = self.x(it), it.y - BOX_H / 2
        if it.kind == "group":
            name = f"{len(it.members)} circuits"
            full = f"{name} (open the detail below)" if it.anchor else (
                f"{name} (listed in the schedule)")
            link = (f'<a href="#{it.anchor}" class="open" data-open="{it.anchor}">'
                    if it.anchor else "<g>")
            return (f"{link}<title>{esc(full)}</title>"
                    f'<rect class="n group" x="{x + 6:.0f}" y="{y - 6:.0f}" width="{BOX_W}" '
                    f'height="{BOX_H}"/><rect class="n group" x="{x + 3:.0f}" y="{y - 3:.0f}" '
                    f'width="{BOX_W}" height="{BOX_H}"/><rect class="n group" x="{x:.0f}" '
                    f'y="{y:.0f}" width="{BOX_W}" height="{BOX_H}"/>'
                    f'<text class="t" x="{x + 8:.0f}" y="{y + 16:.0f}">▸ {esc(name)}</text>'
                    + ("</a>" if it.anchor else "</g>"))
        if it.run < 0:
            kind, name = "source", self.source_id
        else:
            r = self.runs[it.run]
            kind, name = r.node_kind, r.id
        shown = name if len(name) <= ID_CHARS else name[: ID_CHARS - 1] + "…"
        title = name
        if it.run >= 0 and self.runs[it.run].description:
            title += f" — {self.runs[it.run].description}"
        title += f" ({kind})"
        shapes = []
        if it.kind == "closed":
            shapes.append(f'<rect class="n {kind}" x="{x + 6:.0f}" y="{y - 6:.0f}" '
                          f'width="{BOX_W}" height="{BOX_H}"/>'
                          f'<rect class="n {kind}" x="{x + 3:.0f}" y="{y - 3:.0f}" '
                          f'width="{BOX_W}" height="{BOX_H}"/>')
            shown = "▸ " + (shown if len(shown) <= ID_CHARS - 2 else shown[: ID_CHARS - 3] + "…")
            title += (f", {it.below} runs below (open the detail below)" if it.anchor
                      else f", {it.below} runs below (see the schedule)")
        rx = ' rx="11"' if kind == "load" else ""
        shapes.append(f'<rect class="n {kind}" x="{x:.0f}" y="{y:.0f}" width="{BOX_W}" '
                      f'height="{BOX_H}"{rx}/>')
        if kind == "transformer":   # a second outline marks the transformer
            shapes.append(f'<rect class="n inner" x="{x + 3:.0f}" y="{y + 3:.0f}" '
                          f'width="{BOX_W - 6}" height="{BOX_H - 6}"/>')
        text_cls = "t light" if kind == "source" else "t"
        body = (f"<title>{esc(title)}</title>{''.join(shapes)}"
                f'<text class="{text_cls}" x="{x + 8:.0f}" y="{y + 16:.0f}">{esc(shown)}</text>')
        if it.kind == "closed" and not is_root and it.anchor:
            return f'<a href="#{it.anchor}" class="open" data-open="{it.anchor}">{body}</a>'
        return f"<g>{body}</g>"


def _group_upsized(upsized: int) -> str:
    return f"{upsized} upsized ↑" if upsized else "none upsized"


def _group_worst(worst: float | None) -> str:
    return f"worst {worst:.2f} %" if worst is not None else "worst —"


def legend(drop_basis: str) -> str:
    """The key to the picture's marks (an SVG of its own, so it prints with the picture)."""
    rows = [
        ('<path class="run" d="M4,14H64"/>', "run at the code-minimum size"),
        ('<path class="run up" d="M4,14H64"/>', "upsized beyond the code minimum (↑)"),
        ('<path class="run bind" d="M4,14H64"/>',
         f"a voltage-drop limit binds (within {BINDING_TOLERANCE_PCT:g} points: “at limit”)"),
    ]
    nodes = [("source", "source"), ("switchboard", "switchboard"), ("panel", "panel"),
             ("transformer", "transformer"), ("load", "load"),
             ("group", "several runs: opens below")]
    width = 980
    parts = [f'<svg class="legend" xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {width} 84" '
             f'width="{width}" height="84" role="img" aria-label="Key to the tree picture">']
    for i, (shape, text) in enumerate(rows):
        y = i * 26
        parts.append(f'<g transform="translate(0,{y})">{shape}<text class="k" x="74" y="18">'
                     f"{esc(text)}</text></g>")
    for i, (kind, text) in enumerate(nodes):
        col, row = divmod(i, 3)
        x, y = 470 + col * 230, row * 26 + 4
        rx = ' rx="9"' if kind == "load" else ""
        inner = (f'<rect class="n inner" x="{x + 2}" y="{y + 2}" width="32" height="14"/>'
                 if kind == "transformer" else "")
        parts.append(f'<rect class="n {kind}" x="{x}" y="{y}" width="36" height="18"{rx}/>{inner}'
                     f'<text class="k" x="{x + 44}" y="{y + 14}">{esc(text)}</text>')
    parts.append("</svg>")
    basis = (f'<p class="note" id="tree-basis">Each run is labelled with its conductor above '
             f"the line and the path drop from the source to its far end below it "
             f"(<span class=\"basis\">{esc(drop_basis)}</span>).</p>")
    return "".join(parts) + basis


def tree_html(source_id: str, runs: Sequence[RunView], *, drop_basis: str,
              max_rows: int = MAX_ROWS) -> str:
    """The overview picture, its key and the detail pictures of groups and closed panels.

    A large tree (more than LARGE_TREE_RUNS runs) keeps the page light: the overview is
    whole, but groups of leaf circuits get no picture of their own (the schedule lists
    them) and the detail pictures of closed panels stop at DETAIL_BOX_BUDGET boxes;
    a box whose picture is left out is drawn without a link.
    """
    b = _Builder(runs)
    root = b.item(-1)   # the source: loads fed straight from it group like a panel's
    b.close_largest(root, max_rows)
    large = len(runs) > LARGE_TREE_RUNS
    # Details in tree order: groups and closed panels as they were found.
    kept: list[tuple[str, str, _Item]] = []
    done: set[str] = set()
    boxes = 0
    left_out = 0
    for anchor, title, item in b.details:
        if anchor in done:
            continue
        done.add(anchor)
        if large:
            size = (len(item.members) if item.kind == "group"
                    else sum(1 for _ in _walk(_opened(item), into_closed=False)))
            if item.kind == "group" or boxes + size > DETAIL_BOX_BUDGET:
                item.anchor = ""   # drawn without a link: its picture is left out
                left_out += 1
                continue
            boxes += size
        kept.append((anchor, title, item))
    draw = Drawing(runs, source_id)
    n_loads = sum(1 for r in runs if r.node_kind == "load")
    overview = draw.svg(root, f"Distribution tree: {len(runs)} runs, {n_loads} loads")
    out = [legend(drop_basis), f'<div class="tree-box">{overview}</div>']
    if kept:
        out.append('<p class="note">Boxes marked ▸ stand for several runs; their pictures '
                   "follow (click a box to open its picture).</p>")
    if left_out:
        out.append(f'<p class="note">A tree of {len(runs):,} runs: {left_out:,} boxes marked '
                   "▸ have no picture of their own, to keep this page light; the cable "
                   "schedule (the CSV file) lists every run.</p>")
    for anchor, title, item in kept:
        if item.kind == "group":
            parent = _Item("node", run=item.run,
                           children=[_Item("node", run=m) for m in item.members])
            pic = draw.svg(parent, title)
        else:
            pic = draw.svg(_opened(item), title)
        out.append(f'<details class="tree-detail" id="{esc(anchor)}"><summary>{esc(title)}'
                   f'</summary><div class="tree-box">{pic}</div></details>')
    return "".join(out)


def _opened(item: _Item) -> _Item:
    """A closed panel drawn open, as the root of its own picture."""
    return _Item("node", run=item.run, children=item.children, below=item.below)
