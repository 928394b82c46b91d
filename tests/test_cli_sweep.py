"""`sizer sweep` through the command line (the sweep itself: test_sweep.py)."""

import json

from builders import write_scenario

from sizer.cli import main

ONE_BRANCH = """
[[node]]
id = "M"
parent = "SRC"
length = "300 ft"
load = "120 A"
"""


def test_sweep_writes_json_and_report(tmp_path, capsys):
    path = write_scenario(tmp_path, ONE_BRANCH)
    out, report = tmp_path / "sweep.json", tmp_path / "sweep.html"
    code = main(["sweep", str(path), "--vary", "energy_price=0.05:0.30:3", "--json", str(out),
                 "--report", str(report), "--quiet"])
    assert code == 0
    doc = json.loads(out.read_text())
    assert doc["fields"] == ["energy_price"] and len(doc["points"]) == 3
    assert 'id="sweep"' in report.read_text()
    assert "licensed professional" in capsys.readouterr().out


def test_bad_range_is_one_line_and_exit_2(tmp_path, capsys):
    path = write_scenario(tmp_path, ONE_BRANCH)
    out = tmp_path / "sweep.json"
    assert main(["sweep", str(path), "--vary", "energy_price=0.3:x:3", "--json", str(out)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "energy_price" in err
    assert not out.exists()
