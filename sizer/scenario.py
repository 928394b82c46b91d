"""Read a scenario file into the model, checking every field; write a node schedule as CSV.

A scenario is one TOML file: ``[project]``, ``[economics]``, optional ``[prices]``,
``[defaults]`` (inherited by every node), ``[source]`` and one ``[[node]]`` table per
node, each with optional ``transformer = {...}`` and ``motor = {...}`` tables. Every key,
its reader, unit, default and bounds are defined once in ``sizer.fields``; the key
reference ``scenarios/README.md`` is generated from it.

A CSV schedule has one row per node and the node keys as column names; the nested
tables are flattened into dotted columns (``transformer.rating``, ``motor.kw``, ...). A
cell left empty is "not given"; lines starting with ``#`` are comments (quote an id
that starts with ``#``); commas, semicolons or tabs separate cells (whichever the
header line uses). Nodes from ``[[node]]`` tables come first, then the schedule's rows;
``Scenario.nodes`` holds them parents first, in that order wherever the tree allows.
Giving ``load_scenario`` the CSV file itself works too: the head is the ``.toml`` beside
it whose ``schedule`` names that CSV. ``write_schedule_csv`` writes the nodes of a
scenario in this form, every field spelled out in SI units (inherited values included),
so the file reads back to equal nodes.

Quantities are strings with units (``"120 ft"``, ``"480 V"``, ``"20 A"``, ``"30 degC"``);
plain numbers only where the key names the unit or there is none (see the reference).
Keys whose default is "auto" (``terminals``, ``grouping``, ``clearing_time``, ...) let
the rule profile decide. Every problem is reported as one line
``FILE: node 'X', field 'f': what is wrong``; all are collected and raised together as
``ScenarioErrors`` (one error alone is raised as itself).
"""

from __future__ import annotations

import csv
import dataclasses
import functools
import io
import os
import re
import tokenize
import tomllib
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

from sizer import fields, toml_parse
from sizer.errors import ScenarioError
from sizer.model import (
    CableSettings,
    Economics,
    Motor,
    Node,
    Operating,
    Prices,
    Scenario,
    Source,
    Transformer,
)
from sizer.readers import (
    HP_W,
    Reader,
    read_fraction,
    read_motor_power,
    read_number,
    read_text,
    show,
)
from sizer.units import CURRENCIES
from sizer.validation import (
    TREE_CHECKS,
    NodeDraft,
    Report,
    build_tree,
    check_insulation,
    check_node_count,
    check_pe_rule,
    check_pin,
    check_terminals,
    check_voltage_levels,
    suggest,
    supply_bus,
)

__all__ = ["NODE_KEYS", "SCHEDULE_COLUMNS", "load_scenario", "write_schedule_csv"]

TOP_KEYS = ("project", "economics", "prices", "defaults", "source", "node")
PROJECT_KEYS = fields.keys("project")
ECONOMICS_KEYS = fields.keys("economics")
PRICES_KEYS = fields.keys("prices")
DEFAULTS_KEYS = fields.keys("defaults")
# The settings a CableSettings holds (the rest of [defaults] is per node).
CABLE_KEYS = tuple(f.name for f in fields.in_table("defaults")
                   if f.attr in {x.name for x in dataclasses.fields(CableSettings)})
SOURCE_KEYS = fields.keys("source")
TRANSFORMER_KEYS = fields.keys("transformer")
MOTOR_KEYS = fields.keys("motor")
NODE_KEYS = fields.keys("node")
SCHEDULE_COLUMNS = fields.schedule_columns()


# --- reading a table -----------------------------------------------------------------------


@functools.cache
def _key_set(known: tuple[str, ...]) -> frozenset[str]:
    return frozenset(known)


