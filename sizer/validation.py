"""Whole-tree checks of a scenario, run by name, and the voltage levels of the tree.

Validation has two layers. Each model dataclass checks its own fields in
``__post_init__`` (sizer.model) and the scenario reader checks every field as it parses
it (sizer.scenario). This module holds the second layer: checks that need the whole
tree — ids, parents, loops, which nodes are leaves, voltage levels, and the checks that
need the rule profile (pinned sizes, insulation ratings). Every check adds one-line
errors to a :class:`Report` and carries on, so a user sees all problems at once.

The checks, by name (``TREE_CHECKS`` and ``PROFILE_CHECKS``):

- ``unique ids``: node ids are unique, and none repeats the source's id;
- ``parents exist``: every node names a parent that is the source or another node;
- ``no loops``: following parents from any node reaches the source (a node that is its
  own parent is a loop of one);
- ``voltage levels``: voltages and phases inherited or checked against the bus that
  feeds the node (see :class:`Bus`); transformers change the voltage;
- ``leaf demand``: every leaf has a load, a motor or a device rating;
- ``panel loads``: a node with nodes below it carries only what is below it — no
  load, motor, continuous flag of its own; demand factors only where there is demand
  below; a transformer feeds at least one node;
- ``insulation`` (profile): insulation ratings are ones the rule profile tables;
- ``terminals`` (profile): terminal ratings are temperature columns of its table;
- ``pins`` (profile): a pinned conductor is in the profile's catalogue, made in its
  material, allowed by the node's materials and within its max_sets.
"""

from __future__ import annotations

import difflib
import heapq
import math
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import Any

from sizer.errors import ScenarioError, ScenarioErrors

MAX_NODES = 200_000
# A node's voltage may differ from its bus's nominal line-to-line or line-to-neutral
# value by this fraction (rounding such as 277 V for 480/√3 = 277.1 V).
VOLTAGE_TOLERANCE = 0.02
SQRT3 = math.sqrt(3.0)


# --- collecting errors -------------------------------------------------------------------


@dataclass
class Report:
    """Errors found so far, in the order found; each one line naming file, node, field."""

    file: str
    errors: list[ScenarioError] = field(default_factory=list)

    def add(self, message: str, *, node: str | None = None, field: str | None = None,
            file: str | None = None) -> None:
        """Record one error."""
        self.errors.append(ScenarioError(message, file=file or self.file, node=node,
                                         field=field))

    def add_error(self, exc: ScenarioError, *, node: str | None = None,
                  field: str | None = None, file: str | None = None) -> None:
        """Record an error raised elsewhere, filling in where it happened."""
        if isinstance(exc, ScenarioErrors):
            for e in exc.errors:
                self.add_error(e, node=node, field=field, file=file)
            return
        self.errors.append(exc.located(file=file or self.file, node=node, field=field))

    def raise_if_any(self) -> None:
        """Raise the one error, or all of them together; do nothing when clean."""
        if len(self.errors) == 1:
            raise self.errors[0]
        if self.errors:
            raise ScenarioErrors(self.errors)


def suggest(word: str, known: Iterable[str]) -> str:
    """`` (did you mean 'x'?)`` for the closest known word, or an empty string."""
    return Suggester(known).hint(word)


class Suggester:
    """Finds the closest known word to a misspelt one, from an index built once.

    Small vocabularies are compared whole (difflib). Large ones (thousands of node ids)
    keep a trigram index: a query's rarest trigrams pick at most ``MAX_VISITED`` index
    entries, and only the ``MAX_COMPARED`` known words sharing the most of them are
    compared, so each miss costs a few hundred comparisons however many ids the tree has.
    """

    SMALL = 200          # words compared whole
    MAX_COMPARED = 25    # words compared after the index's pick
    MAX_VISITED = 4000

    def __init__(self, known: Iterable[str]) -> None:
        self.known = known
        self._words: list[str] | None = None
        self.index: dict[str, list[int]] | None = None

    @property
    def words(self) -> list[str]:
        """The known words in lower case, indexed on first use (a clean tree never pays)."""
        if self._words is None:
            self.by_lower = {k.lower(): k for k in self.known}
            self._words = list(self.by_lower)
            if len(self._words) > self.SMALL:
                self.index = {}
                for i, w in enumerate(self._words):
                    for g in _trigrams(w):
                        self.index.setdefault(g, []).append(i)
        return self._words

    def hint(self, word: str) -> str:
        """`` (did you mean 'x'?)`` or an empty string."""
        query = word.lower()
        pool = self.words
        if self.index is not None:
            shared: dict[int, int] = {}
            postings = sorted((self.index.get(g, []) for g in _trigrams(query)), key=len)
            visited = 0
            for posting in postings:   # rarest first: they tell the words apart
                if visited and visited + len(posting) > self.MAX_VISITED:
                    break
                visited += len(posting)
                for i in posting:
                    shared[i] = shared.get(i, 0) + 1
            best = sorted(shared, key=lambda i: (-shared[i], i))[: self.MAX_COMPARED]
            pool = [self.words[i] for i in sorted(best)]
        close = difflib.get_close_matches(query, pool, n=1, cutoff=0.6)
        return f" (did you mean '{self.by_lower[close[0]]}'?)" if close else ""


