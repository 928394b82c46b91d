"""Fuzzing the scenario reader and the command line (issue 9, item 1).

Hypothesis builds scenarios three ways: structurally valid trees (1-15 nodes: panels,
transformers with 208/240/480/400/600 V secondaries, 1- and 3-phase branches line to
line and line to neutral, loads in A, W, kW, VA, kVA and hp, motors, device ratings,
pins, materials, price lists, unicode and markup in ids and titles, "=cmd" ids, TOML or
a CSV node schedule); broken ones (the same trees with random mutations: wrong units,
missing keys, NaN/inf, huge and tiny numbers, negative values, duplicate ids, cycles,
unknown parents, text for numbers, wrong types, bad pins, corrupted bytes); and extreme
ones (a number pushed to 5e-324 .. 1.8e308, its unit kept, which the reader may accept).
The property, for ``sizer loads``, ``sizer solve --json`` and ``sizer check --json``:

- exit 0 with every invariant of the results document holding (status optimal, or
  compliant for check; no broken rule in ``violations``, only verification findings
  (short-circuit withstand, motor-start dip) for solve; each segment's own drop within
  the profile's feeder/branch limit, every path within the total limit by the linear
  estimate and by the AC load flow; ampacity and device rating at least the design
  current; sizes the trade's names from the profile's catalogue; pins, materials and
  max_sets honoured; totals the sum of the segments), or
- exit 1: status infeasible with a non-empty diagnosis (or, for check, status
  violations with each violation named), or
- exit 2: one line per error on stderr (at most 5 and "... and N more"), each naming
  the file, no traceback, nothing on stdout, and no results file written;
- never an uncaught exception (pytest turns numpy warnings into one) and no temporary
  file left behind.

Issue 19 added, at the end, fuzzing of every command-line option (bounded readers, one
line naming the option) and of the one output writer (planted links, inputs named as
outputs, a full disk at any write or rename, concurrent writers).

Budget. In the "ci" profile (conftest.py, the default) these tests run the example
counts in ``EXAMPLES`` -- 3,430 in all, derandomised, about a minute on the 2-core
machine (the options and writer fuzzing add some 6 s of it).
``HYPOTHESIS_PROFILE=thorough``, the nightly-style run, multiplies every count by the
thorough profile's max_examples / 60 (33x: about 96,000 examples with fresh random
seeds, some 30 minutes)::

    HYPOTHESIS_PROFILE=thorough /work/venv/bin/pytest tests/test_fuzz.py -q

The tests at the end replay, by hand, each bug the fuzzing found (all fixed).
"""

from __future__ import annotations

import contextlib
import copy
import csv
import errno
import io
import json
import math
import os
import re
import tempfile
import traceback
import warnings
from contextlib import redirect_stderr, redirect_stdout
from pathlib import Path
from typing import Any

import pytest
from builders import scenario_text, write_scenario
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from sizer.catalogue import load_catalogue
from sizer.cli import main
from sizer.rules import load_profile
from sizer.safe_text import for_terminal

# --- budget ---------------------------------------------------------------------------------

# Example counts in the "ci" profile; ``thorough`` scales them (see the module docstring).
EXAMPLES = {
    "loads_valid": 400,      # sizer loads (the reader and the design currents)
    "loads_broken": 1200,
    "loads_bytes": 400,
    "solve_valid": 250,      # sizer solve --json (reader, candidates, engines, verify, export)
    "solve_pins": 200,
    "solve_broken": 100,
    "solve_extreme": 200,
    "check_pins": 150,       # sizer check --json
}
_SCALE = max(1, settings.default.max_examples // 60)


def budget(name: str) -> settings:
    """Explicit settings for one fuzz test: its example count, scaled for ``thorough``."""
    return settings(max_examples=EXAMPLES[name] * _SCALE, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow,
                                           HealthCheck.data_too_large,
                                           HealthCheck.filter_too_much])


# --- writing a scenario document as TOML or as a TOML head plus a CSV schedule ---------------

_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")


def toml_string(s: str) -> str:
    """A TOML basic string (control characters and DEL escaped, TOML 1.0 section 2.6)."""
    out = ['"']
    for ch in s:
        if ch == '"':
            out.append('\\"')
        elif ch == "\\":
            out.append("\\\\")
        elif ord(ch) < 32 or ord(ch) == 127:
            out.append(f"\\u{ord(ch):04X}")
        else:
            out.append(ch)
    out.append('"')
    return "".join(out)


def toml_key(k: str) -> str:
    return k if _BARE_KEY.match(k) else toml_string(k)


def toml_value(v: Any) -> str:
    """Any Python value as an inline TOML value."""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return toml_string(v)
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{toml_key(k)} = {toml_value(x)}" for k, x in v.items()) + " }"
    if isinstance(v, list | tuple):
        return "[" + ", ".join(toml_value(x) for x in v) + "]"
    raise TypeError(type(v))


def to_toml(doc: dict[str, Any]) -> str:
    """The document as TOML: plain keys first, then tables, then arrays of tables."""
    plain, tables, arrays = [], [], []
    for k, v in doc.items():
        if isinstance(v, dict):
            tables.append((k, v))
        elif isinstance(v, list) and v and all(isinstance(x, dict) for x in v):
            arrays.append((k, v))
        else:
            plain.append(f"{toml_key(k)} = {toml_value(v)}")
    out = ["\n".join(plain)] if plain else []
    for k, v in tables:
        body = "\n".join(f"{toml_key(a)} = {toml_value(b)}" for a, b in v.items())
        out.append(f"[{toml_key(k)}]\n{body}")
    for k, items in arrays:
        for item in items:
            body = "\n".join(f"{toml_key(a)} = {toml_value(b)}" for a, b in item.items())
            out.append(f"[[{toml_key(k)}]]\n{body}")
    return "\n\n".join(out) + "\n"


def _cell(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, list):
        return ", ".join(_cell(x) for x in v)
    return str(v)


def to_schedule(nodes: list[Any]) -> str:
    """Nodes as a CSV schedule: nested tables flattened to dotted columns, every cell quoted."""
    rows: list[dict[str, str]] = []
    for node in nodes:
        row: dict[str, str] = {}
        if isinstance(node, dict):
            for k, v in node.items():
                if isinstance(v, dict):
                    for a, b in v.items():
                        row[f"{k}.{a}"] = _cell(b)
                else:
                    row[str(k)] = _cell(v)
        rows.append(row)
    columns = list(dict.fromkeys(c for r in rows for c in r)) or ["id"]
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=columns, restval="", quoting=csv.QUOTE_ALL,
                            lineterminator="\n")
    writer.writeheader()
    writer.writerows(rows)
    return buf.getvalue()


def write_case(folder: Path, case: dict[str, Any]) -> Path:
    """Write the case's files into ``folder``; return the path to give the CLI."""
    doc = case["doc"]
    path = folder / "site.toml"
    if case.get("schedule") and isinstance(doc.get("node"), list):
        head = {k: v for k, v in doc.items() if k != "node"}
        project = head.get("project")
        if isinstance(project, dict):
            head["project"] = {**project, "schedule": "circuits.csv"}
        path.write_text(to_toml(head), encoding="utf-8")
        (folder / "circuits.csv").write_text(to_schedule(doc["node"]), encoding="utf-8")
        return path
    path.write_text(to_toml(doc), encoding="utf-8")
    return path


def case_text(case: dict[str, Any]) -> str:
    """The files of a case as text, for a failure message."""
    with tempfile.TemporaryDirectory() as tmp:
        write_case(Path(tmp), case)
        return "\n".join(f"--- {p.name}\n{p.read_text(encoding='utf-8', errors='replace')}"
                         for p in sorted(Path(tmp).iterdir()))


class Shown:
    """A case's files as text, written out only when a failure message needs them."""

    def __init__(self, case: dict[str, Any]) -> None:
        self.case = case

    def __str__(self) -> str:
        return case_text(self.case)

    def __format__(self, spec: str) -> str:
        return format(str(self), spec)


# --- valid scenarios ---------------------------------------------------------------------------

SQRT3 = math.sqrt(3.0)
# Supplies per rule profile (volts, phases): common low-voltage services of each country
# (common practice): 480Y/277, 208Y/120, 120/240 V; 600Y/347 V; 400Y/230, 230 V.
SOURCES = {"nec": [(480, 3), (208, 3), (240, 1)], "cec": [(600, 3), (208, 3)],
           "iec": [(400, 3), (230, 1)]}
CURRENCIES = {"nec": [("USD", None), ("usd", None), ("USD", "costdata/demo-us.csv")],
              "cec": [("USD", None), ("CAD", "demo-ca.csv"), ("CAD", "costdata/demo-ca")],
              "iec": [("EUR", None), ("EUR", "demo-metric.csv")]}