class _Fields:
    """The fields of one table or CSV row: read each, report each bad one, carry on."""

    def __init__(self, raw: Mapping[str, Any], report: Report, *, file: str,
                 node: str | None = None, prefix: str = "", text: bool = False,
                 bad: set[str] | None = None) -> None:
        self.raw = raw
        self.report = report
        self.file = file
        self.node = node
        self.prefix = prefix
        self.text = text
        self.bad: set[str] = bad if bad is not None else set()
        self.suggested: set[str] = set()   # known keys a misspelt key was taken for

    def unknown_keys(self, known: tuple[str, ...], what: str = "key") -> None:
        """Report every key that is not in ``known``, with the closest known one."""
        known_set = _key_set(known)
        for key in self.raw:
            if key not in known_set:
                hint = suggest(str(key), known)
                # A quoted TOML key may hold a line break: escape it, one error one line.
                name = str(key) if str(key).isprintable() else repr(str(key))[1:-1]
                self.report.add(f"unknown {what} '{name}'{hint}", node=self.node,
                                field=self.prefix + name, file=self.file)
                self.bad.add(str(key))
                if hint:   # later checks keep quiet about the key it was meant to be
                    meant = hint.split("'")[1]
                    self.suggested.add(meant)
                    self.bad.add(meant)

    def missing(self, key: str) -> bool:
        """True when ``key`` is absent and not already reported as misspelt."""
        return key not in self.raw and key not in self.suggested

    def get(self, key: str, read: Reader, default: Any = None) -> Any:
        """The parsed value, ``default`` when absent, None when bad (reported)."""
        if key not in self.raw:
            return default
        try:
            return read(self.raw[key], self.text)
        except ScenarioError as exc:
            message = exc.message
        except (ValueError, TypeError, ArithmeticError, AttributeError, KeyError,
                tokenize.TokenError) as exc:
            # A value pint or a parser chokes on: still one clear line, never a traceback.
            message = f"cannot read {show(self.raw[key])} ({type(exc).__name__})"
        self.report.add(message, node=self.node, field=self.prefix + key, file=self.file)
        self.bad.add(key)
        return None

    def require(self, key: str, read: Reader, hint: str = "") -> Any:
        """Like get, but report a missing key."""
        if key not in self.raw:
            if key not in self.suggested:   # a misspelling of it is reported already
                self.report.add(f"missing{hint}", node=self.node, field=self.prefix + key,
                                file=self.file)
            self.bad.add(key)
            return None
        return self.get(key, read)

    def table(self, key: str) -> Mapping[str, Any] | None:
        """A sub-table, reporting a value that is not one."""
        value = self.raw.get(key)
        if value is None or isinstance(value, dict):
            return value
        self.report.add(f"must be a table such as [{key}] or {{ ... }}, got {show(value)}",
                        node=self.node, field=self.prefix + key, file=self.file)
        self.bad.add(key)
        return None

    def build(self, factory: Callable[..., Any], **kwargs: Any) -> Any:
        """Construct a model object; its own checks are reported here (None when bad)."""
        try:
            return factory(**kwargs)
        except ScenarioError as exc:
            fld = exc.field or ""
            if self.prefix and not fld.startswith(self.prefix):
                fld = self.prefix + fld
            self.report.add(exc.message, node=self.node, field=fld or None, file=self.file)
            self.bad.add((fld or "?").split(".")[0])
            return None


# --- the file as a whole -----------------------------------------------------------------------


def load_scenario(path: str | os.PathLike[str]) -> Scenario:
    """Read and check a scenario (.toml, or a .csv schedule with its head .toml).

    Raises ScenarioError (one problem) or ScenarioErrors (several, all collected).
    """
    given = Path(path)
    if given.suffix.lower() == ".csv":
        head = _find_head(given)
        return _load_file(head, file=str(head), shown=str(given))
    return _load_file(given, file=str(given), shown=str(given))


def _read_text_file(path: Path, shown: str) -> str:
    try:
        raw = path.read_bytes()
    except FileNotFoundError as exc:
        raise ScenarioError("cannot read the file: no such file", file=shown) from exc
    except IsADirectoryError as exc:
        raise ScenarioError("is a folder, not a scenario file", file=shown) from exc
    except OSError as exc:
        raise ScenarioError(f"cannot read the file: {exc.strerror}", file=shown) from exc
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise ScenarioError(f"is not UTF-8 text (byte {exc.start})", file=shown) from exc


def _read_toml(path: Path, shown: str) -> dict[str, Any]:
    text = _read_text_file(path, shown)
    if not text.strip():
        raise ScenarioError("the file is empty: a scenario needs [project], [economics], "
                            "[source] and [[node]] tables", file=shown)
    try:
        data = toml_parse.loads(text)   # the compiled parser; tomllib's errors
    except tomllib.TOMLDecodeError as exc:
        raise ScenarioError(f"is not valid TOML: {exc}", file=shown) from exc
    except ValueError as exc:  # e.g. an integer past Python's 4300-digit conversion limit
        raise ScenarioError(f"has a value that cannot be read: {str(exc).split(';')[0]}",
                            file=shown) from None
    except RecursionError:  # tomllib recurses once per level of nested arrays or tables
        raise ScenarioError("is nested too deeply to read (arrays or tables inside one "
                            "another hundreds of levels deep); a scenario needs a few",
                            file=shown) from None
    if not data:
        raise ScenarioError("has no scenario in it: a scenario needs [project], "
                            "[economics], [source] and [[node]] tables", file=shown)
    return data


