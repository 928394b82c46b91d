"""Odd text, odd numbers and odd endings (issue 19, item 8).

Line and paragraph separators, C1 controls and bidirectional overrides in a name are
escaped before they reach the terminal (an error stays one line; nothing reorders or
restyles what the user sees); a huge number is shown short; the diagnosis never
suggests more parallel sets than the reader allows; a closed pipe ends the run quietly;
an infeasible design still gets its report, with the diagnosis; a name in a script the
plot font lacks draws without a warning.
"""

from __future__ import annotations

import io
import json
import subprocess
import sys
import warnings
from contextlib import redirect_stderr, redirect_stdout
from types import SimpleNamespace

import pytest
from builders import write_scenario

from sizer.cli import main

# Every character that must not reach a terminal raw: line and paragraph separators,
# C1 controls (NEL, CSI), bidirectional embeddings, overrides and isolates, ESC.
ODD = ["\x85", "\u2028", "\u2029", "\x9b", "\u202e", "\u202d", "\u2066", "\u2069",
       "\u200f", "\u061c", "\x1b"]


def run(*argv: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with redirect_stdout(out), redirect_stderr(err):
        code = main(list(argv))
    return code, out.getvalue(), err.getvalue()


def nodes(name: str, length: str = "15 m") -> str:
    return f"""
[[node]]
id = "PANEL"
parent = "SRC"
length = "20 m"

[[node]]
id = {json.dumps(name)}
parent = "PANEL"
length = "{length}"
load = "10 A"
"""


@pytest.mark.parametrize("odd", [c for c in ODD if c != "\x1b"])
def test_an_error_naming_an_odd_id_is_one_line(tmp_path, odd):
    site = write_scenario(tmp_path, nodes(f"M{odd}1", length="-15 m"))
    code, _out, err = run("loads", str(site))
    assert code == 2
    assert len(err.splitlines()) == 1, err          # str.splitlines splits at NEL, U+2028
    assert not any(c in err for c in ODD)
    assert "M\\" in err


@pytest.mark.parametrize("odd", [c for c in ODD if c != "\x1b"])
def test_the_summary_escapes_odd_ids(tmp_path, odd):
    site = write_scenario(tmp_path, nodes(f"M{odd}1"))
    for verb in ("solve", "loads"):
        code, out, err = run(verb, str(site), *(["--quiet"] if verb == "solve" else []))
        assert code == 0, err
        assert not any(c in out + err for c in ODD)
        assert "M\\" in out


def test_the_files_keep_names_exactly(tmp_path):
    name = "M\u202e1\x85x"
    site = write_scenario(tmp_path, nodes(name))
    code, _, err = run("solve", str(site), "--json", str(tmp_path / "d.json"), "--quiet")
    assert code == 0, err
    doc = json.loads((tmp_path / "d.json").read_text(encoding="utf-8"))
    assert name in {s["id"] for s in doc["segments"]}


@pytest.mark.parametrize("field", ["motor = { kw = 1" + "0" * 300 + " }",
                                   "motor = { kw = 1" + "0" * 400 + " }",
                                   "ocpd = 1" + "0" * 300,
                                   "ocpd = 1" + "0" * 5000])     # past Python's int limit
def test_a_huge_number_is_shown_short(tmp_path, field):
    text = nodes("M1").replace('load = "10 A"', field)
    site = write_scenario(tmp_path, text)
    code, _out, err = run("loads", str(site))
    assert code == 2 and "Traceback" not in err
    # One line per error (the motor's node and the panel feeding it), each short.
    assert all(len(line) < 300 for line in err.splitlines()) and "0" * 20 not in err, err


def test_the_diagnosis_never_suggests_more_sets_than_allowed():
    from sizer.optimize import _drop_fixes
    from sizer.readers import MAX_SETS

    for sets in (1, 4, 12, MAX_SETS):
        seg = SimpleNamespace(node=SimpleNamespace(cable=SimpleNamespace(max_sets=sets)),
                              length_m=100.0)
        text = _drop_fixes(seg, best_pct=35.0, target_pct=4.0)   # 8.75 times too much
        if "max_sets" in text:
            suggested = int(text.split("→")[1].split(")")[0].split(",")[0])
            assert sets < suggested <= MAX_SETS, text
        if sets == MAX_SETS:
            assert "max_sets" not in text


def test_a_closed_pipe_ends_quietly(tmp_path):
    many = "".join(f'\n[[node]]\nid = "L{i}"\nparent = "PANEL"\nlength = "10 m"\n'
                   f'load = "0.1 A"\n' for i in range(3000))
    site = write_scenario(tmp_path, nodes("M1") + many)
    proc = subprocess.Popen([sys.executable, "-m", "sizer.cli", "loads", str(site)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    assert proc.stdout is not None
    proc.stdout.read(10)
    proc.stdout.close()                               # as `| head -c 10` does
    _, err = proc.communicate(timeout=120)
    assert b"Traceback" not in err and b"Exception ignored" not in err, err
    assert err == b""
    assert proc.returncode in (0, 141), proc.returncode   # 141 = 128 + SIGPIPE


def test_an_infeasible_design_still_gets_its_report(tmp_path):
    # 400 A over 2 km at 480 V with one set: no size meets the drop limit.
    text = nodes("FAR", length="2 km").replace('load = "10 A"', 'load = "400 A"')
    site = write_scenario(tmp_path, text, max_sets=1)
    report = tmp_path / "report.html"
    code, _out, err = run("solve", str(site), "--report", str(report), "--quiet")
    assert code == 1, err
    html = report.read_text(encoding="utf-8")
    assert "FAR" in html and "licensed professional" in html
    assert "no design" in html.lower() or "infeasible" in html.lower()


@pytest.mark.parametrize("name", ["配电柜", "🔌 panel", "ᚠᚢᚦ", "\U0001d4d0"])
def test_a_name_the_font_lacks_draws_without_warnings(tmp_path, name):
    from sizer.report.plots import cost_breakdown_figure, png_bytes

    rows = [SimpleNamespace(segment=name, capex=100.0, loss_pv=50.0)]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        png = png_bytes(cost_breakdown_figure(rows, "USD", 25.0))
    assert png.startswith(b"\x89PNG")
