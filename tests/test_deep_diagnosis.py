"""A diagnosis stays a few readable lines however deep the tree (issue 18).

Down a riser hundreds of runs deep whose far end cannot be protected, every run below
the first failure fails too. Naming each of those paths in full made the text grow with
the square of the depth (1.7 GB of JSON and 3.5 minutes at 20,000 runs): the diagnosis
names each branch's first failure, counts the middle of a long path and the runs below.
"""

from __future__ import annotations

import json
import re

from sizer.cli import main

_HEAD = """\
[project]
title = "deep riser that cannot be protected"
rules = "nec"
currency = "USD"

[economics]
energy_price = "0.12 USD/kWh"
discount_rate = "7 %"
lifetime = "25 year"
load_factor = 0.55

[source]
id = "UTIL"
voltage = "480 V"
phases = 3
fault_current = "50 kA"
x_r = 8
"""


def _riser(depth: int, run_ft: int) -> str:
    """Runs of ``run_ft`` in series, a small 277 V load every ten floors (invented)."""
    lines = [_HEAD]
    parent = "UTIL"
    for i in range(depth):
        lines += ["[[node]]", f'id = "R{i}"', f'parent = "{parent}"',
                  f'length = "{run_ft} ft"', ""]
        if i % 10 == 9:
            lines += ["[[node]]", f'id = "L{i}"', f'parent = "R{i}"', 'length = "30 ft"',
                      "phases = 1", 'voltage = "277 V"', 'load = "0.5 A"', ""]
        parent = f"R{i}"
    return "\n".join(lines)


def test_a_deep_riser_that_cannot_be_protected_is_diagnosed_in_a_few_lines(tmp_path):
    scenario = tmp_path / "riser.toml"
    scenario.write_text(_riser(300, 400), encoding="utf-8")
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