SECONDARIES = (208, 240, 480, 400, 600)
INSTALLATIONS = ("conduit", "steel_conduit", "tray", "buried", "free_air")
PROFILES = {name: load_profile(name) for name in SOURCES}
# Ids and titles a spreadsheet, a browser or a shell would read as code.
NASTY_TEXT = ("=cmd|' /C calc'!A0", "+SUM(A1:A9)", "-2+3", "@SUM(1)", "=1+1",
              "<script>alert(1)</script>", "A&B", "&amp;", "</td><td>", "{{ title }}",
              "%s%n", "${HOME}", "'; DROP TABLE x; --", 'say "hi"', "back\\slash",
              "a,b;c", "#7", "Ω-1", "🔌 panel", "中文", "ÄÖÜ", "null", "NaN", "1e9",
              "\u202eRTL", "x\u2028y", "  padded  ")
_TEXT = st.text(st.characters(blacklist_categories=("Cs", "Cc")), min_size=1, max_size=12)
IDS = st.one_of(st.sampled_from(NASTY_TEXT), _TEXT).map(str.strip).filter(bool)


class Bits:
    """Yes/no choices taken from one drawn integer.

    One draw instead of dozens (draws dominate the generation time), and shrinking
    toward 0 turns every optional field off.
    """

    def __init__(self, draw: Any, width: int = 60) -> None:
        self.value = draw(st.integers(0, 2**width - 1))

    def take(self, rarity: int = 1) -> bool:
        """True with probability 2**-rarity."""
        mask = (1 << rarity) - 1
        hit = (self.value & mask) == mask
        self.value >>= rarity
        return hit


def _num(draw: Any, lo: float, hi: float, places: int = 2) -> float:
    """A number in [lo, hi] with ``places`` decimals (integers draw faster than floats)."""
    k = 10**places
    return draw(st.integers(round(lo * k), round(hi * k))) / k


def _voltage_text(bits: Bits, volts: float) -> str:
    if volts >= 400 and bits.take(2):
        return f"{volts / 1000:g} kV"
    return f"{volts:g} V"


Bus = tuple[float, int, float | None]   # volts, phases, line-to-neutral volts or None


def _supply(volts: float, phases: int) -> Bus:
    """A source or transformer secondary: wye (V/√3) or centre-tapped (V/2) neutral."""
    return (volts, phases, volts / SQRT3 if phases == 3 else volts / 2)


def _circuit(draw: Any, bits: Bits, bus: Bus, node: dict[str, Any]) -> tuple[float, int, Bus]:
    """Put the node on ``bus``: 3-phase, 1-phase line to line or line to neutral.

    Writes voltage/phases into ``node`` (left out where inherited); returns the circuit's
    volts and phases and the bus at the node's far end (before any transformer).
    """
    volts, phases, neutral = bus
    options = (["3ph", "3ph"] if phases == 3 else []) + ["ll"] + (["ln"] if neutral else [])
    how = draw(st.sampled_from(options))
    if how == "3ph":
        if bits.take():
            node["voltage"] = _voltage_text(bits, volts)
        if bits.take():
            node["phases"] = 3
        return volts, 3, (volts, 3, volts / SQRT3)
    if how == "ll":
        if phases == 3 or bits.take():
            node["phases"] = 1
        if bits.take():
            node["voltage"] = _voltage_text(bits, volts)
        return volts, 1, (volts, 1, neutral)
    assert neutral is not None
    node["phases"] = 1
    node["voltage"] = f"{round(neutral)} V"
    return float(round(neutral)), 1, (float(round(neutral)), 1, None)


LOAD_UNITS = ("A", "kW", "kVA", "hp", "W", "VA")


def _leaf(draw: Any, bits: Bits, node: dict[str, Any], volts: float, phases: int,
          ratings: tuple[float, ...]) -> None:
    """A leaf's load (A, W, kW, VA, kVA or hp), motor and device rating."""
    what = draw(st.sampled_from(("load", "load", "load", "motor", "ocpd")))
    kv = volts * (SQRT3 if phases == 3 else 1.0)
    pf = _num(draw, 0.3, 1.0) if bits.take(2) else None
    if pf is not None:
        node["power_factor"] = pf
    current = 0.0
    if what == "load" or (what == "motor" and bits.take()):
        amps = _num(draw, 0.2, 80.0)
        unit = draw(st.sampled_from(LOAD_UNITS))
        real = unit in ("kW", "hp", "W")
        s_va = amps * kv
        value = {"A": amps, "kW": s_va * 0.9 / 1e3, "kVA": s_va / 1e3,
                 "hp": s_va * 0.9 / 745.7, "W": s_va * 0.9, "VA": s_va}[unit]
        node["load"] = f"{value:.4g} {unit}"
        # A real power at a power factor below the 0.9 assumed here draws more current.
        current = amps * (0.9 / min(pf or 0.5, 0.9) if real else 1.0) * 1.01
    if what == "motor":
        key = draw(st.sampled_from(("hp", "kw", "power")))
        size = _num(draw, 0.5, 20.0, 1)
        node["motor"] = {key: f"{size:g} kW" if key == "power" else size}
        if bits.take():
            node["motor"]["start_multiple"] = _num(draw, 1.0, 8.0, 1)
        if bits.take():
            node["motor"]["start_pf"] = _num(draw, 0.1, 1.0)
    if what == "ocpd":
        node["ocpd"] = f"{draw(st.sampled_from((15, 20, 30, 60, 100, 200)))} A"
    elif bits.take(2) and (what == "load" or "load" in node):
        # A device at or above the load's current (below it is a reader error: exit 2).
        fits = [r for r in ratings if r >= current] or [ratings[-1]]
        node["ocpd"] = f"{draw(st.sampled_from(fits[:4])):g} A"
    if bits.take(2):
        node["continuous"] = bits.take()


def _cable_settings(draw: Any, bits: Bits, rules: str, node: dict[str, Any]) -> None:
    """Optional per-node cable settings, all valid."""
    profile = PROFILES[rules]
    if bits.take(3):
        node["materials"] = draw(st.sampled_from((["Cu"], ["Al"], ["Cu", "Al"], "Cu, Al",
                                                  ["copper"], ["aluminum", "Cu"])))
    if bits.take(3):
        node["max_sets"] = draw(st.integers(1, 6))
    if bits.take(3):
        node["installation"] = draw(st.sampled_from(INSTALLATIONS))
    if bits.take(3):
        node["ambient"] = draw(st.sampled_from(("-10 degC", "25 degC", "40 degC", "50 degC",
                                                "86 degF", "313.15 K")))
    if bits.take(3):
        node["insulation"] = f"{draw(st.sampled_from(profile.insulation_temps_c)):g} degC"
    if bits.take(3):
        node["terminals"] = draw(st.sampled_from(
            ("auto", *(f"{t:g} degC" for t in profile.column_temps_c))))
    if bits.take(3):
        node["grouping"] = draw(st.sampled_from(("auto", 1, 2, 3, 4, 6, 9, 12, 30)))
    if bits.take(3):
        node["clearing_time"] = draw(st.sampled_from(("auto", "0.02 s", "0.1 s", "0.5 s",
                                                      "50 ms")))
    if bits.take(3):
        node["neutral"] = bits.take()
    if bits.take(3):
        node["description"] = draw(st.one_of(st.sampled_from(NASTY_TEXT), _TEXT))


def _materials_of(node: dict[str, Any], default: list[str]) -> list[str]:
    m = node.get("materials", default)
    words = re.split(r"[,\s]+", m) if isinstance(m, str) else m
    return sorted({"Cu" if w.lower() in ("cu", "copper") else "Al" for w in words if w})


def _made_in(rules: str, material: str) -> tuple[str, ...]:
    """The profile's sizes the catalogue makes in ``material`` (no 14 AWG Al, say)."""
    cat = load_catalogue(PROFILES[rules].catalogue)
    r = dict(zip(cat.sizes, cat.r20_ohm_per_m(material), strict=True))
    return tuple(s for s in PROFILES[rules].sizes if math.isfinite(float(r.get(s, math.nan))))


PIN_SIZES = {(rules, m): _made_in(rules, m) for rules in SOURCES for m in ("Cu", "Al")}