def _trigrams(word: str) -> set[str]:
    padded = f"  {word} "
    return {padded[i:i + 3] for i in range(len(padded) - 2)}


# --- a node as read, before the tree is known --------------------------------------------


@dataclass
class NodeDraft:
    """One node as read from a [[node]] table or a CSV row, fields parsed one by one.

    ``values`` holds the parsed fields by scenario key (absent when not given or when
    the field was bad); ``given`` the keys the user wrote; ``bad`` the keys whose value
    could not be used (already reported), so later checks do not repeat the complaint.
    """

    file: str
    where: str                 # "line 7" or "the 3rd [[node]]", for errors without an id
    position: int              # order in the input
    id: str | None
    parent: str | None
    values: dict[str, Any] = field(default_factory=dict)
    given: frozenset[str] = frozenset()
    bad: set[str] = field(default_factory=set)


@dataclass(frozen=True)
class Tree:
    """The drafts with their structure: children and a parents-first order."""

    source_id: str
    drafts: tuple[NodeDraft, ...]
    by_id: Mapping[str, NodeDraft]
    children: Mapping[str, tuple[str, ...]]
    order: tuple[int, ...]     # positions, parents first, file order otherwise

    def is_leaf(self, node_id: str) -> bool:
        """True when nothing is fed from the node."""
        return not self.children.get(node_id)


# --- structure: ids, parents, loops ----------------------------------------------------


def check_node_count(count: int, report: Report) -> None:
    """Refuse trees beyond what sizer is built and tested for."""
    if count > MAX_NODES:
        report.add(f"has {count:,} nodes; sizer takes at most {MAX_NODES:,} "
                   "(split the tree at a transformer into separate scenarios)")
        report.raise_if_any()


def check_unique_ids(drafts: Sequence[NodeDraft], source_id: str | None,
                     report: Report) -> dict[str, NodeDraft]:
    """Every id once, and none repeating the source's id; returns id → first draft."""
    by_id: dict[str, NodeDraft] = {}
    for d in drafts:
        if d.id is None:
            continue
        if source_id is not None and d.id == source_id:
            report.add("repeats the source's id; ids must be unique", node=d.id, field="id",
                       file=d.file)
        elif d.id in by_id:
            first = by_id[d.id]
            report.add(f"duplicate id (first used at {first.where} of {first.file})",
                       node=d.id, field="id", file=d.file)
        else:
            by_id[d.id] = d
    return by_id


def check_parents_exist(drafts: Sequence[NodeDraft], by_id: Mapping[str, NodeDraft],
                        source_id: str | None, report: Report) -> None:
    """Every parent is the source or another node; self-parents are named as such."""
    known = Suggester([*by_id, *([source_id] if source_id else [])])
    for d in drafts:
        if d.id is None or "parent" in d.bad:
            continue
        if d.parent is None:
            report.add("missing: every node but the source names its parent "
                       "(the tree has exactly one source, under [source])",
                       node=d.id, field="parent", file=d.file)
        elif d.parent == d.id:
            report.add("the node is its own parent (a loop)", node=d.id, field="parent",
                       file=d.file)
        elif d.parent != source_id and d.parent not in by_id:
            report.add(f"unknown parent '{d.parent}'{known.hint(d.parent)}",
                       node=d.id, field="parent", file=d.file)