def _find_head(csv_path: Path) -> Path:
    """The .toml beside a CSV schedule whose [project] schedule names it."""
    shown = str(csv_path)
    if not csv_path.is_file():
        raise ScenarioError("cannot read the file: no such file", file=shown)
    target = csv_path.resolve()
    heads = []
    for candidate in sorted(csv_path.parent.glob("*.toml")):
        try:
            data = toml_parse.loads(candidate.read_text(encoding="utf-8-sig"))
        except (OSError, ValueError, RecursionError):   # TOMLDecodeError, UnicodeDecodeError
            continue  # not a head of this schedule
        project = data.get("project")
        schedule = project.get("schedule") if isinstance(project, dict) else None
        if isinstance(schedule, str) and (candidate.parent / schedule).resolve() == target:
            heads.append(candidate)
    if len(heads) == 1:
        return heads[0]
    if heads:
        names = ", ".join(h.name for h in heads)
        raise ScenarioError(f"several head files name this schedule ({names}); load the "
                            "one you mean", file=shown)
    raise ScenarioError("a CSV schedule needs a head file: a .toml beside it with "
                        f"[project] (rules, currency, schedule = \"{csv_path.name}\"), "
                        "[economics] and [source]", file=shown)


def _load_file(path: Path, file: str, shown: str) -> Scenario:
    """Read the head TOML at ``path`` (errors name ``file``); the scenario is ``shown``."""
    data = _read_toml(path, file)
    report = Report(file)
    top = _Fields(data, report, file=file)
    top.unknown_keys(TOP_KEYS, "table")

    project = top.table("project")
    title, rules, currency, schedule = path.stem, None, None, None
    if project is None:
        if "project" not in data:
            report.add("missing [project] table (title, rules, currency)", field="project")
    else:
        pf = _Fields(project, report, file=file, prefix="project.")
        pf.unknown_keys(PROJECT_KEYS)
        title = pf.get("title", read_text, default=path.stem) or path.stem
        rules = pf.require("rules", read_text, " (rules = \"nec\", \"cec\" or \"iec\")")
        currency = pf.require("currency", read_text, " (e.g. currency = \"USD\")")
        schedule = pf.get("schedule", read_text)

    profile = _profile(rules, report, file)
    if currency is not None and currency.upper() not in CURRENCIES:
        report.add(f"unknown currency '{currency}'{suggest(currency.upper(), CURRENCIES)}",
                   field="project.currency")
        currency = None
    currency = currency.upper() if currency else None

    economics = _economics(top, currency, report, file)
    prices = _prices(top, currency, path, report, file)
    defaults = _defaults(top, report, file)
    source, source_id = _source(top, report, file)

    raw_nodes = _raw_nodes(top, report, file)
    schedule_failed = False
    if schedule is not None:
        found = len(report.errors)
        raw_nodes += _read_schedule(path.parent / schedule, schedule, report)
        schedule_failed = len(report.errors) > found
    check_node_count(len(raw_nodes), report)
    # No nodes at all, or an empty list (node = [], a schedule with a header only) that
    # no other error explains (an unreadable schedule is its own error).
    if not raw_nodes and not schedule_failed and ("node" not in data or not report.errors):
        report.add("has no nodes: add [[node]] tables (or a schedule under [project])",
                   field="node")
    drafts = [_read_node(raw, i, nfile, where, text, report)
              for i, (raw, nfile, where, text) in enumerate(raw_nodes)]

    tree = build_tree(drafts, source_id, report) if source_id else None
    if tree is not None and source is not None:
        check_voltage_levels(tree, supply_bus(source.voltage_v, source.phases, source.id),
                             report)
        for _name, check in TREE_CHECKS:
            check(tree, report)
    nodes = _build_nodes(tree, defaults, profile, report) if tree is not None else ()
    report.raise_if_any()
    assert economics is not None and source is not None and rules is not None
    inputs = (str(path),) + ((str(path.parent / schedule),) if schedule is not None else ())
    return Scenario(file=shown, title=title, rules=rules.lower(), currency=currency or "",
                    economics=economics, prices=prices, source=source, nodes=nodes,
                    inputs=inputs)


def _profile(rules: str | None, report: Report, file: str) -> Any:
    if rules is None:
        return None
    from sizer.rules import PROFILES, load_profile

    name = rules.lower()
    if name not in PROFILES:
        report.add(f"unknown rule profile '{rules}'{suggest(name, PROFILES)} "
                   f"(use {', '.join(PROFILES)})", field="project.rules")
        return None
    try:
        return load_profile(name)
    except ScenarioError as exc:
        report.add_error(exc, field="project.rules")
        return None


def _economics(top: _Fields, currency: str | None, report: Report,
               file: str) -> Economics | None:
    raw = top.table("economics")
    if raw is None:
        if "economics" not in top.raw:
            report.add("missing [economics] table (energy_price, discount_rate, lifetime, "
                       "load_factor)", field="economics")
        return None
    f = _Fields(raw, report, file=file, prefix="economics.")
    f.unknown_keys(ECONOMICS_KEYS)
    if currency is None:  # prices cannot be read without a currency; already reported
        return None

    values = {}
    for fld in fields.in_table("economics"):
        read = fld.reader(currency)
        values[fld.attr] = (f.require(fld.name, read, fld.hint) if fld.required
                            else f.get(fld.name, read, fld.default))
    if f.bad or any(values[k] is None for k in values if k != "loss_load_factor"):
        return None
    lf, llf = values["load_factor"], values["loss_load_factor"]
    # Any load curve has LF² <= loss load factor <= LF (the economics module refuses others).
    if llf is not None and not lf * lf * (1 - 1e-9) <= llf <= lf * (1 + 1e-9):
        f.report.add(f"{llf:g} is impossible with load_factor {lf:g}: any load curve has "
                     f"LF² = {lf * lf:.4g} ≤ loss load factor ≤ LF = {lf:g}",
                     field="economics.loss_load_factor", file=file)
        return None
    return f.build(Economics, **values)


