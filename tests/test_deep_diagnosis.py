"""A diagnosis stays a few readable lines however deep the tree (issue 18).

Down a riser hundreds of runs deep whose far end cannot be protected, every run below
the first failure fails too. Naming each of those paths in full made the text grow with
the square of the depth (1.3 GB of JSON and 3.5 minutes at 20,000 runs): the diagnosis
names each branch's first failure, counts the middle of a long path and the runs below.
"""

from __future__ import annotations

import json
import re

from sizer.bench import deep_chain_scenario
from sizer.cli import main


def test_a_deep_riser_that_cannot_be_protected_is_diagnosed_in_a_few_lines(tmp_path):
    scenario = tmp_path / "riser.toml"
    # invented: 400 ft runs, a small load every ten floors
    scenario.write_text(deep_chain_scenario(300, run_ft=400, tap_every=10), encoding="utf-8")
    out = tmp_path / "design.json"
    assert main(["solve", str(scenario), "--json", str(out), "--quiet"]) == 1
    lines = json.loads(out.read_text(encoding="utf-8"))["diagnosis"]
    assert 2 <= len(lines) <= 5
    first = lines[0]
    # the path's ends are named, the runs between counted
    assert first.startswith("path UTIL → R0 → R1 → R2 → R3 → (")
    assert re.search(r"→ \((\d+) runs\) →", first)
    assert "disconnects" in first and len(first) < 1000
    # the runs below the first failure are counted, not listed
    more = [x for x in lines if "more runs fed through the paths above" in x]
    assert len(more) == 1 and int(more[0].split()[0]) > 50
    assert sum(map(len, lines)) < 3000