def check_no_loops(drafts: Sequence[NodeDraft], by_id: Mapping[str, NodeDraft],
                   source_id: str, report: Report) -> tuple[int, ...]:
    """Order the nodes parents first (stable: file order where the tree allows).

    Nodes that never reach the source sit on or below a loop; each loop is reported
    once, at its first node in file order.
    """
    children: dict[str, list[int]] = {}
    for d in drafts:
        if d.id is not None and by_id.get(d.id) is d and d.parent is not None:
            children.setdefault(d.parent, []).append(d.position)
    pos_of = {d.position: d for d in drafts}
    # Kahn's algorithm with the smallest input position first keeps file order whenever
    # the file already lists parents first.
    heap = list(children.get(source_id, []))
    heapq.heapify(heap)
    order: list[int] = []
    while heap:
        p = heapq.heappop(heap)
        order.append(p)
        for c in children.get(pos_of[p].id or "", []):
            heapq.heappush(heap, c)
    placed = set(order)
    state: dict[str, int] = {}   # 1 on the current walk, 2 settled
    for d in drafts:
        if d.id is None or by_id.get(d.id) is not d or d.position in placed:
            continue
        walk: list[str] = []
        cur: str | None = d.id
        while cur is not None and cur in by_id and state.get(cur) is None:
            state[cur] = 1
            walk.append(cur)
            nxt = by_id[cur].parent
            cur = None if nxt is None or nxt == source_id else nxt
        if cur is not None and state.get(cur) == 1 and cur != by_id[cur].parent:
            loop = walk[walk.index(cur):]
            first = min(loop, key=lambda i: by_id[i].position)
            k = loop.index(first)
            loop = loop[k:] + loop[:k]
            shown = " → ".join([*loop, first])
            report.add(f"the parents form a loop: {shown} (each node's parent must lead "
                       "back to the source)", node=first, field="parent",
                       file=by_id[first].file)
        for w in walk:
            state[w] = 2
    return tuple(order)


def build_tree(drafts: Sequence[NodeDraft], source_id: str | None,
               report: Report) -> Tree | None:
    """Run the structural checks; the tree, or None when it cannot be formed."""
    before = len(report.errors)
    by_id = check_unique_ids(drafts, source_id, report)
    check_parents_exist(drafts, by_id, source_id, report)
    if source_id is None:
        return None
    order = check_no_loops(drafts, by_id, source_id, report)
    if len(report.errors) > before or any(d.id is None or "parent" in d.bad for d in drafts):
        return None
    children: dict[str, list[str]] = {}
    for p in order:
        d = drafts[p]
        assert d.id is not None and d.parent is not None
        children.setdefault(d.parent, []).append(d.id)
    return Tree(source_id, tuple(drafts), by_id,
                {k: tuple(v) for k, v in children.items()}, order)


# --- voltage levels ---------------------------------------------------------------------


@dataclass(frozen=True)
class Bus:
    """The supply a node's circuit is taken from.

    ``voltage_v`` is line-to-line for 3 phases, the full 1-phase voltage otherwise;
    ``neutral_v`` the line-to-neutral voltage available on the bus (V/√3 for a 3-phase
    wye, V/2 for a centre-tapped 1-phase supply such as 120/240 V), or None.
    """

    voltage_v: float
    phases: int
    neutral_v: float | None
    owner: str                 # the source or node whose bus this is, for messages


def close(a: float, b: float, tol: float = VOLTAGE_TOLERANCE) -> bool:
    """True when ``a`` is within ``tol`` (a fraction) of ``b``."""
    return abs(a - b) <= tol * abs(b)


def supply_bus(voltage_v: float, phases: int, owner: str) -> Bus:
    """The bus of a source or of a transformer's secondary."""
    neutral = voltage_v / SQRT3 if phases == 3 else voltage_v / 2.0
    return Bus(voltage_v, phases, neutral, owner)


def is_line_to_neutral(bus: Bus, phases: int, voltage_v: float) -> bool:
    """True for a 1-phase circuit taken between a line and the neutral of ``bus``."""
    return (phases == 1 and bus.neutral_v is not None and close(voltage_v, bus.neutral_v)
            and not close(voltage_v, bus.voltage_v))


def voltage_problem(bus: Bus, phases: int, voltage_v: float) -> tuple[str, str] | None:
    """(field, message) when a circuit of ``phases`` at ``voltage_v`` cannot hang on ``bus``."""
    if phases == 3:
        if bus.phases == 3 and close(voltage_v, bus.voltage_v):
            return None
        where = _where(bus)
        if bus.phases != 3:
            return "phases", f"a 3-phase circuit cannot be fed from {where}"
        return "voltage", (f"a 3-phase circuit on {where} must be {_v(bus.voltage_v)}, "
                           f"got {_v(voltage_v)}")
    if close(voltage_v, bus.voltage_v) or is_line_to_neutral(bus, phases, voltage_v):
        return None
    where = _where(bus)
    allowed = _v(bus.voltage_v) + (" (line to line)" if bus.phases == 3 else "")
    if bus.neutral_v is not None:
        allowed += f" or {_v(bus.neutral_v)} (line to neutral)"
    return "voltage", f"a 1-phase circuit on {where} must be {allowed}, got {_v(voltage_v)}"


