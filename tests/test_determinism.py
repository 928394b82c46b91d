"""Determinism of the data files (issue 9, item 2).

The same input gives byte-identical JSON and CSV: twice in one process, in two processes
with different string-hash seeds (set and dict order must not leak into the files), and
with either engine. The tree engine and the MILP solve the same problem, so their optimum
totals agree; where no tie separates them they choose the same conductors and write the
same schedule. Data files carry no timestamps or run times (those belong in the human
report only).
"""

from __future__ import annotations

import io
import json
import os
import re
import subprocess
import sys
import zipfile
from contextlib import redirect_stderr, redirect_stdout
from pathlib import Path
from typing import Any

import pytest
from hypothesis import HealthCheck, given, settings
from test_fuzz import valid_cases, write_case

from sizer.cli import main

ROOT = Path(__file__).resolve().parent.parent
DEMOS = sorted((ROOT / "scenarios").glob("*.toml"))
# A date (2024-05-01, 01/05/2024) or a clock time (13:45, 13:45:07): no data file has one.
TIMESTAMP = re.compile(r"\b\d{4}-\d{2}-\d{2}\b|\b\d{1,2}/\d{1,2}/\d{2,4}\b"
                       r"|\b\d{1,2}:\d{2}(:\d{2})?\b")
# A duration in seconds ("total 0.32 s"): no run time in the notes (a clearing time in a
# finding's message is data, not a run time).
SECONDS = re.compile(r"\b\d+(\.\d+)? ?s\b")
# The fields that name the engine and how it ran; everything else is the design.
ENGINE_FIELDS = ("engine", "notes", "gap", "proven_optimal")


def solve(scenario: Path, folder: Path, *extra: str, engine: str = "tree") -> tuple[bytes, bytes]:
    """Run ``sizer solve`` into ``folder``; return the JSON and CSV bytes."""
    folder.mkdir(parents=True, exist_ok=True)
    out_json, out_csv = folder / "design.json", folder / "schedule.csv"
    with redirect_stdout(io.StringIO()), redirect_stderr(io.StringIO()) as err:
        code = main(["solve", str(scenario), "--json", str(out_json), "--csv", str(out_csv),
                     "--engine", engine, "--quiet", *extra])
    assert code == 0, err.getvalue()
    return out_json.read_bytes(), out_csv.read_bytes()


def design_part(doc: dict[str, Any]) -> dict[str, Any]:
    return {k: v for k, v in doc.items() if k not in ENGINE_FIELDS}


@pytest.mark.parametrize("scenario", DEMOS, ids=[p.stem for p in DEMOS])
@pytest.mark.parametrize("objective", ["lifecycle", "capex"])
def test_tree_engine_twice_gives_the_same_bytes(tmp_path, scenario, objective):
    first = solve(scenario, tmp_path / "a", "--objective", objective)
    second = solve(scenario, tmp_path / "b", "--objective", objective)
    assert first[0] == second[0]
    assert first[1] == second[1]


@pytest.mark.parametrize("scenario", DEMOS, ids=[p.stem for p in DEMOS])
def test_milp_twice_gives_the_same_bytes(tmp_path, scenario):
    first = solve(scenario, tmp_path / "a", engine="milp")
    second = solve(scenario, tmp_path / "b", engine="milp")
    assert first[0] == second[0]
    assert first[1] == second[1]


def test_milp_results_carry_no_run_time(tmp_path):
    # Found by this file: the MILP's note carried "build 0.03 s, total 0.32 s" (fixed).
    doc = json.loads(solve(DEMOS[0], tmp_path, engine="milp")[0])
    assert not [n for n in doc.get("notes", []) if SECONDS.search(n)], doc["notes"]


@pytest.mark.parametrize("scenario", DEMOS, ids=[p.stem for p in DEMOS])
@pytest.mark.parametrize("objective", ["lifecycle", "capex"])
def test_tree_and_milp_agree(tmp_path, scenario, objective):
    tree = json.loads(solve(scenario, tmp_path / "tree", "--objective", objective)[0])
    milp = json.loads(solve(scenario, tmp_path / "milp", "--objective", objective,
                            engine="milp")[0])
    assert tree["status"] == milp["status"] == "optimal"
    # Both prove optimality, so the objective is the same (ties may split it differently).
    key = "lifecycle" if objective == "lifecycle" else "capex"
    assert milp["totals"][key] == pytest.approx(tree["totals"][key], rel=1e-6)
    choice = [(s["id"], s["material"], s["size"], s["sets"]) for s in tree["segments"]]
    if choice == [(s["id"], s["material"], s["size"], s["sets"]) for s in milp["segments"]]:
        assert design_part(tree) == design_part(milp)