@st.composite
def valid_cases(draw: Any, max_nodes: int = 15, pins: bool = True) -> dict[str, Any]:
    """A structurally valid scenario document.

    The reader may still refuse one (a transformer loaded past its rating, a device below
    its load): such cases exit 2, which the property allows.
    """
    rules = draw(st.sampled_from(("nec", "nec", "cec", "iec")))
    profile = PROFILES[rules]
    ratings = tuple(float(r) for r in profile.standard_ratings_a)
    bits = Bits(draw)
    # The bundled demo price list of the profile's catalogue fixes the currency.
    currency, price_list = draw(st.sampled_from(CURRENCIES[rules]))
    cur = currency.upper()
    n = draw(st.integers(1, max_nodes))
    ids = draw(st.lists(IDS, min_size=n + 1, max_size=n + 1, unique=True))
    parents = [draw(st.integers(-1, i - 1)) if i else -1 for i in range(n)]
    has_children = {p for p in parents if p >= 0}

    default_materials = draw(st.sampled_from((["Cu"], ["Al"], ["Cu", "Al"])))
    defaults: dict[str, Any] = {"materials": default_materials}
    if bits.take():
        defaults["insulation"] = f"{draw(st.sampled_from(profile.insulation_temps_c)):g} degC"
    if bits.take():
        defaults["max_sets"] = draw(st.integers(1, 6))
    if bits.take():
        defaults["power_factor"] = _num(draw, 0.5, 1.0)
    if bits.take(2):
        defaults["ambient"] = draw(st.sampled_from(("30 degC", "35 degC", "20 degC")))

    src_v, src_ph = draw(st.sampled_from(SOURCES[rules]))
    source: dict[str, Any] = {"id": ids[0], "voltage": _voltage_text(bits, src_v),
                              "phases": src_ph}
    if bits.take():
        source["fault_current"] = f"{_num(draw, 1.0, 65.0, 1):g} kA"
    if bits.take():
        source["x_r"] = _num(draw, 0.5, 15.0, 1)

    economics: dict[str, Any] = {
        "energy_price": f"{_num(draw, 0.0, 0.5, 3):g} {cur}/kWh",
        "discount_rate": f"{_num(draw, 0.0, 15.0, 1):g} %",
        "lifetime": f"{draw(st.integers(1, 50))} year",
        "load_factor": _num(draw, 0.05, 1.0),
    }
    if bits.take():
        economics["escalation"] = f"{_num(draw, 0.0, 5.0, 1):g} %"
    if bits.take():
        economics["demand_charge"] = f"{_num(draw, 0.0, 20.0, 1):g} {cur}/kW"
    if bits.take(2):
        economics["load_growth"] = f"{_num(draw, 0.0, 3.0, 1):g} %"
    if bits.take(2):
        economics["hours"] = draw(st.sampled_from(("8760 h", "4000 h", "365 day")))
    if bits.take(3):   # any load curve has LF² <= loss load factor <= LF
        lf = economics["load_factor"]
        economics["loss_load_factor"] = _num(draw, math.ceil(lf * lf * 100) / 100, lf)

    title = draw(st.one_of(st.sampled_from(NASTY_TEXT), _TEXT.map(str.strip).filter(bool)))
    doc: dict[str, Any] = {
        "project": {"title": title, "rules": rules.upper() if bits.take(3) else rules,
                    "currency": currency},
        "economics": economics,
        "defaults": defaults,
        "source": source,
        "node": [],
    }
    prices: dict[str, Any] = {"catalogue": price_list} if price_list else {}
    if bits.take(2):
        prices["copper"] = f"{_num(draw, 5.0, 15.0):g} {cur}/kg"
    if bits.take(2):
        prices["aluminium"] = f"{_num(draw, 1.5, 4.0):g} {cur}/kg"
    if prices:
        doc["prices"] = prices

    buses: list[Bus] = []
    for i in range(n):
        nb = Bits(draw)
        node: dict[str, Any] = {"id": ids[i + 1],
                                "parent": ids[0] if parents[i] < 0 else ids[parents[i] + 1]}
        bus = _supply(src_v, src_ph) if parents[i] < 0 else buses[parents[i]]
        tenths = draw(st.integers(10, 1200))     # 1.0-120.0 m
        node["length"] = (f"{tenths / 10:g} m" if nb.take() else
                          f"{round(tenths / 10 / 0.3048)} ft" if tenths >= 15 else "5 ft")
        volts, phases, far_bus = _circuit(draw, nb, bus, node)
        if i in has_children:
            if nb.take(2):
                # A transformer: the node's cable feeds its primary.
                sec_v = draw(st.sampled_from([v for v in SECONDARIES
                                              if abs(v - volts) > 0.05 * volts]))
                sec_ph = 1 if phases == 1 or nb.take(2) else 3
                tx: dict[str, Any] = {
                    "rating": f"{draw(st.sampled_from((45, 75, 112.5, 150, 300, 500)))} kVA",
                    "secondary": f"{sec_v} V",
                    "impedance": f"{_num(draw, 2.0, 7.0, 1):g} %",
                    "x_r": _num(draw, 1.0, 8.0, 1),
                }
                if sec_ph != phases or nb.take():
                    tx["secondary_phases"] = sec_ph
                if nb.take(2):
                    tx["core_loss"] = f"{_num(draw, 0.0, 2.0):g} %"
                node["transformer"] = tx
                far_bus = _supply(float(sec_v), sec_ph)
            else:
                if nb.take(2):
                    node["demand_factor"] = _num(draw, 0.4, 1.0)
                if nb.take(3):
                    node["ocpd"] = f"{draw(st.sampled_from((400, 600, 800, 1200)))} A"
        else:
            _leaf(draw, nb, node, volts, phases, ratings)
        _cable_settings(draw, nb, rules, node)
        if pins and nb.take(2):
            material = draw(st.sampled_from(_materials_of(node, default_materials)))
            sets = 2 if nb.take(2) else 1
            size = draw(st.sampled_from(PIN_SIZES[rules, material]))
            if sets <= node.get("max_sets", defaults.get("max_sets", 4)):
                node["conductor"] = (f"{sets}x " if sets > 1 else "") + f"{size} {material}"
        buses.append(far_bus)
        doc["node"].append(node)

    # The order of the node tables is free: now and then children come first.
    if bits.take(2):
        doc["node"] = draw(st.permutations(doc["node"]))
    return {"doc": doc, "rules": rules, "schedule": bits.take(2),
            "default_materials": default_materials}


# --- broken scenarios --------------------------------------------------------------------------

UNITS = ("m", "ft", "A", "V", "kV", "kW", "kVA", "hp", "%", "degC", "degF", "s", "ms", "kA",
         "USD/kWh", "EUR/kWh", "year", "h", "kg", "mm2", "AWG", "kcmil", "", "furlongz",
         "V*A", "m**2", "1/s", "percent", "K", "Hz", "°C", "mm²")
SPECIAL_FLOATS = (math.nan, math.inf, -math.inf, 1e308, -1e308, 5e-324, -5e-324, 1e-300,
                  1e300, 0.0, -0.0, 2.0**63, 1e16 + 1.0)
BAD_VALUES = st.one_of(
    st.sampled_from(SPECIAL_FLOATS),
    st.sampled_from((0, -1, 1, 2, 7, 10**30, -(10**30), 2**63, True, False, "", " ", "auto",
                     "abc", "nan", "inf", "nan m", "inf A", "-inf V", "NaN kW", "1e400 ft",
                     "1e-400 ft", "-5 ft", "0 ft", "0 A", "-20 A", "0 kVA", "-3 kW", "12 kg",
                     "5 V", "3 s", "5 %", "110 %", "-5 %", "1e-300 m", "1e300 m", "1e300 A",
                     "1e300 kW", "1e-300 A", "1e300 kVA", "1e-300 kVA", "1e300 %",
                     "1e300 year", "1e-300 year", "480", "20 AWG", "Cu", "∞ ft", "１２ ft",
                     "12 ftt", "12 ft ft", "12 m/s", "°C", "30 °C", "-300 degC",
                     "1e309 kVA", "0x10 A", "1_000 ft", "10 AWG Cu", "2x 500 kcmil Al",
                     "0x 4 AWG Cu", "99 AWG Cu", "4/0 AWG Fe", "95 mm2 Cu", "5000 kcmil Cu",
                     "1000x 4/0 AWG Cu", "\n", "a\nb", "x\x00y", "\u2028", "<b>", "=1+1",
                     [], [1, "Cu"], ["Cu", "Cu"], ["Fe"], {}, {"rating": "75 kVA"},
                     {"kw": 5, "hp": 5}, "12 A\n13 A", "10 ft # comment",
                     "10 m + 5 m", "10 * m", "(10) m", "10 m)", "10 [m]", "1/0 ft",
                     "2 ** 1000 m", "10 ** 400 m")),
    st.floats(allow_nan=True, allow_infinity=True),
    st.integers(min_value=-(2**64), max_value=2**64),
    st.text(max_size=12),
    st.builds(lambda x, u: f"{x!r} {u}", st.floats(), st.sampled_from(UNITS)),
    st.builds(lambda x, u: f"{x} {u}", st.integers(-(10**6), 10**400), st.sampled_from(UNITS)),
    st.lists(st.one_of(st.integers(), st.text(max_size=4)), max_size=3),
)
EXTRA_KEYS = ("lenght", "Length", "parnet", "load ", "ampacity", "x", "", " ", "id.x",
              "transformer.rating", "=1", "<k>", "é", "node")