def node_bus(parent_bus: Bus, node_id: str, phases: int, voltage_v: float,
             transformer: Any | None) -> Bus:
    """The bus at a node's far end, which feeds the node's children."""
    if transformer is not None:
        return supply_bus(transformer.secondary_v, transformer.secondary_phases, node_id)
    if phases == 3:
        return Bus(voltage_v, 3, voltage_v / SQRT3, node_id)
    if is_line_to_neutral(parent_bus, phases, voltage_v):
        return Bus(voltage_v, 1, None, node_id)
    # 1-phase between two lines: the neutral goes along if the parent bus has one.
    return Bus(voltage_v, 1, parent_bus.neutral_v, node_id)


def _where(bus: Bus) -> str:
    return f"the {_v(bus.voltage_v)} {bus.phases}-phase bus of '{bus.owner}'"


def _v(volts: float) -> str:
    return f"{volts:.4g} V"


def check_voltage_levels(tree: Tree, source_bus: Bus, report: Report) -> dict[str, Bus]:
    """Inherit voltage and phases from the feeding bus, or check them against it.

    Fills ``voltage_v``, ``phases`` and ``line_to_neutral`` into each draft's values and
    returns each node's own bus (the one its children hang on). A node whose bus cannot
    be known (a bad field upstream) is skipped without further complaint.
    """
    buses: dict[str, Bus] = {}
    for p in tree.order:
        d = tree.drafts[p]
        assert d.id is not None and d.parent is not None
        bus = source_bus if d.parent == tree.source_id else buses.get(d.parent)
        if bus is None or d.bad & {"voltage", "phases", "transformer"}:
            continue
        phases = d.values.get("phases", bus.phases)
        voltage = d.values.get("voltage", bus.voltage_v)
        problem = voltage_problem(bus, phases, voltage)
        if problem is not None:
            fld, message = problem
            if fld == "voltage" and "voltage" not in d.given:
                message += " (inherited; give the node's voltage)"
            report.add(message, node=d.id, field=fld, file=d.file)
            d.bad.add(fld)
            continue
        d.values["voltage_v"] = voltage
        d.values["phases_n"] = phases
        d.values["line_to_neutral"] = is_line_to_neutral(bus, phases, voltage)
        # A 1-phase run on a 3-phase bus with no voltage of its own: line to line, said.
        d.values["voltage_assumed"] = (phases == 1 and bus.phases == 3
                                       and "voltage" not in d.given)
        tx = d.values.get("transformer")
        if tx is not None:
            if close(tx.secondary_v, voltage):
                report.add(f"the secondary {_v(tx.secondary_v)} equals the primary "
                           f"{_v(voltage)}: a transformer here must change the voltage",
                           node=d.id, field="transformer.secondary", file=d.file)
                d.bad.add("transformer")
                continue
            if tx.secondary_phases == 3 and phases != 3 and not d.values.get(
                    "transformer_phases_given", True):
                tx = replace(tx, secondary_phases=1)
                d.values["transformer"] = tx
            if tx.secondary_phases == 3 and phases != 3:
                report.add("a 3-phase secondary needs a 3-phase primary (the node is "
                           "1-phase)", node=d.id, field="transformer.secondary_phases",
                           file=d.file)
                d.bad.add("transformer")
                continue
        buses[d.id] = node_bus(bus, d.id, phases, voltage, tx)
    return buses


# --- what each node carries ----------------------------------------------------------------


def check_leaf_demand(tree: Tree, report: Report) -> None:
    """A leaf needs something to size its circuit by: a load, a motor or a device rating."""
    for d in tree.drafts:
        assert d.id is not None
        if tree.is_leaf(d.id) and not ({"load", "motor", "ocpd", "transformer"}
                                       & (d.given | d.bad)):
            report.add("nothing to size this circuit by: a leaf (no node below it) needs a "
                       "load, a motor or a device rating (ocpd)", node=d.id, field="load",
                       file=d.file)