def _prices(top: _Fields, currency: str | None, path: Path, report: Report,
            file: str) -> Prices:
    raw = top.table("prices")
    if raw is None:
        return Prices()
    f = _Fields(raw, report, file=file, prefix="prices.")
    f.unknown_keys(PRICES_KEYS)
    catalogue = f.get("catalogue", read_text)
    catalogue_path = None
    if catalogue is not None:
        # Beside the scenario if it is there; otherwise as written (the price loader
        # looks in the working folder and then in the bundled costdata/).
        beside = path.parent / catalogue
        try:
            catalogue_path = beside if beside.is_file() else Path(catalogue)
        except OSError as exc:   # e.g. a name longer than the file system allows
            report.add(f"cannot be a price list file: {exc.strerror}",
                       field="prices.catalogue", file=file)
            f.bad.add("catalogue")
    if currency is None:
        return Prices(catalogue_path)

    copper = f.get("copper", fields.field("prices", "copper").reader(currency))
    aluminium_field = fields.field("prices", "aluminium")
    aluminium = f.get("aluminium", aluminium_field.reader(currency))
    if aluminium is None:
        aluminium = f.get("aluminum", aluminium_field.reader(currency))
    return Prices(catalogue_path, copper, aluminium)


# The cable settings a node inherits from [defaults]: read the same way in both places.
_DEFAULT_READERS = fields.readers("defaults")


@dataclasses.dataclass
class _Defaults:
    """The values of [defaults] (registry defaults where not given) and its bad keys."""

    values: dict[str, Any]
    bad: set[str]


def _defaults(top: _Fields, report: Report, file: str) -> _Defaults:
    raw = top.table("defaults") or {}
    f = _Fields(raw, report, file=file, prefix="defaults.")
    f.unknown_keys(DEFAULTS_KEYS)
    # Not given: the registry's defaults; terminals, grouping and clearing time None
    # (the rule profile decides).
    values: dict[str, Any] = {fld.name: fld.default for fld in fields.in_table("defaults")}
    for key, read in _DEFAULT_READERS.items():
        if key in raw:
            value = f.get(key, read)
            if key not in f.bad:
                values[key] = value
    return _Defaults(values, f.bad)


def _source(top: _Fields, report: Report, file: str) -> tuple[Source | None, str | None]:
    """The source, and its id (known even when another of its fields is bad)."""
    raw = top.raw.get("source")
    if isinstance(raw, list):
        found = (f"found {len(raw)}" if len(raw) != 1 else
                 "found a list of one ([[source]] or source = [...])")
        report.add(f"exactly one source is allowed, {found} (write one [source] table)",
                   field="source")
        return None, None
    table = top.table("source")
    if table is None:
        if raw is None:
            report.add("missing [source] table (id, voltage, phases): exactly one source "
                       "feeds the tree", field="source")
        return None, None
    f = _Fields(table, report, file=file, prefix="source.")
    f.unknown_keys(SOURCE_KEYS)
    sid = f.require("id", read_text)
    f.node = sid
    values = {}
    for fld in fields.in_table("source")[1:]:
        values[fld.attr] = (f.require(fld.name, fld.reader(), fld.hint) if fld.required
                            else f.get(fld.name, fld.reader(), fld.default))
    if f.bad:
        return None, sid
    return f.build(Source, id=sid, **values), sid


RawNode = tuple[dict[str, Any], str, str, bool]   # fields, file, where, fields are text


def _ordinal(n: int) -> str:
    suffix = "th" if 10 <= n % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"{n}{suffix}"


def _raw_nodes(top: _Fields, report: Report, file: str) -> list[RawNode]:
    raw = top.raw.get("node")
    if raw is None:
        return []
    if isinstance(raw, dict):
        report.add("write each node as [[node]] (double brackets: a list of tables)",
                   field="node")
        return []
    if not isinstance(raw, list):
        report.add(f"must be [[node]] tables, got {show(raw)}", field="node")
        return []
    check_node_count(len(raw), report)
    out: list[RawNode] = []
    for i, item in enumerate(raw, start=1):
        where = f"the {_ordinal(i)} [[node]]"
        if not isinstance(item, dict):
            report.add(f"{where} is not a table", field="node")
            continue
        out.append((item, file, where, False))
    return out