def _locations(doc: dict[str, Any]) -> list[tuple[Any, Any]]:
    """(container, key) for every value in the document, nested tables included."""
    out: list[tuple[Any, Any]] = []

    def walk(obj: Any) -> None:
        if isinstance(obj, dict):
            for k in list(obj):
                out.append((obj, k))
                walk(obj[k])
        elif isinstance(obj, list):
            for i in range(len(obj)):
                out.append((obj, i))
                walk(obj[i])

    walk(doc)
    return out


def _nodes(doc: dict[str, Any]) -> list[dict[str, Any]]:
    nodes = doc.get("node")
    return [n for n in nodes if isinstance(n, dict)] if isinstance(nodes, list) else []


_NUMBER_TEXT = re.compile(r"^\s*[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?(?=\s|$)")
EXTREMES = (1e-300, 5e-324, 1e-12, 1e-6, 1e6, 1e12, 1e300, 1.7976931348623157e308)
# Full solves take every extreme too, now that the reader bounds prices, currents and
# clearing times (they overflowed in economics, prices, candidates, conductors and verify:
# test_extreme_numbers_give_one_line_or_a_design below). Narrow this to skip one that
# regresses while it is being fixed.
SOLVE_EXTREMES = EXTREMES


def _extreme(draw: Any, doc: dict[str, Any], values: tuple[float, ...] = EXTREMES) -> None:
    """Keep a number's unit but make it extreme: the reader may accept it, the solver must
    still answer sanely.
    """
    spots = [(c, k) for c, k in _locations(doc)
             if (isinstance(c[k], str) and _NUMBER_TEXT.match(c[k]))
             or (isinstance(c[k], int | float) and not isinstance(c[k], bool))]
    if not spots:
        return
    container, key = draw(st.sampled_from(spots))
    x = draw(st.sampled_from(values))
    value = container[key]
    container[key] = (_NUMBER_TEXT.sub(repr(x), value, count=1) if isinstance(value, str)
                      else x)


def _mutate(draw: Any, doc: dict[str, Any], extremes: tuple[float, ...] = EXTREMES) -> str:
    """Break the document in one random way; returns the mutation's name."""
    kind = draw(st.sampled_from((
        "value", "value", "value", "value", "node_value", "node_value", "node_value",
        "delete", "delete", "extra_key", "duplicate_id", "cycle", "self_parent",
        "unknown_parent", "bad_pin", "table_to_scalar", "no_nodes", "swap_types",
        "extreme", "extreme", "extreme")))
    nodes = _nodes(doc)
    if kind in ("node_value", "duplicate_id", "cycle", "self_parent", "unknown_parent",
                "bad_pin") and not nodes:
        kind = "value"
    if kind == "value" or kind == "delete" or kind == "swap_types":
        container, key = draw(st.sampled_from(_locations(doc)))
        if kind == "delete":
            del container[key]
        elif kind == "swap_types":
            v = container[key]
            container[key] = (float(v) if isinstance(v, int) and not isinstance(v, bool)
                              else str(v) if isinstance(v, float | bool)
                              else [v] if isinstance(v, str) else 1.5)
        else:
            container[key] = draw(BAD_VALUES)
    elif kind == "node_value":
        node = draw(st.sampled_from(nodes))
        key = draw(st.sampled_from(("length", "voltage", "phases", "load", "power_factor",
                                    "continuous", "ocpd", "demand_factor", "conductor",
                                    "neutral", "clearing_time", "materials", "insulation",
                                    "terminals", "ambient", "installation", "grouping",
                                    "max_sets", "motor", "transformer", "description",
                                    "id", "parent")))
        node[key] = draw(BAD_VALUES)
    elif kind == "extra_key":
        container = draw(st.sampled_from([doc, *[v for v in doc.values()
                                                 if isinstance(v, dict)], *nodes]))
        container[draw(st.one_of(st.sampled_from(EXTRA_KEYS), st.text(max_size=6)))] = 1
    elif kind == "duplicate_id":
        a, b = draw(st.sampled_from(nodes)), draw(st.sampled_from(nodes))
        a["id"] = b.get("id", "X")
        if draw(st.booleans()) and isinstance(doc.get("source"), dict):
            b["id"] = doc["source"].get("id", "X")
    elif kind == "cycle":
        # Point a node's parent at one of its descendants (or any node).
        a, b = draw(st.sampled_from(nodes)), draw(st.sampled_from(nodes))
        a["parent"] = b.get("id", "X")
    elif kind == "self_parent":
        a = draw(st.sampled_from(nodes))
        a["parent"] = a.get("id", "X")
    elif kind == "unknown_parent":
        a = draw(st.sampled_from(nodes))
        a["parent"] = draw(st.sampled_from(("NOWHERE", str(a.get("parent", "")) + "x",
                                            str(a.get("parent", "")).lower(), " ")))
    elif kind == "bad_pin":
        a = draw(st.sampled_from(nodes))
        a["conductor"] = draw(st.sampled_from((
            "99 AWG Cu", "4/0 AWG Fe", "0x 4 AWG Cu", "2x", "Cu", "500 kcmil", "95 mm2 Cu",
            "14 AWG Al", "7x 4 AWG Cu", "4 Cu", "3/0 AWG Al Cu", "1e400 mm2 Cu",
            "nan mm2 Cu", "-4 AWG Cu", "0 mm2 Cu", "2000 kcmil Cu", "2 x 1/0 AWG Cu",
            "1000 kcmil Al", "1.5 mm2 Cu", "630 mm2 Al", "4/0 Cu", "0000 Cu", "#2 AWG Cu")))
    elif kind == "table_to_scalar":
        key = draw(st.sampled_from(("project", "economics", "defaults", "source", "node")))
        doc[key] = draw(st.sampled_from((1, "x", [], [1], True, {}, [{}])))
    elif kind == "no_nodes":
        doc["node"] = []
    elif kind == "extreme":
        _extreme(draw, doc, extremes)
    return kind


@st.composite
def extreme_cases(draw: Any, max_nodes: int = 8) -> dict[str, Any]:
    """A valid scenario with one to three numbers pushed to extremes, units kept."""
    case = draw(valid_cases(max_nodes=max_nodes))
    doc = copy.deepcopy(case["doc"])
    for _ in range(draw(st.integers(1, 3))):
        _extreme(draw, doc, SOLVE_EXTREMES)
    return {**case, "doc": doc}


@st.composite
def broken_cases(draw: Any, max_nodes: int = 15,
                 extremes: tuple[float, ...] = EXTREMES) -> dict[str, Any]:
    """A valid scenario broken one to three ways."""
    case = draw(valid_cases(max_nodes=max_nodes))
    doc = copy.deepcopy(case["doc"])
    kinds = [_mutate(draw, doc, extremes) for _ in range(draw(st.integers(1, 3)))]
    event(f"mutation: {kinds[0]}")
    return {**case, "doc": doc, "mutations": kinds}


# --- running the command line ----------------------------------------------------------------


def run_cli(argv: list[str], shown: object) -> tuple[int, str, str]:
    """main(argv) → (code, stdout, stderr); any exception fails with the input shown."""
    out, err = io.StringIO(), io.StringIO()
    try:
        with redirect_stdout(out), redirect_stderr(err):
            code = main(argv)
    except (Exception, SystemExit) as exc:  # the property: never an uncaught exception
        pytest.fail(f"uncaught {type(exc).__name__} from {argv[0]}: {exc}\n"
                    f"{''.join(traceback.format_exception(exc))}\n{shown}", pytrace=False)
    return code, out.getvalue(), err.getvalue()


def check_bad_input(folder: Path, out: str, err: str, shown: object) -> None:
    """Exit 2: a few clear lines on stderr, each naming the file, nothing on stdout."""
    lines = err.rstrip("\n").split("\n")
    assert err.endswith("\n") and err.strip(), f"no message\n{shown}"
    assert "Traceback" not in err, f"{err}\n{shown}"
    assert 1 <= len(lines) <= 6, f"{len(lines)} lines on stderr:\n{err}\n{shown}"
    for line in lines:
        if line.startswith("... and ") and line.endswith(" more"):
            continue
        assert line.removeprefix("sizer: ").startswith(str(folder)), \
            f"the error does not name the file: {line!r}\n{shown}"
    assert out == "", f"stdout on bad input: {out!r}\n{shown}"


def _files(folder: Path) -> set[str]:
    return {p.name for p in folder.iterdir()}


