"""A catalogue of malformed scenarios: each gets one clear line and exit code 2.

Every case starts from a valid scenario, breaks one thing, runs ``sizer loads`` through
the command line and checks: exit code 2, exactly one line on stderr, naming the file,
the node and the field, no traceback, nothing on stdout.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from sizer import validation
from sizer.cli import main

BASE = """\
[project]
title = "Malformed-input fixture"
rules = "nec"
currency = "USD"

[economics]
energy_price = "0.12 USD/kWh"
discount_rate = "7 %"
lifetime = "25 year"
load_factor = 0.55

[defaults]
materials = ["Cu", "Al"]

[source]
id = "SERVICE"
voltage = "480 V"
phases = 3

[[node]]
id = "SWBD"
parent = "SERVICE"
length = "25 ft"

[[node]]
id = "KILN"
parent = "SWBD"
length = "310 ft"
load = "180 kW"
power_factor = 0.95
continuous = true

[[node]]
id = "XFMR"
parent = "SWBD"
length = "60 ft"
transformer = { rating = "75 kVA", secondary = "208 V", impedance = "5.2 %", x_r = 4 }

[[node]]
id = "LTG"
parent = "XFMR"
length = "95 ft"
phases = 1
voltage = "120 V"
ocpd = "20 A"
"""

KILN = 'id = "KILN"\nparent = "SWBD"\nlength = "310 ft"\n'
LTG = 'id = "LTG"\nparent = "XFMR"\nlength = "95 ft"\n'


def edit(old: str, new: str) -> str:
    assert old in BASE, old
    return BASE.replace(old, new, 1)


def add(text: str) -> str:
    return BASE + "\n" + text


def in_kiln(line: str) -> str:
    return edit(KILN, KILN + line + "\n")


def in_ltg(line: str) -> str:
    return edit(LTG, LTG + line + "\n")


# (case id, file text, node named or None, field named or None, words in the message)
CASES = [
    # --- the file as a whole
    ("invalid-toml", BASE.replace('[project]', '[project', 1), None, None, "not valid TOML"),
    ("empty-file", "", None, None, "empty"),
    ("only-comments", "# nothing here\n", None, None, "no scenario"),
    ("unknown-table", add("[nodes]\nid = 'x'\n"), None, "nodes", "did you mean 'node'"),
    ("single-bracket-node", BASE.split("[[node]]")[0] + '[node]\nid = "A"\nparent = '
     '"SERVICE"\nlength = "9 m"\nocpd = "20 A"\n', None, "node", "[[node]]"),
    ("missing-project", BASE.replace('[project]\ntitle = "Malformed-input fixture"\n'
                                     'rules = "nec"\ncurrency = "USD"\n', ""),
     None, "project", "missing [project]"),
    ("unknown-rules", edit('rules = "nec"', 'rules = "nek"'), None, "project.rules",
     "did you mean 'nec'"),
    ("missing-rules", edit('rules = "nec"\n', ""), None, "project.rules", "missing"),
    ("unknown-currency", edit('currency = "USD"', 'currency = "USX"'), None,
     "project.currency", "unknown currency"),
    ("missing-economics", edit('[economics]\nenergy_price = "0.12 USD/kWh"\n'
                               'discount_rate = "7 %"\nlifetime = "25 year"\n'
                               "load_factor = 0.55\n", ""), None, "economics", "missing"),
    ("price-in-other-currency", edit('"0.12 USD/kWh"', '"0.12 EUR/kWh"'), None,
     "economics.energy_price", "not a price in USD"),
    ("load-factor-above-one", edit("load_factor = 0.55", "load_factor = 1.5"), None,
     "economics.load_factor", "(0, 1]"),
    ("unknown-key-in-defaults", edit('materials = ["Cu", "Al"]', 'ambiant = "30 degC"'),
     None, "defaults.ambiant", "did you mean 'ambient'"),
    ("too-many-nodes", BASE, None, None, "at most 3"),
    # --- exactly one source
    ("no-source", edit('[source]\nid = "SERVICE"\nvoltage = "480 V"\nphases = 3\n', ""),
     None, "source", "exactly one source"),
    ("two-sources", edit('[source]\nid = "SERVICE"\nvoltage = "480 V"\nphases = 3\n',
                         '[[source]]\nid = "A"\nvoltage = "480 V"\nphases = 3\n'
                         '[[source]]\nid = "B"\nvoltage = "480 V"\nphases = 3\n'),
     None, "source", "exactly one source"),
    ("node-without-parent", edit('id = "SWBD"\nparent = "SERVICE"\n', 'id = "SWBD"\n'),
     "SWBD", "parent", "exactly one source"),
    ("source-voltage-negative", edit('voltage = "480 V"', 'voltage = "-480 V"'), "SERVICE",
     "source.voltage", "positive voltage"),
    ("source-phases-two", edit("phases = 3\n", "phases = 2\n"), "SERVICE", "source.phases",
     "1 or 3"),
    # --- ids and the tree
    ("duplicate-id", edit('id = "LTG"', 'id = "KILN"'), "KILN", "id", "duplicate"),
    ("id-of-source", edit('id = "KILN"', 'id = "SERVICE"'), "SERVICE", "id", "source"),
    ("missing-id", edit('id = "KILN"\n', ""), None, "id", "has no id"),
    ("id-not-text", edit('id = "KILN"', "id = 7"), None, "id", "text in quotes"),
    ("unknown-parent", edit('parent = "XFMR"', 'parent = "XFRM"'), "LTG", "parent",
     "did you mean 'XFMR'"),
    ("self-parent", edit('id = "KILN"\nparent = "SWBD"', 'id = "KILN"\nparent = "KILN"'),
     "KILN", "parent", "its own parent"),
    ("cycle", edit('id = "SWBD"\nparent = "SERVICE"', 'id = "SWBD"\nparent = "LTG"'),
     "SWBD", "parent", "loop"),
    # --- fields
    ("unknown-key-typo", edit('length = "310 ft"', 'lenght = "310 ft"'), "KILN", "lenght",
     "did you mean 'length'"),
    ("missing-length", edit('length = "310 ft"\n', ""), "KILN", "length", "missing"),
    ("length-negative", edit('"310 ft"', '"-10 m"'), "KILN", "length",
     "must be a positive length, got '-10 m'"),
    ("length-zero", edit('"310 ft"', '"0 ft"'), "KILN", "length", "positive length"),
    ("length-wrong-unit", edit('"310 ft"', '"40 A"'), "KILN", "length", "not a length"),
    ("length-nan", edit('"310 ft"', '"nan m"'), "KILN", "length", "finite"),
    ("length-inf", edit('"310 ft"', '"inf ft"'), "KILN", "length", "finite"),
    ("length-bare-number", edit('"310 ft"', "310"), "KILN", "length", "unit"),
    ("length-unknown-unit", edit('"310 ft"', '"310 furlongz"'), "KILN", "length",
     "unknown unit"),
    ("power-factor-above-one", edit("power_factor = 0.95", "power_factor = 1.2"), "KILN",
     "power_factor", "(0, 1]"),
    ("power-factor-zero", edit("power_factor = 0.95", "power_factor = 0"), "KILN",
     "power_factor", "(0, 1]"),
    ("power-factor-nan", edit("power_factor = 0.95", "power_factor = nan"), "KILN",
     "power_factor", "finite"),
    ("power-factor-string", edit("power_factor = 0.95", 'power_factor = "0.95"'), "KILN",
     "power_factor", "plain number"),
    ("phases-two", in_kiln("phases = 2"), "KILN", "phases", "1 or 3"),
    ("phases-string", in_kiln('phases = "3"'), "KILN", "phases", "plain number"),
    ("voltage-zero", in_kiln('voltage = "0 V"'), "KILN", "voltage", "positive voltage"),
    ("voltage-negative", in_kiln('voltage = "-480 V"'), "KILN", "voltage",
     "positive voltage"),
    ("voltage-medium", in_kiln('voltage = "4160 V"'), "KILN", "voltage", "low-voltage"),
    ("voltage-number", in_kiln("voltage = 480"), "KILN", "voltage", "unit"),
    ("voltage-off-bus-3ph", in_kiln('voltage = "400 V"'), "KILN", "voltage", "must be 480 V"),
    ("voltage-off-bus-1ph", edit('voltage = "120 V"', 'voltage = "240 V"'), "LTG", "voltage",
     "line to neutral"),
    ("three-phase-on-one-phase-bus", edit('ocpd = "20 A"\n', 'ocpd = "20 A"\n') +
     '\n[[node]]\nid = "P1"\nparent = "SWBD"\nlength = "9 m"\nphases = 1\n\n'
     '[[node]]\nid = "M3"\nparent = "P1"\nlength = "9 m"\nphases = 3\nload = "5 kW"\n',
     "M3", "phases", "3-phase"),
    ("load-negative", edit('load = "180 kW"', 'load = "-5 kW"'), "KILN", "load",
     "at least 0"),
    ("load-nan", edit('load = "180 kW"', 'load = "nan kW"'), "KILN", "load", "finite"),
    ("load-wrong-unit", edit('load = "180 kW"', 'load = "180 m"'), "KILN", "load",
     "not a load"),
    ("load-number", edit('load = "180 kW"', "load = 180"), "KILN", "load", "unit"),
    ("continuous-string", edit("continuous = true", 'continuous = "yes"'), "KILN",
     "continuous", "true or false"),
    ("ocpd-number", edit('ocpd = "20 A"', "ocpd = 20"), "LTG", "ocpd", "unit"),
    ("ocpd-wrong-unit", edit('ocpd = "20 A"', 'ocpd = "20 V"'), "LTG", "ocpd", "not a current"),
    ("demand-factor-above-one", edit('length = "25 ft"', 'length = "25 ft"\n'
                                     "demand_factor = 1.5"), "SWBD", "demand_factor",
     "(0, 1]"),
    ("demand-factor-zero", edit('length = "25 ft"', 'length = "25 ft"\ndemand_factor = 0'),
     "SWBD", "demand_factor", "(0, 1]"),
    ("demand-factor-on-leaf", in_kiln("demand_factor = 0.8"), "KILN", "demand_factor",
     "below a panel"),
    ("materials-unknown", in_kiln('materials = ["Cu", "Fe"]'), "KILN", "materials",
     "unknown conductor material"),
    ("materials-empty", in_kiln("materials = []"), "KILN", "materials", "at least one"),
    ("max-sets-zero", in_kiln("max_sets = 0"), "KILN", "max_sets", "at least 1"),
    ("max-sets-fraction", in_kiln("max_sets = 1.5"), "KILN", "max_sets", "whole number"),
    ("grouping-zero", in_kiln("grouping = 0"), "KILN", "grouping", "at least 1"),
    ("ambient-too-hot", in_kiln('ambient = "95 degC"'), "KILN", "ambient", "plausible"),
    ("ambient-too-cold", in_kiln('ambient = "-60 degC"'), "KILN", "ambient", "plausible"),
    ("ambient-wrong-unit", in_kiln('ambient = "30 ft"'), "KILN", "ambient",
     "not a temperature"),
    ("insulation-not-in-profile", in_kiln('insulation = "105 degC"'), "KILN", "insulation",
     "no 105 degC"),
    ("insulation-default-not-in-profile", edit('materials = ["Cu", "Al"]',
                                               'insulation = "110 degC"'),
     None, "defaults.insulation", "no 110 degC"),
    ("installation-unknown", in_kiln('installation = "condiut"'), "KILN", "installation",
     "did you mean 'conduit'"),
    ("clearing-time-wrong-unit", in_kiln('clearing_time = "3 A"'), "KILN", "clearing_time",
     "not a time"),
    # --- what each node carries
    ("leaf-without-load", edit('ocpd = "20 A"\n', ""), "LTG", "load", "nothing to size"),
    ("load-on-panel", edit('length = "25 ft"', 'length = "25 ft"\nload = "10 kW"'), "SWBD",
     "load", "feeds 2 nodes"),
    ("motor-on-panel", edit('length = "25 ft"', 'length = "25 ft"\nmotor = { kw = 5 }'),
     "SWBD", "motor", "motor"),
    ("continuous-on-panel", edit('length = "25 ft"', 'length = "25 ft"\ncontinuous = true'),
     "SWBD", "continuous", "continuous"),
    ("motor-two-ratings", in_kiln("motor = { kw = 5, hp = 7 }"), "KILN", "motor",
     "exactly one motor rating"),
    ("motor-not-a-table", in_kiln("motor = true"), "KILN", "motor", "table"),
    ("motor-kw-string", in_kiln('motor = { kw = "5 kW" }'), "KILN", "motor.kw",
     "plain number"),
    ("motor-unknown-key", in_kiln("motor = { kw = 5, start_mult = 6 }"), "KILN",
     "motor.start_mult", "did you mean 'start_multiple'"),
    # --- transformers
    ("transformer-same-voltage", edit('secondary = "208 V"', 'secondary = "480 V"'), "XFMR",
     "transformer.secondary", "must change the voltage"),
    ("transformer-rating-kw", edit('rating = "75 kVA"', 'rating = "75 kW"'), "XFMR",
     "transformer.rating", "apparent power"),
    ("transformer-missing-x-r", edit(", x_r = 4 }", " }"), "XFMR", "transformer.x_r",
     "missing"),
    ("transformer-impedance-number", edit('impedance = "5.2 %"', "impedance = 5.2"), "XFMR",
     "transformer.impedance", "unit"),
    ("transformer-on-leaf", edit('ocpd = "20 A"',
                                 'ocpd = "20 A"\ntransformer = { rating = "5 kVA", '
                                 'secondary = "24 V", impedance = "3 %", x_r = 1 }'),
     "LTG", "transformer", "feeds nothing"),
    ("transformer-3ph-from-1ph", edit('length = "60 ft"\n', 'length = "60 ft"\nphases = 1\n')
     .replace('x_r = 4 }', 'x_r = 4, secondary_phases = 3 }'), "XFMR",
     "transformer.secondary_phases", "3-phase primary"),
    # --- pins, checked against the profile's catalogue
    ("pin-not-in-catalogue", in_kiln('conductor = "95 mm2 Cu"'), "KILN", "conductor",
     "not in the nec profile's awg catalogue"),
    ("pin-unreadable", in_kiln('conductor = "big copper"'), "KILN", "conductor",
     "unknown conductor size"),
    ("pin-material-not-allowed", in_kiln('materials = ["Cu"]\nconductor = "500 kcmil Al"'),
     "KILN", "conductor", "allows only Cu"),
    ("pin-size-not-made-in-al", in_ltg('conductor = "14 AWG Al"'), "LTG", "conductor",
     "not made in Al"),
    ("pin-more-sets-than-allowed", in_kiln('max_sets = 2\nconductor = "3x 250 kcmil Cu"'),
     "KILN", "conductor", "max_sets is 2"),
    # --- how the load runs (losses only: sizer.operating)
    ("category-misspelt", in_kiln('category = "lightning"'), "KILN", "category",
     "did you mean 'lighting'?"),
    ("utilisation-above-one", in_kiln("utilisation = 1.5"), "KILN", "utilisation",
     "must be in (0, 1]"),
    ("load-factor-and-hours", in_kiln('load_factor = 0.5\nfull_load_hours = "3000 h"'),
     "KILN", "full_load_hours", "not both"),
    ("loss-load-factor-impossible", in_kiln("load_factor = 0.5\nloss_load_factor = 0.6"),
     "KILN", "loss_load_factor", "impossible with load_factor 0.5"),
    ("full-load-hours-beyond-a-year", in_kiln('full_load_hours = "9000 h"'), "KILN",
     "full_load_hours", "at most 8784 h"),
    # --- found when the currents are worked out (still exit code 2)
    ("device-below-current", edit('load = "180 kW"', 'load = "180 kW"\nocpd = "100 A"'),
     "KILN", "ocpd", "below the design current"),
    ("transformer-overloaded", edit('ocpd = "20 A"', 'load = "80 kW"'), "XFMR",
     "transformer.rating", "of its 75 kVA rating"),
]


@pytest.mark.parametrize(("text", "node", "field", "words"),
                         [pytest.param(*c[1:], id=c[0]) for c in CASES])
def test_malformed_scenario(tmp_path, capsys, monkeypatch, request, text, node, field, words):
    if request.node.callspec.id == "too-many-nodes":
        monkeypatch.setattr(validation, "MAX_NODES", 3)
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    code = main(["loads", str(path)])
    out, err = capsys.readouterr()
    assert code == 2
    assert out == ""
    lines = err.splitlines()
    assert len(lines) == 1, err
    line = lines[0]
    assert "Traceback" not in err
    # the CLI prefixes "sizer: "; the message itself starts with the file path
    assert line.removeprefix("sizer: ").startswith(f"{path}: "), line
    if node is not None:
        assert f"node '{node}'" in line
    else:
        assert "node '" not in line
    if field is not None:
        assert f"field '{field}'" in line
    assert words in line


def test_missing_file(tmp_path, capsys):
    path = tmp_path / "nowhere.toml"
    assert main(["loads", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "no such file" in err and str(path) in err


def test_not_utf8(tmp_path, capsys):
    path = tmp_path / "latin.toml"
    path.write_bytes(BASE.replace("Malformed", "Malform\xe9d").encode("latin-1"))
    assert main(["loads", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "UTF-8" in err


def test_several_errors_are_collected(tmp_path, capsys):
    text = (edit('"310 ft"', '"-10 m"').replace("power_factor = 0.95", "power_factor = 2")
            .replace('parent = "XFMR"', 'parent = "NOPE"'))
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    assert main(["loads", str(path)]) == 2
    lines = capsys.readouterr().err.splitlines()
    assert len(lines) == 3
    assert "field 'length'" in lines[0]
    assert "field 'power_factor'" in lines[1]
    assert "field 'parent'" in lines[2]


def test_many_errors_show_the_first_few(tmp_path, capsys):
    bad = "".join(f'\n[[node]]\nid = "B{i}"\nparent = "SWBD"\nlength = "-{i + 1} m"\n'
                  'ocpd = "20 A"\n' for i in range(12))
    path = tmp_path / "bad.toml"
    path.write_text(BASE + bad, encoding="utf-8")
    assert main(["loads", str(path)]) == 2
    lines = capsys.readouterr().err.splitlines()
    assert len(lines) == 6
    assert lines[-1] == "... and 7 more"


def test_csv_schedule_errors_name_the_csv(tmp_path, capsys):
    head = BASE.split("[[node]]")[0].replace('currency = "USD"\n',
                                            'currency = "USD"\nschedule = "circuits.csv"\n')
    (tmp_path / "head.toml").write_text(head, encoding="utf-8")
    csv = tmp_path / "circuits.csv"
    csv.write_text("id,parent,lenght,ocpd\nA,SERVICE,10 m,20 A\n", encoding="utf-8")
    assert main(["loads", str(csv)]) == 2
    err = capsys.readouterr().err.splitlines()
    assert err[0].removeprefix("sizer: ").startswith(f"{csv}: field 'lenght': unknown column")
    assert "did you mean 'length'" in err[0]


def test_csv_without_head(tmp_path, capsys):
    csv = tmp_path / "orphan.csv"
    csv.write_text("id,parent,length,ocpd\nA,SERVICE,10 m,20 A\n", encoding="utf-8")
    assert main(["loads", str(csv)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "needs a head file" in err


def test_nothing_written_on_bad_input(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text(edit('"310 ft"', '"-10 m"'), encoding="utf-8")
    before = sorted(p.name for p in Path(tmp_path).iterdir())
    assert main(["loads", str(path)]) == 2
    assert sorted(p.name for p in Path(tmp_path).iterdir()) == before


# --- issue 19: deeply nested TOML, a latin-1 schedule -----------------------------------------

DEEP = "deep = " + "[" * 500 + "]" * 500 + "\n"


def test_deeply_nested_toml_is_one_line(tmp_path, capsys):
    path = tmp_path / "deep.toml"
    path.write_text(DEEP + BASE, encoding="utf-8")
    assert main(["loads", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "Traceback" not in err and str(path) in err
    assert "nested" in err


def test_a_deeply_nested_file_beside_a_schedule_is_ignored(tmp_path, capsys):
    head = BASE.split("[[node]]")[0].replace('currency = "USD"\n',
                                            'currency = "USD"\nschedule = "circuits.csv"\n')
    (tmp_path / "head.toml").write_text(head, encoding="utf-8")
    (tmp_path / "other.toml").write_text(DEEP, encoding="utf-8")
    csv = tmp_path / "circuits.csv"
    csv.write_text("id,parent,length,ocpd\nA,SERVICE,10 m,20 A\n", encoding="utf-8")
    assert main(["loads", str(csv)]) == 0, capsys.readouterr().err


def test_a_latin1_schedule_is_one_line(tmp_path, capsys):
    head = BASE.split("[[node]]")[0].replace('currency = "USD"\n',
                                            'currency = "USD"\nschedule = "circuits.csv"\n')
    path = tmp_path / "head.toml"
    path.write_text(head, encoding="utf-8")
    csv = tmp_path / "circuits.csv"
    csv.write_bytes("id,parent,length,description\nA,SERVICE,10 m,caf\xe9\n".encode("latin-1"))
    assert main(["loads", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "UTF-8" in err and "no nodes" not in err