def _read_schedule(path: Path, written: str, report: Report) -> list[RawNode]:
    """The rows of a CSV schedule as raw node tables (cells as text)."""
    if path.suffix.lower() != ".csv":
        report.add(f"must name a .csv file, got {written!r}", field="project.schedule")
        return []
    file = str(path)
    try:
        text = _read_text_file(path, file)
    except ScenarioError as exc:
        report.add_error(exc, field="project.schedule", file=report.file)
        return []
    # Comment lines become blank lines, so line numbers still match the file. Only CR/LF
    # end a line: str.splitlines would also split inside a cell at U+2028, U+0085, ...
    lines = ["" if line.lstrip().startswith("#") else line
             for line in re.split(r"\r\n|\r|\n", text)]
    header_line = next((line for line in lines if line.strip()), "")
    delimiter = max((",", ";", "\t"), key=header_line.count)
    reader = csv.reader(io.StringIO("\n".join(lines)), delimiter=delimiter)
    header: list[str] | None = None
    known: list[str | None] = []
    out: list[RawNode] = []
    for cells in _csv_rows(reader, report, file):
        if not any(c.strip() for c in cells):
            continue
        if header is None:
            header = [c.strip().lower() for c in cells]
            f = _Fields(dict.fromkeys(header), report, file=file)
            f.unknown_keys(SCHEDULE_COLUMNS, "column")
            for name in sorted({c for c in header if header.count(c) > 1}):
                report.add("the column appears twice in the header", field=name, file=file)
            if "id" not in header:
                report.add("the schedule needs an 'id' column", field="id", file=file)
                return []
            known = [c if c in SCHEDULE_COLUMNS else None for c in header]
            continue
        where = f"line {reader.line_num}"
        if len(cells) > len(header):
            report.add(f"{where} has {len(cells)} cells but the header has {len(header)}",
                       file=file)
            continue
        check_node_count(len(out) + 1, report)
        row: dict[str, Any] = {}
        for col, cell in zip(known, cells, strict=False):
            if col is None or not cell.strip():
                continue
            if "." in col:
                table, key = col.split(".", 1)
                row.setdefault(table, {})[key] = _unneutral(cell.strip())
            else:
                row[col] = _unneutral(cell.strip())
        out.append((row, file, where, True))
    return out


def _csv_rows(reader: Any, report: Report, file: str) -> Any:
    """The reader's rows, until one the csv module cannot read (a cell over its limit).

    That row ends the schedule with one error instead of a traceback.
    """
    try:
        yield from reader
    except csv.Error as exc:
        report.add(f"line {reader.line_num} cannot be read as CSV: {exc}", file=file)


_NODE_READERS = {k: v for k, v in fields.readers("node").items() if k not in ("id", "parent")}
_NODE_KEY_SET = frozenset(NODE_KEYS)
_NODE_ORDER = {k: i for i, k in enumerate(_NODE_READERS)}   # fields are read in this order


def _read_node(raw: Mapping[str, Any], position: int, file: str, where: str, text: bool,
               report: Report) -> NodeDraft:
    f = _Fields(raw, report, file=file, text=text)
    node_id = f.get("id", read_text)
    f.node = node_id
    f.unknown_keys(NODE_KEYS)
    if f.missing("id"):
        report.add(f"{where} has no id", field="id", file=file)
    parent = f.get("parent", read_text)
    draft = NodeDraft(file=file, where=where, position=position, id=node_id, parent=parent,
                      given=_NODE_KEY_SET.intersection(raw), bad=f.bad)
    if "id" in f.bad or "id" not in raw:
        draft.id = None
    if f.missing("length"):
        report.add("missing: every node's cable run needs a length (e.g. \"120 ft\")",
                   node=node_id, field="length", file=file)
    if "length" not in raw:
        f.bad.add("length")
    # The given fields only, in the registry's order (the order errors are reported in).
    for key in sorted((k for k in raw if k in _NODE_ORDER), key=_NODE_ORDER.__getitem__):
        value = f.get(key, _NODE_READERS[key])
        if key not in f.bad:
            draft.values[key] = value
    tx_raw = f.table("transformer")
    if tx_raw is not None:
        draft.values["transformer"] = _read_transformer(tx_raw, f)
        # Not given: the secondary has the primary's phases (settled with the voltages).
        draft.values["transformer_phases_given"] = "secondary_phases" in tx_raw
    motor_raw = f.table("motor")
    if motor_raw is not None:
        draft.values["motor"] = _read_motor(motor_raw, f)
    for key in ("transformer", "motor"):
        if key in draft.values and draft.values[key] is None:
            del draft.values[key]
            f.bad.add(key)
    return draft


def _sub(f: _Fields, raw: Mapping[str, Any], name: str) -> _Fields:
    return _Fields(raw, f.report, file=f.file, node=f.node, prefix=f"{name}.", text=f.text)