def run_loads(case: dict[str, Any]) -> int:
    """``sizer loads`` on the case: the property; returns the exit code."""
    shown = Shown(case)
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        path = write_case(folder, case)
        before = _files(folder)
        code, out, err = run_cli(["loads", str(path)], shown)
        assert code in (0, 2), f"exit {code}\n{err}\n{shown}"
        if code == 0:
            assert err == "", f"stderr on success: {err!r}\n{shown}"
            for node in _nodes(case["doc"]):
                if isinstance(node.get("id"), str):
                    # Listed as the terminal shows it (controls and bidi marks escaped).
                    assert for_terminal(node["id"].strip()) in out, \
                        f"{node['id']!r} not listed\n{shown}"
        else:
            check_bad_input(folder, out, err, shown)
        assert _files(folder) == before, f"files appeared: {_files(folder) - before}\n{shown}"
    event(f"loads exit {code}")
    return code


# --- the results document --------------------------------------------------------------------

_TRADE_SIZE = re.compile(r"^(?:(?:[1-4]/0|\d{1,2}) AWG|\d+(?:\.\d+)? kcmil|\d+(?:\.\d+)? mm2)$")
_TOL = 1e-6


def check_design(doc: dict[str, Any], case: dict[str, Any], valid: bool, shown: object,
                 status: str = "optimal") -> None:
    """Every invariant of an exit-0 results document."""
    profile = PROFILES[case["rules"]]
    assert doc["status"] == status, f"exit 0 with status {doc['status']}\n{shown}"
    # A solved design may carry what verification found beyond the rules the optimiser
    # enforces (a conductor that needs a current-limiting device, a motor-start dip);
    # never a broken ampacity, protection or drop rule. A compliant check carries none.
    found = {v["rule"] for v in doc.get("violations", [])}
    allowed = {"short-circuit withstand", "motor-start dip"} if status == "optimal" else set()
    assert found <= allowed, f"exit 0 with violations {found - allowed}\n{shown}"
    segments = doc["segments"]
    nodes = {str(n["id"]).strip(): n for n in _nodes(case["doc"])}
    if valid:
        assert {s["id"] for s in segments} == set(nodes), shown
    parents = {s["parent"] for s in segments}
    total = {"capex": 0.0, "loss_pv": 0.0}
    for s in segments:
        where = f"segment {s['id']!r}: {s}\n{shown}"
        for key in ("length_m", "current_a", "ampacity_a", "vd_pct", "path_vd_pct", "r_ohm",
                    "x_ohm", "ocpd_a", "capex", "loss_kw", "loss_pv", "temp_c"):
            assert isinstance(s[key], float | int) and math.isfinite(s[key]), f"{key}: {where}"
        own = profile.drop_branch_pct if s["kind"] == "branch" else profile.drop_feeder_pct
        assert s["kind"] == ("feeder" if s["id"] in parents else "branch"), where
        assert s["vd_pct"] <= own + _TOL, f"own drop over {own} %: {where}"
        assert s["path_vd_pct"] <= profile.drop_total_pct + _TOL, f"path drop: {where}"
        lf = s.get("loadflow_drop_pct")   # the AC load flow's drop, closed-loop checked
        assert lf is None or lf <= profile.drop_total_pct + 1e-3, f"load-flow drop: {where}"
        assert s["ampacity_a"] >= s["current_a"] * (1 - _TOL), f"ampacity: {where}"
        assert s["ocpd_a"] >= s["current_a"] * (1 - _TOL), f"device: {where}"
        assert _TRADE_SIZE.match(s["size"]) and s["size"] in profile.sizes, f"size: {where}"
        # A run fed from the source is a service: a bonding jumper, not an EGC (NEC
        # 250.24(C)); every other run has an EGC and no jumper.
        service = s["parent"] not in {x["id"] for x in segments}
        if service and profile.bonds_service():
            assert s["egc"] is None and _TRADE_SIZE.match(s["bonding_jumper"]), f"bond: {where}"
        else:
            assert _TRADE_SIZE.match(s["egc"]) and s["bonding_jumper"] is None, f"egc: {where}"
        assert s["material"] in ("Cu", "Al") and isinstance(s["sets"], int) and s["sets"] >= 1, \
            where
        assert s["capex"] >= 0 and s["loss_pv"] >= 0, where
        total["capex"] += s["capex"]
        total["loss_pv"] += s["loss_pv"]
        node = nodes.get(s["id"])
        if valid and node is not None:
            allowed = _materials_of(node, case["default_materials"])
            assert s["material"] in allowed, f"material not allowed: {where}"
            if "conductor" in node:
                pin = node["conductor"]
                assert s["pinned"] and f"{s['size']} {s['material']}" in pin, f"pin: {where}"
                assert s["sets"] == (int(pin.split("x")[0]) if "x " in pin else 1), where
            sets_cap = node.get("max_sets", case["doc"]["defaults"].get("max_sets", 4))
            assert s["sets"] <= sets_cap, f"max_sets: {where}"
    for key, value in total.items():
        assert math.isclose(doc["totals"][key], value, rel_tol=1e-6, abs_tol=1e-3), \
            f"totals.{key} {doc['totals'][key]} is not the sum {value}\n{shown}"


def run_solve(case: dict[str, Any], valid: bool, engine: str = "auto",
              command: str = "solve") -> int:
    """``sizer solve --json`` (or ``check``) on the case: the property; the exit code."""
    shown = Shown(case)
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        path = write_case(folder, case)
        before = _files(folder)
        out_json = folder / "out.json"
        code, out, err = run_cli([command, str(path), "--json", str(out_json), "--quiet",
                                  "--engine", engine], shown)
        assert code in (0, 1, 2), f"exit {code}\n{err}\n{shown}"
        if code == 2:
            check_bad_input(folder, out, err, shown)
            assert not out_json.exists(), f"results written on exit 2\n{shown}"
            assert _files(folder) == before, shown
        else:
            assert err == "", f"stderr with exit {code}: {err!r}\n{shown}"
            assert _files(folder) == before | {"out.json"}, f"stray files\n{shown}"
            doc = json.loads(out_json.read_text(encoding="utf-8"))
            if code == 1 and command == "check" and doc["status"] == "violations":
                assert doc["violations"] and all(
                    v["segment"] and v["rule"] and v["message"] for v in doc["violations"]), shown
            elif code == 1:
                assert doc["status"] == "infeasible", f"exit 1, status {doc['status']}\n{shown}"
                assert doc["diagnosis"] and all(isinstance(d, str) and d.strip()
                                                for d in doc["diagnosis"]), shown
            else:
                check_design(doc, case, valid, shown,
                             "compliant" if command == "check" else "optimal")
    event(f"{command} exit {code}")
    return code


# --- the properties --------------------------------------------------------------------------


@budget("loads_valid")
@given(valid_cases())
def test_loads_valid_scenarios(case: dict[str, Any]) -> None:
    run_loads(case)


@budget("loads_broken")
@given(broken_cases())
def test_loads_broken_scenarios(case: dict[str, Any]) -> None:
    run_loads(case)


# Byte strings that TOML, CSV and UTF-8 readers treat specially.
SPLICES = (b"[", b"]]", b"[[node]]\n", b'"', b"=", b"\n", b"\r", b"\\u00", b"\xef\xbb\xbf",
           b"\xff\xfe", b"\x00", b"nan", b"inf", b"1e999", b"#", b"'''", b'"""', b",", b";",
           b"\t", b'"\n"', b"\xe2\x80\xa8")


@st.composite
def corrupted_bytes(draw: Any) -> dict[str, Any]:
    """A valid scenario's files with the bytes of one cut, spliced, duplicated or overwritten.

    When the nodes come as a CSV schedule either file may be the one hurt.
    """
    case = draw(valid_cases(max_nodes=5))
    with tempfile.TemporaryDirectory() as tmp:
        write_case(Path(tmp), case)
        files = {p.name: bytearray(p.read_bytes()) for p in Path(tmp).iterdir()}
    name = draw(st.sampled_from(sorted(files)))
    data = files[name]
    for _ in range(draw(st.integers(1, 3))):
        at = draw(st.integers(0, len(data)))
        span = draw(st.integers(0, 40))
        how = draw(st.sampled_from(("cut", "insert", "repeat", "byte", "truncate")))
        if how == "cut":
            del data[at:at + span]
        elif how == "insert":
            data[at:at] = draw(st.one_of(st.binary(max_size=8), st.sampled_from(SPLICES)))
        elif how == "repeat":
            data[at:at] = data[at:at + span]
        elif how == "byte" and data:
            data[min(at, len(data) - 1)] = draw(st.integers(0, 255))
        else:
            del data[at:]
    return {"files": {k: bytes(v) for k, v in files.items()}}


