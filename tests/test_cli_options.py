"""Command-line values are read like the scenario (issue 19, items 6 and 7).

Every option goes through a bounded reader: a value the scenario reader would refuse,
or one that is nonsense for the option (no frontier points, a negative time limit), is
one line naming the option, exit code 2, before any work and without a warning.
"""

from __future__ import annotations

import io
import json
import warnings
from contextlib import redirect_stderr, redirect_stdout
from pathlib import Path

import pytest
from builders import write_scenario

from sizer.cli import main

NODES = """
[[node]]
id = "PANEL"
parent = "SRC"
length = "20 m"

[[node]]
id = "M1"
parent = "PANEL"
length = "15 m"
load = "10 A"
"""

REACH = ["reach", "--conductor", "4 AWG Cu", "--insulation", "90 degC", "--voltage", "240 V",
         "--phases", "1", "--limit", "3 %"]


def run(*argv: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with warnings.catch_warnings():
        warnings.simplefilter("error")      # a warning is a failure, not a line of output
        with redirect_stdout(out), redirect_stderr(err):
            code = main(list(argv))
    return code, out.getvalue(), err.getvalue()


def refused(code: int, out: str, err: str, option: str) -> None:
    assert code == 2, (out, err)
    assert len(err.splitlines()) == 1, err
    assert "Traceback" not in err and option in err, err
    assert out == ""


@pytest.fixture
def site(tmp_path: Path) -> Path:
    return write_scenario(tmp_path, NODES)


# --- item 6: sizer reach ---------------------------------------------------------------------


def test_an_overloaded_conductor_is_no_answer():
    # 5,000 A on 4 AWG used to print "0.7 m" and exit 0: now the warning says why the
    # reach is no answer and the exit code is 1 (a rule failed), as for any run over its
    # ampacity.
    code, out, err = run(*REACH, "--current", "5000 A", "--json")
    assert code == 1
    assert "over its ampacity" in err and len(err.splitlines()) == 1
    assert "over its ampacity" in json.loads(out)["warnings"][0]


@pytest.mark.parametrize(("option", "value"), [
    ("--limit", "-3 %"),            # "reach -81 m"
    ("--limit", "0 %"),
    ("--limit", "150 %"),
    ("--current", "1e300 A"),       # a RuntimeWarning before
    ("--current", "-5 A"),
    ("--ambient", "-273 degC"),
    ("--ambient", "500 degC"),
    ("--insulation", "-5 degC"),
    ("--voltage", "0 V"),
    ("--voltage", "13.8 kV"),       # not low voltage
    ("--ocpd", "1e300 A"),
    ("--terminals", "1000 degC"),
    ("--conductor-temperature", "-300 degC"),
    ("--power-factor", "nan"),
])
def test_reach_refuses_nonsense(option, value):
    argv = list(REACH)
    if option in argv:
        argv[argv.index(option) + 1] = value
    else:
        argv += [option, value]
    if "--current" not in argv and "--ocpd" not in argv:
        argv += ["--current", "50 A"]
    refused(*run(*argv), option)


def test_reach_still_answers_a_sane_question():
    code, out, err = run(*REACH, "--current", "50 A")
    assert code == 0 and err == "" and " m (" in out


# --- item 7: every other option --------------------------------------------------------------


@pytest.mark.parametrize(("argv", "option"), [
    (["bench", "--sizes", "abc"], "--sizes"),
    (["bench", "--sizes", "100,,"], "--sizes"),
    (["bench", "--sizes", "1e9"], "--sizes"),
    (["bench", "--milp-time-limit", "-5"], "--milp-time-limit"),
    (["bench", "--milp-time-limit", "nan"], "--milp-time-limit"),
    (["bench", "--repeats", "0"], "--repeats"),
    (["bench", "--chain", "-1"], "--chain"),
    (["bench", "--chain", "2e6"], "--chain"),
    (["bench", "--panel", "half"], "--panel"),
    (["bench", "--case-timeout", "0"], "--case-timeout"),
    (["bench", "--case-timeout", "inf"], "--case-timeout"),
])
def test_bench_options(argv, option):
    refused(*run(*argv), option)


@pytest.mark.parametrize("verb", ["solve", "check", "frontier", "sweep"])
@pytest.mark.parametrize("value", ["-5", "0", "nan", "inf", "abc"])
def test_time_limit(site, verb, value):
    extra = ["--vary", "copper=8:9:2"] if verb == "sweep" else []
    refused(*run(verb, str(site), *extra, "--time-limit", value), "--time-limit")


@pytest.mark.parametrize("value", ["0", "-5", "1", "abc", "100000"])
def test_frontier_points(site, value):
    refused(*run("frontier", str(site), "--points", value), "--points")


@pytest.mark.parametrize("value", ["0", "-1", "abc"])
def test_sweep_jobs(site, value):
    refused(*run("sweep", str(site), "--vary", "copper=8:9:2", "--jobs", value), "--jobs")


@pytest.mark.parametrize("vary", [
    "copper=1e308:1.5e308:3",        # eight overflow warnings before
    "copper=2e6:3e6:2",              # above the reader's price bound (1e6 per kg)
    "copper=0:5:3",                  # the reader wants a positive metal price
    "aluminium=-1:2:2",
    "energy_price=2e6:3e6:2",
    "energy_price=1e6,1e300",
    "demand_charge=1e7",
])
def test_sweep_values_are_bounded_like_the_reader(site, vary):
    refused(*run("sweep", str(site), "--vary", vary, "--jobs", "1"), "--vary")


def test_a_bad_choice_is_one_line(site):
    refused(*run("solve", str(site), "--engine", "quantum"), "--engine")