def _read_transformer(raw: Mapping[str, Any], parent: _Fields) -> Transformer | None:
    f = _sub(parent, raw, "transformer")
    f.unknown_keys(TRANSFORMER_KEYS)
    values = {}
    for fld in fields.in_table("transformer"):
        values[fld.attr] = (f.require(fld.name, fld.reader(), fld.hint) if fld.required
                            else f.get(fld.name, fld.reader(), fld.default))
    if f.bad:
        return None
    return f.build(Transformer, **values)


def _read_motor(raw: Mapping[str, Any], parent: _Fields) -> Motor | None:
    f = _sub(parent, raw, "motor")
    f.unknown_keys(MOTOR_KEYS)
    ratings = [k for k in ("kw", "hp", "power") if k in raw]
    if len(ratings) != 1:
        found = ", ".join(ratings) if ratings else "none"
        f.report.add(f"give exactly one motor rating: kw = 15, hp = 20 or power = \"15 kW\" "
                     f"(found {found})", node=f.node, field="motor", file=f.file)
        return None
    key = ratings[0]
    if key == "power":
        power = f.get("power", read_motor_power)
    else:
        number = f.get(key, read_number)
        power = None if number is None else number * (1000.0 if key == "kw" else HP_W)
        if power is not None and not power > 0:
            f.report.add(f"must be a positive rating, got {show(raw[key])}", node=f.node,
                         field=f"motor.{key}", file=f.file)
            return None
    start_multiple = f.get("start_multiple", read_number,
                           fields.field("motor", "start_multiple").default)
    start_pf = f.get("start_pf", read_fraction, fields.field("motor", "start_pf").default)
    fault_multiple = f.get("fault_multiple", read_number, None)
    if f.bad or power is None:
        return None
    return f.build(Motor, power_w=power, start_multiple=start_multiple, start_pf=start_pf,
                   fault_multiple=fault_multiple)


# --- from drafts to nodes --------------------------------------------------------------------


def _build_nodes(tree: Any, given: _Defaults, profile: Any,
                 report: Report) -> tuple[Node, ...]:
    """Nodes parents first, with inherited settings; profile checks on the way."""
    defaults = given.values
    if profile is not None and "insulation" not in given.bad:
        message = check_insulation(defaults["insulation"], profile)
        if message:
            report.add(message, field="defaults.insulation")
            given.bad.add("insulation")
    if profile is not None and "terminals" not in given.bad:
        message = check_terminals(defaults["terminals"], profile)
        if message:
            report.add(message, field="defaults.terminals")
            given.bad.add("terminals")
    if profile is not None and "pe_rule" not in given.bad:
        message = check_pe_rule(defaults["pe_rule"], profile)
        if message:
            report.add(message, field="defaults.pe_rule")
            given.bad.add("pe_rule")
    settings_cache: dict[tuple[Any, ...], CableSettings] = {}
    nodes: list[Node] = []
    # Most nodes give no cable setting or load profile of their own: they share the
    # objects built from [defaults] (frozen, so sharing is safe).
    default_cable_key = tuple(defaults[k] for k in CABLE_KEYS)
    shared_operating: list[Operating] = []
    for p in tree.order:
        d: NodeDraft = tree.drafts[p]
        v = d.values
        if _CABLE_KEY_SET.isdisjoint(v):
            key = default_cable_key
            cable_kw = None
        else:
            cable_kw = {k: v.get(k, defaults[k]) for k in CABLE_KEYS}
            key = tuple(cable_kw.values())
        cable = settings_cache.get(key)
        if cable is None:
            if cable_kw is None:
                cable_kw = dict(zip(CABLE_KEYS, key, strict=True))
            cable = CableSettings(
                materials=cable_kw["materials"], insulation_c=cable_kw["insulation"],
                terminals_c=cable_kw["terminals"], ambient_c=cable_kw["ambient"],
                installation=cable_kw["installation"], grouping=cable_kw["grouping"],
                max_sets=cable_kw["max_sets"],
                oversize_termination=cable_kw["oversize_termination"],
                min_parallel_size=cable_kw["min_parallel_size"],
                soil_resistivity_k_m_per_w=cable_kw["soil_resistivity"],
                depth_m=cable_kw["depth"],
                sets_in_one_raceway=cable_kw["sets_in_one_raceway"])
            settings_cache[key] = cable
        if profile is not None:
            if "insulation" in v:
                message = check_insulation(v["insulation"], profile)
                if message:
                    report.add(message, node=d.id, field="insulation", file=d.file)
            if "terminals" in v:
                message = check_terminals(v["terminals"], profile)
                if message:
                    report.add(message, node=d.id, field="terminals", file=d.file)
            if "pe_rule" in v:
                message = check_pe_rule(v["pe_rule"], profile)
                if message:
                    report.add(message, node=d.id, field="pe_rule", file=d.file)
            for size_key in ("load_terminal_max", "min_parallel_size"):
                size = v.get(size_key, defaults.get(size_key))
                if size is not None and size not in profile.sizes:
                    report.add(f"{size} is not a size of rule profile '{profile.name}' "
                               f"({profile.sizes[0]} … {profile.sizes[-1]})", node=d.id,
                               field=size_key, file=d.file)
                    d.bad.add(size_key)
            pin = v.get("conductor")
            if pin is not None and not {"materials", "max_sets"} & d.bad:
                message = check_pin(pin, cable.materials, cable.max_sets, profile)
                if message:
                    report.add(message, node=d.id, field="conductor", file=d.file)
        if d.bad or "voltage_v" not in v:
            continue
        motor = v.get("motor")
        try:
            nodes.append(Node(
                id=d.id or "", parent=d.parent or "", length_m=v["length"],
                voltage_v=v["voltage_v"], phases=v["phases_n"], cable=cable,
                power_factor=v.get("power_factor", defaults["power_factor"]),
                load=v.get("load"),
                # Motors are continuous loads (NEC 430.22: 125 % of full-load current).
                continuous=v.get("continuous", motor is not None),
                ocpd_a=v.get("ocpd"), demand_factor=v.get("demand_factor", 1.0),
                pin=v.get("conductor"), transformer=v.get("transformer"), motor=motor,
                clearing_time_s=v.get("clearing_time", defaults["clearing_time"]),
                neutral=v.get("neutral"), description=v.get("description", ""),
                nonlinear=v.get("nonlinear", 0.0),
                voltage_assumed=v.get("voltage_assumed", False),
                device_100_percent=v.get("device_100_percent", False),
                phase=v.get("phase"), triplen=v.get("triplen", 0.0),
                spare=v.get("spare", 0.0),
                neutral_size=v.get("neutral_size", defaults["neutral_size"]),
                operating=_operating(v, defaults, shared_operating),
                route=v.get("route", ""), load_terminal_max=v.get("load_terminal_max", ""),
                device=v.get("device", defaults["device"]),
                trip_multiple=v.get("trip_multiple", defaults["trip_multiple"]),
                insulation_type=v.get("insulation_type", defaults["insulation_type"]),
                let_through_a2s=v.get("let_through", defaults["let_through"]),
                withstand=v.get("withstand", defaults["withstand"]),
                interrupting_a=v.get("interrupting", defaults["interrupting"]),
                pe_rule=v.get("pe_rule", defaults["pe_rule"]),
                curves=v.get("curves", defaults["curves"]),
            ))
        except ScenarioError as exc:
            report.add_error(exc, node=d.id, file=d.file)
    return tuple(nodes)