@budget("loads_bytes")
@given(corrupted_bytes())
def test_loads_corrupted_bytes(case: dict[str, Any]) -> None:
    shown = "\n".join(f"--- {k} (bytes)\n{v!r}" for k, v in case["files"].items())
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        for name, data in case["files"].items():
            (folder / name).write_bytes(data)
        code, out, err = run_cli(["loads", str(folder / "site.toml")], shown)
        assert code in (0, 2), f"exit {code}\n{err}\n{shown}"
        if code == 2:
            check_bad_input(folder, out, err, shown)
        assert _files(folder) == set(case["files"]), shown
    event(f"loads exit {code}")


@budget("solve_valid")
@given(valid_cases(max_nodes=15, pins=False))
def test_solve_valid_scenarios(case: dict[str, Any]) -> None:
    run_solve(case, valid=True)


@budget("solve_pins")
@given(valid_cases(max_nodes=6), st.sampled_from(("auto", "auto", "auto", "milp")))
def test_solve_small_scenarios_with_pins(case: dict[str, Any], engine: str) -> None:
    run_solve(case, valid=True, engine=engine)


@budget("solve_broken")
@given(broken_cases(max_nodes=8, extremes=SOLVE_EXTREMES))
def test_solve_broken_scenarios(case: dict[str, Any]) -> None:
    run_solve(case, valid=False)


@budget("check_pins")
@given(valid_cases(max_nodes=6))
def test_check_pinned_designs(case: dict[str, Any]) -> None:
    run_solve(case, valid=True, command="check")


@budget("solve_extreme")
@given(extreme_cases(max_nodes=8))
def test_solve_extreme_numbers(case: dict[str, Any]) -> None:
    run_solve(case, valid=False)


# --- bugs the fuzzing found outside the reader or by extreme numbers (all fixed) ----------

EXTREME_HEAD = """\
[project]
title = "extreme"
rules = "nec"
currency = "USD"

[economics]
energy_price = "{energy_price} USD/kWh"
demand_charge = "{demand_charge} USD/kW"
discount_rate = "7 %"
lifetime = "25 year"
load_factor = 0.5

[prices]
copper = "{copper} USD/kg"
aluminium = "{aluminium} USD/kg"

[defaults]
clearing_time = "{clearing_time} s"

[source]
id = "S"
voltage = "480 V"
phases = 3
fault_current = "{fault_current} kA"

[[node]]
id = "A"
parent = "S"
length = "10 m"
phases = 1
voltage = "277 V"
load = "5 A"

[[node]]
id = "B"
parent = "S"
length = "10 m"
ocpd = "{ocpd} A"
"""
SANE = {"energy_price": 0.1, "demand_charge": 10, "copper": 10, "aluminium": 3,
        "clearing_time": 0.1, "fault_current": 30, "ocpd": 20}
BIG, TINY = 1.7976931348623157e308, 5e-324


def solve_text(folder: Path, text: str, *extra: str) -> tuple[int, str, str, Path]:
    """``sizer solve`` on a scenario text with every Python warning an error."""
    path = folder / "site.toml"
    path.write_text(text, encoding="utf-8")
    out_json = folder / "out.json"
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        code, out, err = run_cli(["solve", str(path), "--json", str(out_json), "--quiet",
                                  *extra], text)
    return code, out, err, path


def test_sane_values_of_the_extreme_fixture_solve(tmp_path):
    code, _, err, _ = solve_text(tmp_path, EXTREME_HEAD.format(**SANE))
    assert code == 0, err


@pytest.mark.parametrize(("field", "value", "where"), [pytest.param(*p, id=p[0]) for p in [
    ("energy_price", BIG, "economics.py:114 overflow; then 'sizer: field 'cost': must be "
                          "finite' names neither the file nor a scenario field"),
    ("demand_charge", BIG, "economics.py:74 overflow; then an unlocated 'sizer: field "
                           "'demand_charge'' line"),
    ("copper", BIG, "catalogue/prices.py:179 overflow while re-indexing; solves on with "
                    "exit 0"),
    ("aluminium", BIG, "catalogue/prices.py:191 and candidates.py:236 overflow; exit 0"),
    ("clearing_time", TINY, "conductors.py:180 overflow in the adiabatic withstand"),
    ("fault_current", TINY, "verify.py:355 invalid value (inf * 0) in the fault level of "
                            "a 1-phase circuit; exit 0 with fault_ka null"),
    ("ocpd", 1e300, "a device of 1e300 A with no load (80 % of it, 8e299 A, is the design "
                    "current): conductors.py:130 and candidates.py:242 overflow squaring it; "
                    "then exit 1 with a diagnosis printing two 300-digit numbers"),
]])
def test_extreme_numbers_give_one_line_or_a_design(tmp_path, field, value, where):
    """Found by the fuzzing (numpy RuntimeWarnings; ``where`` says where they were), fixed
    with sane bounds in the reader."""
    code, _, err, path = solve_text(tmp_path, EXTREME_HEAD.format(**{**SANE, field: value}))
    assert code in (0, 1, 2), where
    if code == 2:
        assert len(err.splitlines()) == 1 and err.startswith(str(path)), (where, err)


def test_solve_reports_verification_findings_in_the_json(tmp_path):
    """Found by the fuzzing: the findings reached only the terminal summary (fixed)."""
    # 200 kA at a service is high but real: equipment interrupting ratings reach 200 kA
    # (NEC 110.9 asks for a rating at least the available fault current; 200 kA is the top
    # of the common ratings, from memory). 10 m of a branch-sized conductor cannot
    # withstand it for the nec profile's one-cycle clearing time (IEC 60949 adiabatic).
    text = EXTREME_HEAD.format(**{**SANE, "fault_current": 200})
    code, out, err, _ = solve_text(tmp_path, text)
    assert code == 0 and "short-circuit withstand" in out, err   # the terminal says so
    doc = json.loads((tmp_path / "out.json").read_text(encoding="utf-8"))
    assert doc.get("violations"), f"status {doc['status']}, no violations in the JSON"


@pytest.mark.parametrize("text", ["50 (", "50 A/0"])
def test_unit_parser_raises_only_unit_errors(text):
    """Found by the fuzzing: pint's TokenError and ZeroDivisionError escaped (fixed)."""
    from sizer.errors import UnitError
    from sizer.units import parse_quantity

    with pytest.raises(UnitError):
        parse_quantity(text, "A")


def test_reach_with_an_unreadable_current_is_one_line():
    code, _, err = run_cli(["reach", "--conductor", "4 AWG Cu", "--insulation", "90 degC",
                            "--current", "50 (", "--voltage", "240 V", "--phases", "1",
                            "--limit", "3 %"], "sizer reach --current '50 ('")
    assert code == 2 and len(err.splitlines()) == 1 and "--current" in err


# --- reader bugs the fuzzing found, fixed: each input once more, by hand ---------------------

ONE_NODE = '[[node]]\nid = "A"\nparent = "SRC"\nlength = "20 m"\nload = "{load}"\n{extra}\n'


def _fixed_case(folder: Path, nodes: str, head_edit: tuple[str, str] = ("", ""),
                **head: object) -> Path:
    path = write_scenario(folder, nodes, **head)
    if head_edit[0]:
        text = path.read_text(encoding="utf-8")
        assert head_edit[0] in text
        path.write_text(text.replace(*head_edit, 1), encoding="utf-8")
    return path