def check_panel_loads(tree: Tree, report: Report) -> None:
    """Panels carry what is below them; leaves carry their own load."""
    for d in tree.drafts:
        assert d.id is not None
        below = len(tree.children.get(d.id, ()))
        if below:
            panel = f"'{d.id}' feeds {below} node{'s' if below > 1 else ''} below it"
            if "load" in d.given:
                report.add(f"{panel} and carries only their demand: put this load on a "
                           "node of its own", node=d.id, field="load", file=d.file)
            if "motor" in d.given:
                report.add(f"{panel}: put the motor on a node of its own", node=d.id,
                           field="motor", file=d.file)
            if d.values.get("continuous") is True:
                report.add(f"{panel}: mark the continuous loads below it instead",
                           node=d.id, field="continuous", file=d.file)
        else:
            if "demand_factor" in d.given:
                report.add("a demand factor applies to the loads below a panel; this node "
                           "feeds none (give its load as its demand)", node=d.id,
                           field="demand_factor", file=d.file)
            if "transformer" in d.given and "transformer" not in d.bad:
                report.add(f"the transformer feeds nothing: give its secondary loads as "
                           f"nodes with parent = '{d.id}'", node=d.id, field="transformer",
                           file=d.file)


TreeCheck = Callable[[Tree, Report], None]
TREE_CHECKS: tuple[tuple[str, TreeCheck], ...] = (
    ("leaf demand", check_leaf_demand),
    ("panel loads", check_panel_loads),
)


# --- checks that need the rule profile ---------------------------------------------------


def check_insulation(insulation_c: float, profile: Any) -> str | None:
    """Message when the profile has no ampacity column for this insulation rating."""
    allowed = tuple(float(t) for t in profile.insulation_temps_c)
    if any(abs(insulation_c - t) < 1e-6 for t in allowed):
        return None
    shown = ", ".join(f"\"{t:g} degC\"" for t in allowed)
    return (f"the {profile.name} profile has no {insulation_c:g} degC insulation rating "
            f"(use {shown})")


def check_terminals(terminals_c: float | None, profile: Any) -> str | None:
    """Message when a terminal rating is not a temperature column of the profile's table.

    The terminal limit is read from that column; None ("auto") is always fine.
    """
    if terminals_c is None:
        return None
    columns = tuple(float(t) for t in profile.column_temps_c)
    if any(abs(terminals_c - t) < 1e-6 for t in columns):
        return None
    shown = ", ".join(f"\"{t:g} degC\"" for t in columns)
    return (f"the {profile.name} profile has no {terminals_c:g} degC ampacity column for "
            f"terminals (use {shown} or \"auto\")")


def check_pe_rule(pe_rule: str | None, profile: Any) -> str | None:
    """Message when the profile cannot size the protective conductor by ``pe_rule``.

    The adiabatic equation (IEC 60364-5-54 543.1.2) replaces a table by phase size
    (Table 54.2); the NEC and CEC tables size the EGC by the device, which it cannot
    replace.
    """
    if pe_rule == "adiabatic" and profile.egc_rule != "phase_area":
        return (f"pe_rule = \"adiabatic\" (IEC 60364-5-54 543.1.2) needs a protective "
                f"conductor sized by phase area; the {profile.name} profile sizes it by "
                "the device (use \"table\" or \"auto\")")
    return None


def check_pin(pin: Any, materials: Sequence[str], max_sets: int, profile: Any) -> str | None:
    """Message when a pinned conductor cannot be used under the profile and node settings."""
    from sizer.catalogue import load_catalogue  # the catalogue module sits below this one

    cat = load_catalogue(profile.catalogue)
    try:
        i = cat.index(pin.size)
    except ScenarioError:
        return (f"size {pin.size} is not in the {profile.name} profile's {cat.name} "
                f"catalogue ({cat.sizes[0]} .. {cat.sizes[-1]})")
    try:
        profile.size_index(cat.sizes[i])
    except ScenarioError:
        return f"the {profile.name} profile has no ampacity for {pin.size}"
    r = cat.r20_ohm_per_m(pin.material)[i]
    if not math.isfinite(float(r)):
        return f"{pin.size} is not made in {pin.material}"
    if pin.material not in materials:
        return (f"pins {pin.material} but the node allows only {', '.join(materials)} "
                "(add it to the node's materials)")
    if pin.sets > max_sets:
        return f"pins {pin.sets} parallel sets but max_sets is {max_sets}"
    return None