# Node keys of how the load runs (sizer.operating) → Operating attributes.
_OPERATING_KEYS = tuple((f.name, f.attr) for f in fields.in_table("node")
                        if f.attr in {x.name for x in dataclasses.fields(Operating)})
_OPERATING_KEY_SET = frozenset(key for key, _name in _OPERATING_KEYS)
_CABLE_KEY_SET = frozenset(CABLE_KEYS)


def _operating(values: Mapping[str, Any], defaults: Mapping[str, Any],
               shared: list[Operating]) -> Operating:
    """How a node's load runs; one shared object for the nodes that give none of it.

    The shared one is kept only once built, so bad defaults are reported on every node
    as before.
    """
    if not _OPERATING_KEY_SET.isdisjoint(values):
        return Operating(**{name: values.get(key, defaults.get(key))
                            for key, name in _OPERATING_KEYS})
    if not shared:
        shared.append(Operating(**{name: defaults.get(key) for key, name in _OPERATING_KEYS}))
    return shared[0]


# --- writing a schedule -----------------------------------------------------------------------


def _num(x: float) -> str:
    """Shortest text that reads back to the same float."""
    return str(int(x)) if float(x).is_integer() and abs(x) < 2**53 else repr(float(x))


_LOAD_UNITS = {"current": "A", "real": "W", "apparent": "VA"}