@pytest.mark.parametrize(("nodes", "head_edit", "words"), [pytest.param(*c[1:], id=c[0]) for c in [
    # a TOML key may hold a line break: the message escapes it and stays one line
    ("key-with-newline", ONE_NODE.format(load="5 A", extra='"a\\nb" = 1'), ("", ""),
     "unknown key 'a\\nb'"),
    # pint's tokenizer fails on an open bracket (tokenize.TokenError)
    ("unit-with-open-bracket", ONE_NODE.format(load="5 (", extra=""), ("", ""),
     "node 'A', field 'load': "),
    # any load curve has LF² <= loss load factor <= LF; economics.py refused it unlocated
    ("loss-load-factor-impossible", ONE_NODE.format(load="5 A", extra=""),
     ("load_factor = 0.6\n", "load_factor = 0.6\nloss_load_factor = 0.9\n"),
     "field 'economics.loss_load_factor': 0.9 is impossible with load_factor 0.6"),
    # a terminal rating must be a column of the profile's table (ampacity.py refused it
    # unlocated, after the reader)
    ("terminals-not-a-column", ONE_NODE.format(load="5 A", extra='terminals = "80 degC"'),
     ("", ""), "node 'A', field 'terminals': the nec profile has no 80 degC"),
    ("default-terminals-not-a-column", ONE_NODE.format(load="5 A", extra=""),
     ('terminals = "75 degC"', 'terminals = "105 degC"'),
     "field 'defaults.terminals': the nec profile has no 105 degC"),
    # a price list name longer than the file system allows (OSError from Path.is_file)
    ("price-list-name-too-long", ONE_NODE.format(load="5 A", extra=""),
     ("[defaults]", f'[prices]\ncatalogue = "{"9" * 300}.csv"\n\n[defaults]'),
     "field 'prices.catalogue': cannot be a price list file"),
    # node = [] passed the reader; the engines then said "the problem has no segments"
    ("empty-node-list", "", ("[project]", "node = []\n\n[project]"),
     "field 'node': has no nodes"),
    # a power factor of 5e-324 overflowed numpy in loads.py (a RuntimeWarning)
    ("power-factor-subnormal", ONE_NODE.format(load="5 kW", extra="power_factor = 5e-324"),
     ("", ""), "node 'A', field 'load': the design current is too large to compute"),
    # max_sets 1e300 overflowed an int64 array in candidates.py; 10**6 would exhaust memory
    ("max-sets-huge", ONE_NODE.format(load="5 A", extra="max_sets = 1e300"), ("", ""),
     "node 'A', field 'max_sets': must be at most 20 parallel sets"),
    ("grouping-huge", ONE_NODE.format(load="5 A", extra="grouping = 1e300"), ("", ""),
     "node 'A', field 'grouping': must be at most 1000"),
    # a length of 1e300 m overflowed the cost in candidates.py
    ("length-absurd", ONE_NODE.format(load="5 A", extra="").replace('"20 m"', '"1e300 m"'),
     ("", ""), "node 'A', field 'length': must be at most 100 km"),
    # [[source]] with one table said "exactly one source is allowed, found 1"
    ("source-as-array", ONE_NODE.format(load="5 A", extra=""), ("[source]", "[[source]]"),
     "exactly one source is allowed, found a list of one"),
]])
def test_fixed_reader_bugs_give_one_located_line(tmp_path, nodes, head_edit, words):
    path = _fixed_case(tmp_path, nodes, head_edit)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        code, out, err = run_cli(["loads", str(path)], path.read_text(encoding="utf-8"))
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and err.startswith(f"{path}: "), err
    assert words in err, err


def test_a_subnormal_power_factor_on_a_current_load_solves(tmp_path):
    """The load is a current, so the power factor does not enter it: no overflow warning."""
    nodes = ONE_NODE.format(load="5 A", extra="power_factor = 5e-324")
    code, _, err, _ = solve_text(tmp_path, scenario_text(nodes))
    assert code == 0, err


def _schedule(folder: Path, rows: str) -> Path:
    path = _fixed_case(folder, "", ('currency = "USD"\n',
                                    'currency = "USD"\nschedule = "circuits.csv"\n'))
    (folder / "circuits.csv").write_text(rows, encoding="utf-8", newline="")
    return path


def test_csv_schedule_keeps_unicode_line_separators_in_cells(tmp_path):
    # str.splitlines() split the cell "A\u2028B" in two; only CR and LF end a CSV line.
    path = _schedule(tmp_path, 'id,parent,length,load\r\n"A\u2028B",SRC,20 m,5 A\r"C",SRC,'
                               '9 m,2 A\n')
    code, out, err = run_cli(["loads", str(path)], "schedule with U+2028 in an id")
    assert code == 0, err
    # Kept in the id; escaped on the terminal, where U+2028 would end the line.
    assert "A\\u2028B" in out and "\nC " in out


def test_csv_schedule_with_a_cell_over_the_csv_limit(tmp_path):
    # csv.Error (field larger than field limit) escaped as a traceback.
    path = _schedule(tmp_path, f"id,parent,length,load\nA,SRC,20 m,5 A\nB,SRC,{'9' * 140_000},"
                               "5 A\n")
    code, _, err = run_cli(["loads", str(path)], "schedule with a 140 kB cell")
    assert code == 2 and err.count("\n") == 1
    assert err.startswith(f"{tmp_path / 'circuits.csv'}: line 3 cannot be read as CSV"), err


CHECK_LOADFLOW = """\
[project]
title = "long 120 V run"
rules = "nec"
currency = "USD"

[economics]
energy_price = "0.1 USD/kWh"
discount_rate = "7 %"
lifetime = "25 year"
load_factor = 0.5

[defaults]
materials = ["Cu"]
trip_multiple = 1      # keeps the least-cost fill that the bug needed (issue 14 rule)

[source]
id = "S"
voltage = "240 V"
phases = 1

[[node]]
id = "P"
parent = "S"
length = "242 ft"
voltage = "120 V"
phases = 1

[[node]]
id = "Q"
parent = "P"
length = "50.8 m"

[[node]]
id = "L"
parent = "Q"
length = "133 ft"
load = "0.2624 kW"
power_factor = 0.73
"""


def test_check_judges_the_total_drop_by_the_load_flow_too(tmp_path):
    """Found by the fuzzing: this tree, filled at least cost, has path_vd_pct 4.90 % but
    loadflow_drop_pct 5.28 % at L, and check said 'compliant' with exit 0 (fixed)."""
    path = tmp_path / "site.toml"
    path.write_text(CHECK_LOADFLOW, encoding="utf-8")
    code, _, err = run_cli(["check", str(path), "--json", str(tmp_path / "out.json"),
                            "--quiet"], CHECK_LOADFLOW)
    doc = json.loads((tmp_path / "out.json").read_text(encoding="utf-8"))
    worst = max(s["loadflow_drop_pct"] for s in doc["segments"])
    assert worst > 5.0    # the premise: the load flow puts L over the nec 5 % total
    assert code == 1 and doc["status"] == "violations", (code, doc["status"], err)


# --- issue 19: the command-line options and the one writer ------------------------------------
#
# Options: every option of every verb gets text hypothesis picks (numbers of every size
# and sign, NaN, units, words, empty); the property is one line naming the option and
# exit 2, or the command going on to its work (stubbed here: the parsing is under test,
# and the work has its own fuzzing above). ``sizer reach`` runs for real: exit 0 with a
# finite positive reach, or one line and exit 2, never a warning.
#
# The writer: a run's outputs named by hypothesis from a pool holding the inputs, links
# to them (symbolic and hard), folders, a device, missing folders, existing files and
# links planted at temporary-looking names, with a full disk (ENOSPC) simulated at any
# write or rename; the property: no input ever changes, and either every output has its
# new content or none changes, with no temporary file left. Concurrent writers of one
# file leave one whole payload.

EXAMPLES.update({"options": 250, "reach": 120, "writer": 150, "concurrent": 8})

_OPTION_TEXT = st.one_of(
    st.integers(-10**6, 10**6).map(str),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.sampled_from(["0", "-0", "1e308", "1e-320", "1e400", "nan", "-inf", "abc", "", " ",
                     "1,2", "10,,", "3 %", "-3 %", "90 degC", "-273 degC", "1e300 A",
                     "50 A", "5000 A", "240 V", "13.8 kV", "0x10", "1_000", "٣"]),
)
# verb, option, the stub that marks "the command went on to its work"
_OPTION_CASES = [
    ("solve", "--time-limit"), ("check", "--time-limit"), ("frontier", "--time-limit"),
    ("frontier", "--points"), ("sweep", "--jobs"), ("sweep", "--time-limit"),
    ("sweep", "--vary"), ("bench", "--sizes"), ("bench", "--repeats"),
    ("bench", "--milp-time-limit"),
]


class _WentOn(BaseException):
    """Raised by a stub: the options were accepted and the work began (passes ``main``)."""


@pytest.fixture(scope="module")
def option_site(tmp_path_factory) -> Path:
    nodes = '[[node]]\nid = "A"\nparent = "SRC"\nlength = "20 m"\nload = "10 A"\n'
    return write_scenario(tmp_path_factory.mktemp("options"), nodes)


@contextlib.contextmanager
def _work_stubbed() -> Any:
    """The work behind every verb replaced by a stub raising _WentOn (options only)."""
    import sizer.bench
    import sizer.results
    import sizer.sweep
    import sizer.workflow

    def went_on(*_a: object, **_k: object) -> None:
        raise _WentOn

    def sweep_until_work(scenario: Any, vary: Any, **_k: object) -> None:
        sizer.sweep._fields(vary, scenario.currency)   # --vary is read for real
        raise _WentOn

    with pytest.MonkeyPatch.context() as mp:
        for module, name in ((sizer.results, "solve_results"),
                             (sizer.results, "check_results"),
                             (sizer.workflow, "frontier"), (sizer.bench, "run_bench")):
            mp.setattr(module, name, went_on)
        mp.setattr(sizer.sweep, "sweep", sweep_until_work)
        yield


