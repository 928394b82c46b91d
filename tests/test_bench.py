"""`sizer bench` runs the real commands end to end (speed is measured, never asserted)."""

import json

from sizer.bench import (
    STAGES,
    deep_chain_scenario,
    default_cases,
    synthetic_scenario,
    wide_panel_scenario,
)
from sizer.cli import main
from sizer.optimize import prepare
from sizer.scenario import load_scenario
from sizer.stages import ENV


def test_synthetic_trees_are_valid_scenarios_of_the_asked_size(tmp_path):
    kinds = set()
    for n in (50, 400):
        path = tmp_path / f"b{n}.toml"
        path.write_text(synthetic_scenario(n), encoding="utf-8")
        prep = prepare(load_scenario(path))
        assert n <= len(prep.segments) <= n + 45        # whole panels are added
        kinds |= {s.node.transformer is not None for s in prep.segments}
    assert kinds == {True, False}                      # lighting transformers present


def test_chain_and_panel_have_the_asked_shape(tmp_path):
    chain = tmp_path / "chain.toml"
    chain.write_text(deep_chain_scenario(250), encoding="utf-8")
    prep = prepare(load_scenario(chain))
    assert int(prep.topology.depth.max()) == 251  # 250 risers and the last load
    panel = tmp_path / "panel.toml"
    panel.write_text(wide_panel_scenario(300), encoding="utf-8")
    prep = prepare(load_scenario(panel))
    assert len(prep.topology.children[0]) == 300


def test_the_cli_records_its_own_stages_when_asked(tmp_path, monkeypatch):
    path = tmp_path / "b.toml"
    path.write_text(synthetic_scenario(60), encoding="utf-8")
    log = tmp_path / "stages.json"
    monkeypatch.setenv(ENV, str(log))
    assert main(["solve", str(path), "--json", str(tmp_path / "d.json"), "--quiet"]) == 0
    doc = json.loads(log.read_text())
    names = [s["stage"] for s in doc["stages"]]
    for stage in ("read", "currents", "candidates", "engine", "verify", "write",
                  "write/json", "summary"):
        assert stage in names
    assert {s["stage"].split("/")[0] for s in doc["stages"]} <= set(STAGES)
    top = sum(s["seconds"] for s in doc["stages"] if "/" not in s["stage"])
    assert top <= doc["wall_s"]                        # nested stages are not counted twice
    assert doc["counts"]["segments"] >= 60 and doc["counts"]["candidate_rows"] > 0


def test_without_the_variable_nothing_is_recorded(tmp_path, monkeypatch):
    monkeypatch.delenv(ENV, raising=False)
    path = tmp_path / "b.toml"
    path.write_text(synthetic_scenario(60), encoding="utf-8")
    assert main(["solve", str(path), "--quiet"]) == 0
    assert not list(tmp_path.glob("*.json"))


def test_the_issue_targets_are_the_default_cases():
    cases = {c.name: c for c in default_cases()}
    assert cases["building 20000: solve --json"].target_s == 4.0
    assert cases["building 20000: solve --json"].target_mb == 1024.0
    assert cases["building 20000: solve --json --csv --report"].target_s == 10.0
    assert cases["building 100000: solve --json"].target_s == 20.0
    assert cases["chain 20000 deep: solve --json --report"].target_s == 10.0
    assert cases["panel of 50000: solve --json"].target_mb == 2048.0
    assert cases["building 5000: frontier --points 20"].target_s == 5.0


def test_bench_command_runs_every_case_through_the_cli(tmp_path, capsys):
    out = tmp_path / "bench.json"
    assert main(["bench", "--sizes", "60", "--chain", "30", "--panel", "40", "--repeats", "1",
                 "--milp-time-limit", "5", "--json", str(out), "--quiet"]) == 0
    doc = json.loads(out.read_text())
    shapes = [c["shape"] for c in doc["cases"]]
    assert shapes == ["building", "building", "chain", "panel"]
    for case in doc["cases"]:
        assert case["exit_code"] == 0, case["stderr_tail"]
        assert case["peak_mb"] > 0 and case["wall_s"] > 0
        names = {s["stage"] for s in case["stages"]}
        assert {"read", "candidates", "engine", "verify", "write"} <= names
        assert set(case["floors_s"]) >= {"read", "candidates", "engine", "verify", "write"}
    full = doc["cases"][1]
    assert {"write/json", "write/csv", "write/report"} <= {s["stage"] for s in full["stages"]}
    assert full["output_bytes"]["report.html"] > 0
    (compare,) = doc["engine_compare"]
    assert compare["milp_status"] in ("optimal", "time_limit")
    assert doc["machine"]["cores"] >= 1
    assert set(doc["startup_s"]) == {"help", "reach"}  # beside the stages (issue 17)
    text = capsys.readouterr().out
    assert "x floor" in text and "start-up, fresh process, wall: sizer help" in text


def test_a_case_running_too_long_is_stopped_and_said_so(tmp_path):
    from sizer.bench import SOLVE_JSON, Case, run_case

    path = tmp_path / "b.toml"
    path.write_text(synthetic_scenario(400), encoding="utf-8")
    out = tmp_path / "out"
    out.mkdir()
    result = run_case(Case("slow", "building", 400, SOLVE_JSON), path, out, timeout_s=0.05)
    assert result["timed_out"] is True and result["exit_code"] != 0
    assert "stopped after 0.05 s" in result["stderr_tail"][0]


def test_the_report_options_do_not_overwrite_the_runs_own_counts(tmp_path, monkeypatch):
    path = tmp_path / "b.toml"
    path.write_text(synthetic_scenario(60), encoding="utf-8")
    log = tmp_path / "stages.json"
    monkeypatch.setenv(ENV, str(log))
    assert main(["solve", str(path), "--quiet"]) == 0
    plain = json.loads(log.read_text())
    alone = plain["counts"]["candidate_rows"]
    # a plain solve has no alternatives and no frontier: their stages are not marked
    assert not {"alternatives", "frontier_verify"} & {s["stage"] for s in plain["stages"]}
    assert main(["solve", str(path), "--report", str(tmp_path / "r.html"), "--quiet"]) == 0
    doc = json.loads(log.read_text())
    assert doc["counts"]["candidate_rows"] == alone   # not the all-copper option's table
    # the options, the drivers' solve and the frontier's weights run side by side
    assert {"alternatives", "frontier_verify"} <= {s["stage"] for s in doc["stages"]}


def test_frontier_marks_its_stage(tmp_path, monkeypatch):
    path = tmp_path / "b.toml"
    path.write_text(synthetic_scenario(60), encoding="utf-8")
    log = tmp_path / "stages.json"
    monkeypatch.setenv(ENV, str(log))
    assert main(["frontier", str(path), "--points", "3", "--quiet"]) == 0
    assert "frontier" in {s["stage"] for s in json.loads(log.read_text())["stages"]}
