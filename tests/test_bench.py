"""`sizer bench` runs end to end on a small tree (speed itself is measured, not asserted)."""

import json

from sizer.bench import STAGES, synthetic_scenario
from sizer.cli import main
from sizer.optimize import prepare
from sizer.scenario import load_scenario


def test_synthetic_trees_are_valid_scenarios_of_the_asked_size(tmp_path):
    kinds = set()
    for n in (50, 400):
        path = tmp_path / f"b{n}.toml"
        path.write_text(synthetic_scenario(n), encoding="utf-8")
        prep = prepare(load_scenario(path))
        assert n <= len(prep.segments) <= n + 45        # whole panels are added
        kinds |= {s.node.transformer is not None for s in prep.segments}
    assert kinds == {True, False}                      # lighting transformers present


def test_bench_command_writes_every_stage(tmp_path, capsys):
    out = tmp_path / "bench.json"
    assert main(["bench", "--sizes", "60", "--repeats", "1", "--milp-time-limit", "5",
                 "--json", str(out), "--quiet"]) == 0
    doc = json.loads(out.read_text())
    (size,) = doc["sizes"]
    assert set(size["stages_s"]) == set(STAGES)
    assert size["candidates"] > 0 and size["milp_status"] in ("optimal", "time_limit")
    assert doc["machine"]["cores"] >= 1
    assert set(doc["startup_s"]) == {"help", "reach"}  # beside the stages (issue 17)
    assert all(t > 0 for t in doc["startup_s"].values())
    out = capsys.readouterr().out
    assert "segments" in out and "start-up, fresh process, wall: sizer help" in out