def test_another_process_and_hash_seed_gives_the_same_bytes(tmp_path):
    """Set and dict order must not reach the files: a fresh interpreter, other hash seed."""
    scenario = ROOT / "scenarios" / "kiln-hall.toml"
    outputs = []
    for seed in ("1", "2"):
        folder = tmp_path / seed
        folder.mkdir()
        env = {**os.environ, "PYTHONHASHSEED": seed}
        run = subprocess.run(
            [sys.executable, "-m", "sizer.cli", "solve", str(scenario), "--quiet",
             "--json", str(folder / "design.json"), "--csv", str(folder / "schedule.csv")],
            env=env, capture_output=True, text=True, timeout=120, check=False)
        assert run.returncode == 0, run.stderr
        outputs.append(((folder / "design.json").read_bytes(),
                        (folder / "schedule.csv").read_bytes()))
    assert outputs[0] == outputs[1]
    assert outputs[0] == solve(scenario, tmp_path / "here")   # and the same as in-process


def test_data_files_carry_no_timestamps(tmp_path):
    scenario = ROOT / "scenarios" / "kiln-hall.toml"
    with redirect_stdout(io.StringIO()), redirect_stderr(io.StringIO()):
        assert main(["solve", str(scenario), "--quiet", "--json", str(tmp_path / "d.json"),
                     "--csv", str(tmp_path / "s.csv"), "--xlsx", str(tmp_path / "s.xlsx")]) == 0
    for name in ("d.json", "s.csv"):
        text = (tmp_path / name).read_text(encoding="utf-8")
        assert not TIMESTAMP.search(text), (name, TIMESTAMP.search(text))
    notes = json.loads((tmp_path / "d.json").read_text(encoding="utf-8")).get("notes", [])
    assert not [n for n in notes if SECONDS.search(n)], notes
    first = (tmp_path / "s.xlsx").read_bytes()
    with zipfile.ZipFile(io.BytesIO(first)) as book:
        assert {info.date_time for info in book.infolist()} == {(1980, 1, 1, 0, 0, 0)}
        core = book.read("docProps/core.xml").decode("utf-8")
    assert not re.search(r"20[2-9]\d-", core), core    # no date of the run
    with redirect_stdout(io.StringIO()), redirect_stderr(io.StringIO()):
        assert main(["solve", str(scenario), "--quiet", "--xlsx",
                     str(tmp_path / "again.xlsx")]) == 0
    assert (tmp_path / "again.xlsx").read_bytes() == first


# Random trees (the fuzz generator's valid scenarios, small): each engine twice gives the
# same bytes; the two engines agree on the optimum. 20 examples in the ci profile.
@settings(max_examples=20 * max(1, settings.default.max_examples // 60), deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture,
                                 HealthCheck.filter_too_much])
@given(valid_cases(max_nodes=8))
def test_random_scenarios_are_deterministic_and_engines_agree(tmp_path_factory, case):
    folder = tmp_path_factory.mktemp("case")
    path = write_case(folder, case)
    runs = {}
    for engine, tag in (("tree", "t1"), ("tree", "t2"), ("milp", "m1")):
        out_json, out_csv = folder / f"{tag}.json", folder / f"{tag}.csv"
        with redirect_stdout(io.StringIO()), redirect_stderr(io.StringIO()):
            code = main(["solve", str(path), "--json", str(out_json), "--csv", str(out_csv),
                         "--engine", engine, "--quiet"])
        runs[tag] = (code, out_json.read_bytes() if out_json.exists() else None,
                     out_csv.read_bytes() if out_csv.exists() else None)
    assert runs["t1"] == runs["t2"]
    assert runs["t1"][0] == runs["m1"][0]
    if runs["t1"][0] == 0:
        tree, milp = json.loads(runs["t1"][1]), json.loads(runs["m1"][1])
        assert milp["totals"]["lifecycle"] == pytest.approx(tree["totals"]["lifecycle"],
                                                            rel=1e-6, abs=1e-6)