def _schedule_row(n: Node) -> dict[str, str]:
    c = n.cable
    row = {
        "id": n.id, "parent": n.parent, "description": n.description,
        "length": f"{_num(n.length_m)} m", "voltage": f"{_num(n.voltage_v)} V",
        "phases": str(n.phases),
        "load": f"{_num(n.load.value)} {_LOAD_UNITS[n.load.kind]}" if n.load else "",
        "power_factor": _num(n.power_factor),
        "continuous": "true" if n.continuous else "false",
        "ocpd": f"{_num(n.ocpd_a)} A" if n.ocpd_a is not None else "",
        "demand_factor": "" if n.demand_factor == 1.0 else _num(n.demand_factor),
        "conductor": str(n.pin) if n.pin else "",
        "neutral": "" if n.neutral is None else ("true" if n.neutral else "false"),
        "nonlinear": "" if n.nonlinear == 0.0 else _num(n.nonlinear),
        "device_100_percent": "true" if n.device_100_percent else "",
        "clearing_time": ("auto" if n.clearing_time_s is None
                          else f"{_num(n.clearing_time_s)} s"),
        "device": n.device or "auto",
        "trip_multiple": "auto" if n.trip_multiple is None else _num(n.trip_multiple),
        "insulation_type": n.insulation_type or "auto",
        "let_through": "" if n.let_through_a2s is None else f"{_num(n.let_through_a2s)} A2s",
        "withstand": n.withstand,
        "interrupting": "" if n.interrupting_a is None else f"{_num(n.interrupting_a)} A",
        "pe_rule": n.pe_rule or "auto",
        "curves": ", ".join(n.curves) if n.curves else "auto",
        "materials": ", ".join(c.materials),
        "insulation": f"{_num(c.insulation_c)} degC",
        "terminals": "auto" if c.terminals_c is None else f"{_num(c.terminals_c)} degC",
        "ambient": f"{_num(c.ambient_c)} degC", "installation": c.installation,
        "grouping": "auto" if c.grouping is None else str(c.grouping),
        "max_sets": str(c.max_sets),
        "route": n.route,
        "load_terminal_max": n.load_terminal_max,
        "oversize_termination": c.oversize_termination or "auto",
        "min_parallel_size": c.min_parallel_size or "auto",
        "soil_resistivity": ("auto" if c.soil_resistivity_k_m_per_w is None
                             else f"{_num(c.soil_resistivity_k_m_per_w)} K*m/W"),
        "depth": "auto" if c.depth_m is None else f"{_num(c.depth_m)} m",
        "sets_in_one_raceway": "true" if c.sets_in_one_raceway else "false",
    }
    row["phase"] = n.phase or ""
    row["triplen"] = "" if n.triplen == 0.0 else f"{_num(100 * n.triplen)} %"
    row["spare"] = "" if n.spare == 0.0 else f"{_num(100 * n.spare)} %"
    row["neutral_size"] = ("reduced" if n.neutral_size == 0.0
                           else f"{_num(100 * n.neutral_size)} %")
    op = n.operating
    for key, name in _OPERATING_KEYS:
        value = getattr(op, name)
        row[key] = ("" if value is None else value if isinstance(value, str)
                    else f"{_num(value)} h" if key == "full_load_hours"
                    else f"{_num(100 * value)} %" if key == "load_growth" else _num(value))
    if (t := n.transformer) is not None:
        row |= {"transformer.rating": f"{_num(t.rating_va)} VA",
                "transformer.secondary": f"{_num(t.secondary_v)} V",
                "transformer.impedance": f"{_num(t.impedance_pct)} %",
                "transformer.x_r": _num(t.x_r),
                "transformer.secondary_phases": str(t.secondary_phases),
                "transformer.core_loss": f"{_num(t.core_loss_pct)} %"}
    if (m := n.motor) is not None:
        row |= {"motor.power": f"{_num(m.power_w)} W",
                "motor.start_multiple": _num(m.start_multiple),
                "motor.start_pf": _num(m.start_pf),
                "motor.fault_multiple": ("" if m.fault_multiple is None
                                         else _num(m.fault_multiple))}
    return row


# A leading character a spreadsheet would read as a formula (OWASP CSV injection advice,
# common practice): such a cell is written with one more leading apostrophe, and a cell
# of a schedule read with one apostrophe before such a character loses it, so any text
# survives the round trip.
_FORMULA_CELL = re.compile(r"'*[=+\-@\t\r]")


def _neutral(cell: str) -> str:
    return "'" + cell if _FORMULA_CELL.match(cell) else cell


def _unneutral(cell: str) -> str:
    return cell[1:] if cell.startswith("'") and _FORMULA_CELL.match(cell, 1) else cell


def schedule_csv_text(scenario: Scenario) -> str:
    """The scenario's nodes as CSV schedule text (every field spelled out, SI units).

    Read back through a head .toml naming it, it gives nodes equal to ``scenario.nodes``.
    """
    buf = io.StringIO()
    # Every cell quoted: an id starting with "#" must not read back as a comment.
    writer = csv.DictWriter(buf, fieldnames=SCHEDULE_COLUMNS, restval="",
                            quoting=csv.QUOTE_ALL, lineterminator="\r\n")
    writer.writeheader()
    for node in scenario.nodes:
        writer.writerow({k: _neutral(v) for k, v in _schedule_row(node).items()})
    return buf.getvalue()


def write_schedule_csv(scenario: Scenario, path: str | os.PathLike[str]) -> None:
    """Write the scenario's nodes as a CSV schedule.

    Whole or not at all, and never over one of the files the scenario was read from.
    """
    from sizer.outputs import run_inputs, write_file

    write_file(path, schedule_csv_text(scenario), protect=run_inputs(None, scenario))