@budget("options")
@given(case=st.sampled_from(_OPTION_CASES), text=_OPTION_TEXT,
       field=st.sampled_from(["copper", "aluminium", "energy_price", "demand_charge",
                              "lifetime", "hours", "load_factor"]),
       shape=st.sampled_from(["{f}={t}", "{f}={t}:{t}:3", "{f}=1:{t}:2", "{f}={t},{t}"]))
def test_fuzz_command_line_options(option_site, case, text, field, shape):
    verb, option = case
    value = shape.format(f=field, t=text) if option == "--vary" else text
    argv = [verb] + ([] if verb == "bench" else [str(option_site)]) + [f"{option}={value}"]
    if verb == "sweep" and option != "--vary":
        argv += ["--vary", "copper=8:9:2"]
    argv.append("--quiet") if verb != "sweep" else None
    shown = f"sizer {' '.join(argv)!r}"
    try:
        with _work_stubbed():
            code, out, err = run_cli(argv, shown)
    except _WentOn:
        event("accepted")
        return
    event(f"exit {code}")
    assert code == 2, f"exit {code}\n{err}\n{shown}"
    assert len(err.splitlines()) == 1 and "Traceback" not in err, f"{err}\n{shown}"
    assert option in err, f"the error does not name {option}: {err}\n{shown}"
    assert out == "", shown


_REACH_OPTIONS = ["--limit", "--current", "--ocpd", "--ambient", "--insulation", "--voltage",
                  "--terminals", "--conductor-temperature", "--power-factor", "--conductor"]


@budget("reach")
@given(changes=st.dictionaries(st.sampled_from(_REACH_OPTIONS), _OPTION_TEXT, min_size=1,
                               max_size=3))
def test_fuzz_reach_options(changes):
    given_ = {"--conductor": "4 AWG Cu", "--insulation": "90 degC", "--voltage": "240 V",
              "--limit": "3 %", "--current": "30 A"}
    given_.update(changes)
    if "--ocpd" in given_:
        given_.pop("--current", None) if "--current" not in changes else given_.pop("--ocpd")
    argv = ["reach", "--phases", "1", "--json"]
    for k, v in given_.items():
        argv += [k, v]
    shown = f"sizer {' '.join(argv)!r}"
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        code, out, err = run_cli(argv, shown)
    event(f"exit {code}")
    if code == 0:
        doc = json.loads(out)
        assert math.isfinite(doc["reach_m"]) and doc["reach_m"] > 0, shown
        assert doc["design_current_a"] <= doc["ampacity_a"] + 1e-9, shown
    else:
        assert code == 2, f"exit {code}\n{err}\n{shown}"
        assert len(err.splitlines()) == 1 and "Traceback" not in err, f"{err}\n{shown}"


# The writer. Names in a pool; the property compares every file before and after.
_KINDS = ("new", "existing", "input", "symlink_to_input", "hardlink_to_input",
          "symlink_elsewhere", "folder", "missing_folder", "device", "planted_tmp_link")


def _make_output(folder: Path, i: int, kind: str, inputs: list[Path]) -> str:
    name = folder / f"out{i}.dat"
    if kind == "existing":
        name.write_text(f"old {i}\n", encoding="utf-8")
    elif kind == "input":
        return str(inputs[i % len(inputs)])
    elif kind == "symlink_to_input":
        name.symlink_to(inputs[i % len(inputs)])
    elif kind == "hardlink_to_input":
        os.link(inputs[i % len(inputs)], name)
    elif kind == "symlink_elsewhere":
        (folder / f"elsewhere{i}.dat").write_text("elsewhere\n", encoding="utf-8")
        name.symlink_to(folder / f"elsewhere{i}.dat")
    elif kind == "folder":
        name.mkdir()
    elif kind == "missing_folder":
        return str(folder / "no" / f"out{i}.dat")
    elif kind == "device":
        return "/dev/null"
    elif kind == "planted_tmp_link":
        # A link at the name a fixed-name writer would use, and at mkstemp-like names.
        (folder / f".out{i}.dat.tmp").symlink_to(inputs[0])
    return str(name)


def _snapshot(folder: Path) -> dict[str, bytes | str]:
    out: dict[str, bytes | str] = {}
    for p in sorted(folder.rglob("*")):
        rel = str(p.relative_to(folder))
        if p.is_symlink():
            out[rel] = f"-> {p.readlink()}"
        elif p.is_file():
            out[rel] = p.read_bytes()
    return out


@budget("writer")
@given(kinds=st.lists(st.sampled_from(_KINDS), min_size=1, max_size=4),
       fail=st.one_of(st.none(), st.tuples(st.sampled_from(["fsync", "replace"]),
                                           st.integers(0, 3))),
       repeat=st.booleans())
def test_fuzz_the_writer(kinds, fail, repeat):
    from sizer import outputs

    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        inputs = [folder / "site.toml", folder / "prices.csv"]
        for p in inputs:
            p.write_text(f"input {p.name}\n", encoding="utf-8")
        named = [_make_output(folder, i, k, inputs) for i, k in enumerate(kinds)]
        if repeat:
            named.append(named[0])                      # one file named twice
        before = _snapshot(folder)
        calls = {"n": 0}
        real = getattr(os, fail[0]) if fail else None

        def flaky(*a: object, **k: object) -> Any:
            calls["n"] += 1
            if calls["n"] > fail[1]:
                raise OSError(errno.ENOSPC, "No space left on device")
            return real(*a, **k)

        shown = f"outputs {kinds} {named} fail={fail}"
        try:
            if fail:
                setattr(outputs.os, fail[0], flaky)
            outputs.check_outputs([(f"--o{i}", p) for i, p in enumerate(named)], inputs)
            with outputs.Staged(inputs) as stage:
                for i, p in enumerate(named):
                    stage.add(p, f"new {i}\n")
            ok = True
        except outputs.ScenarioError as exc:
            ok = False
            assert "\n" not in str(exc), shown
        finally:
            if fail:
                setattr(outputs.os, fail[0], real)
        after = _snapshot(folder)
        for p in inputs:
            assert p.read_text(encoding="utf-8") == f"input {p.name}\n", shown
        assert not [n for n in after if n.startswith(".") and n.endswith((".tmp", ".old"))
                    and n not in before], f"temporary file left: {sorted(after)}\n{shown}"
        event("written" if ok else "refused")
        if ok:
            for i, p in enumerate(named):
                assert Path(p).read_text(encoding="utf-8") == f"new {i}\n", shown
        else:
            assert after == before, shown


@budget("concurrent")
@given(writers=st.integers(2, 6), size=st.integers(1, 200_000))
def test_fuzz_concurrent_writers_leave_one_whole_payload(writers, size):
    import threading

    from sizer.outputs import write_file

    with tempfile.TemporaryDirectory() as tmp:
        target = Path(tmp) / "out.csv"
        payloads = [(f"{w}," * (size // 2 + 1))[:size] + "\n" for w in range(writers)]
        threads = [threading.Thread(target=write_file, args=(target, p)) for p in payloads]
        for t in threads:
            t.start()
        for t in threads:
            t.join()
        assert target.read_text(encoding="utf-8") in payloads
        assert sorted(p.name for p in Path(tmp).iterdir()) == ["out.csv"]


@pytest.fixture
def tiny_disk(tmp_path):
    """A 64 KiB tmpfs where the test may mount one (root on Linux), else None."""
    import shutil
    import subprocess

    mount = tmp_path / "tiny"
    mount.mkdir()
    if shutil.which("mount") is None:
        yield None
        return
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=64k", "tmpfs", str(mount)],
                          capture_output=True)
    if done.returncode != 0:
        yield None
        return
    try:
        yield mount
    finally:
        subprocess.run(["umount", str(mount)], capture_output=True)


def test_a_full_disk_leaves_the_previous_outputs(tmp_path, tiny_disk, monkeypatch):
    from sizer import outputs

    folder = tiny_disk or tmp_path
    site = write_scenario(tmp_path, '[[node]]\nid = "A"\nparent = "SRC"\nlength = "20 m"\n'
                                    'load = "10 A"\n')
    for name in ("d.json", "r.html"):
        (folder / name).write_text(f"previous {name}\n", encoding="utf-8")
    before = _snapshot(folder)
    if tiny_disk is None:
        # No file system to fill: the disk says so when the first output is flushed.
        def full(_fd: int) -> None:
            raise OSError(errno.ENOSPC, "No space left on device")

        monkeypatch.setattr(outputs.os, "fsync", full)
    # Else the 64 KiB disk holds the JSON but not the report (its figures alone are more).
    code, _, err = run_cli(["solve", str(site), "--json", str(folder / "d.json"),
                            "--report", str(folder / "r.html"), "--quiet"], "full disk")
    assert code == 2 and len(err.splitlines()) == 1 and "No space" in err, err
    assert _snapshot(folder) == before
