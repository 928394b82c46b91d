"""A design is only ever made of rows a solver chose: the status says what a document is.

Regression cases for solver stops without a design (a time limit before any incumbent),
for ``sizer check`` and the report's pinned option agreeing, and for internal failures
being told apart from bad input (exit 3, not 2).
"""

from __future__ import annotations

import json
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from builders import write_scenario

import sizer.optimize as optimize_module
import sizer.workflow as workflow_module
from sizer.bench import synthetic_scenario
from sizer.cli import main
from sizer.engines import Solution, SolveStatus
from sizer.errors import InternalError
from sizer.model import DesignStatus
from sizer.optimize import Objective, check, optimise, prepare
from sizer.scenario import load_scenario
from sizer.workflow import check_verified, compare_options, frontier, solve_verified

NODES = """
[[node]]
id = "PANEL"
parent = "SRC"
length = "30 m"
ocpd = "100 A"

[[node]]
id = "MOTOR-1"
parent = "PANEL"
length = "60 m"
load = "20 kW"

[[node]]
id = "LIGHTS"
parent = "PANEL"
length = "40 m"
load = "8 kW"
"""


def _no_design_solver(problem, engine="auto", solver="cbc", time_limit_s=None, reuse=None):
    """What the MILP returns when its time limit passes before any incumbent."""
    return Solution(status=SolveStatus.TIME_LIMIT,
                    choice=np.full(problem.n_segments, -1, dtype=np.int64),
                    objective=float("nan"), proven_optimal=False, gap=None,
                    engine="milp-cbc", message="stopped at the time limit, no solution",
                    seconds=0.5)


@pytest.fixture
def prep(tmp_path: Path):
    return prepare(load_scenario(write_scenario(tmp_path, NODES)))


def test_time_limit_without_incumbent_is_no_design(prep, monkeypatch) -> None:
    monkeypatch.setattr(optimize_module, "solve", _no_design_solver)
    design = optimise(prep, Objective.LIFECYCLE, engine="milp", time_limit_s=0.5)
    assert design.status is DesignStatus.NO_DESIGN
    assert design.segments == () and design.choice == ()
    assert "time limit" in design.diagnosis[0]


def test_solve_verified_and_check_never_build_from_unchosen_rows(prep, monkeypatch) -> None:
    monkeypatch.setattr(optimize_module, "solve", _no_design_solver)
    design, ver = solve_verified(prep, Objective.CAPEX, engine="milp", time_limit_s=0.5)
    assert design.status is DesignStatus.NO_DESIGN and ver is None
    checked, ver = check_verified(prep, engine="milp", time_limit_s=0.5)
    assert checked.status is DesignStatus.NO_DESIGN and ver is None


def test_frontier_keeps_no_point_without_a_design(prep, monkeypatch) -> None:
    monkeypatch.setattr(workflow_module, "solve", _no_design_solver)
    assert frontier(prep, 4) == []


def test_a_real_time_limited_design_keeps_its_status(prep, monkeypatch) -> None:
    real = optimize_module.solve

    def stopped_early(problem, **kw):
        sol = real(problem, **kw)
        return replace(sol, status=SolveStatus.TIME_LIMIT, proven_optimal=False, gap=0.01)

    monkeypatch.setattr(optimize_module, "solve", stopped_early)
    design = optimise(prep, Objective.LIFECYCLE)
    assert design.status is DesignStatus.TIME_LIMIT and design.gap == 0.01
    assert len(design.segments) == 3 and all(r >= 0 for r in design.choice)


def test_cli_big_tree_short_time_limit_is_honest(tmp_path: Path, capsys) -> None:
    site = tmp_path / "big.toml"
    site.write_text(synthetic_scenario(400), encoding="utf-8")
    out = tmp_path / "r.json"
    code = main(["solve", str(site), "--engine", "milp", "--time-limit", "0.5",
                 "--json", str(out), "--quiet"])
    doc = json.loads(out.read_text())
    if code == 0:
        assert doc["status"] in ("optimal", "time_limit")
        # synthetic_scenario(400) gives 400 runs "give or take a panel": count the nodes
        assert len(doc["segments"]) == site.read_text(encoding="utf-8").count("[[node]]")
        assert all(s["size"] for s in doc["segments"])
    else:
        assert code == 1
        assert doc["status"] == "no_design" and doc["segments"] == []
        assert "time limit" in capsys.readouterr().out


PINNED = NODES.replace('load = "8 kW"', 'load = "8 kW"\nconductor = "14 AWG Cu"')


def test_check_and_the_pinned_option_agree(tmp_path: Path, capsys) -> None:
    # 14 AWG on a 40 m, 8 kW branch meets its ampacity row but not the load flow's total
    # drop limit: the check and the report's "as pinned" option must say the same.
    site = write_scenario(tmp_path, PINNED.replace('length = "40 m"', 'length = "90 m"')
                          .replace('load = "8 kW"', 'load = "3 kW"'))
    out = tmp_path / "check.json"
    code = main(["check", str(site), "--json", str(out)])
    doc = json.loads(out.read_text())
    scenario = load_scenario(site)
    pinned = prepare(scenario, keep_pins=True)
    checked, _ = check_verified(pinned)
    options = {o.key: o.design for o in compare_options(prepare(scenario))}
    assert doc["status"] == checked.status == options["as_pinned"].status
    assert code == (0 if checked.status is DesignStatus.COMPLIANT else 1)
    # and check() alone (rows only) never claims more than the verified status
    rows_only = check(pinned)
    if rows_only.status is DesignStatus.VIOLATIONS:
        assert checked.status is DesignStatus.VIOLATIONS


def test_internal_failure_exits_3_not_2(tmp_path: Path, monkeypatch, capsys) -> None:
    site = write_scenario(tmp_path, NODES)

    def broken(*_a, **_k):
        raise InternalError("the load flow does not converge at running load")

    monkeypatch.setattr(workflow_module, "verify_design", broken)
    code = main(["solve", str(site), "--quiet"])
    err = capsys.readouterr().err
    assert code == 3
    assert err.count("\n") == 1 and "internal error" in err and "please report" in err


def test_an_unexpected_exception_is_one_line_exit_3(tmp_path: Path, monkeypatch,
                                                    capsys) -> None:
    site = write_scenario(tmp_path, NODES)
    monkeypatch.delenv("SIZER_TRACEBACK", raising=False)

    def broken(*_a, **_k):
        raise ZeroDivisionError("float division by zero")

    monkeypatch.setattr(workflow_module, "verify_design", broken)
    assert main(["solve", str(site), "--quiet"]) == 3
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "ZeroDivisionError" in err


def test_statuses_have_one_wording() -> None:
    assert [s.value for s in DesignStatus] == [
        "optimal", "bounded", "time_limit", "no_design", "infeasible", "compliant", "violations"]
    assert all(s.words for s in DesignStatus)
    assert not DesignStatus.NO_DESIGN.has_design and DesignStatus.TIME_LIMIT.has_design
    assert DesignStatus.BOUNDED.has_design
