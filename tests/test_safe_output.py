"""Safe output (issue 9, items 3 and 7).

Every file is written beside its target and renamed into place: a failure while writing
leaves the previous file intact and no temporary file behind. The input scenario is
never overwritten; an output folder that does not exist, or bad input, writes nothing.
Names from the scenario are data everywhere: a leading =, +, -, @ is neutralised in the
CSV schedule (a leading apostrophe, the OWASP advice for CSV injection), XLSX cells are
typed text, and the HTML report escapes markup.
"""

from __future__ import annotations

import csv
import errno
import io
import json
import os
from contextlib import redirect_stderr, redirect_stdout
from pathlib import Path

import pytest
from builders import write_scenario

from sizer import outputs
from sizer.cli import main
from sizer.errors import SizerError
from sizer.report.export import atomic_write

FORMULA_IDS = ("=cmd|' /C calc'!A0", "+SUM(A1)", "-2+3", "@SUM(1)")
MARKUP = "<script>alert(1)</script>"
NODES = """
[[node]]
id = "=PANEL"
parent = "SRC"
length = "20 m"
description = "<img src=x onerror=alert(1)>"
""" + "".join(f"""
[[node]]
id = {json.dumps(node_id)}
parent = "=PANEL"
length = "{10 + i} m"
load = "{5 + i} A"
""" for i, node_id in enumerate((*FORMULA_IDS, MARKUP)))
TITLE = "<b>Plant</b> & =HYPERLINK(\\\"http://x\\\")"


def run(*argv: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with redirect_stdout(out), redirect_stderr(err):
        code = main(list(argv))
    return code, out.getvalue(), err.getvalue()


def files(folder: Path) -> dict[str, bytes]:
    """Every file under ``folder`` (names relative to it) with its bytes."""
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*"))
            if p.is_file()}


@pytest.fixture
def site(tmp_path: Path) -> Path:
    return write_scenario(tmp_path, NODES, title=TITLE)


def no_space(*_args: object, **_kwargs: object) -> None:
    raise OSError(errno.ENOSPC, "No space left on device")


# --- atomic writes --------------------------------------------------------------------------


@pytest.mark.parametrize("fail_at", ["replace", "fsync"])
def test_a_failed_write_keeps_the_previous_file(tmp_path, site, monkeypatch, fail_at):
    target = tmp_path / "design.json"
    target.write_text("previous\n", encoding="utf-8")
    before = files(tmp_path)
    monkeypatch.setattr(outputs.os, fail_at, no_space)
    with pytest.raises((OSError, SizerError), match="No space"):
        atomic_write(target, "new\n", protect=[site])
    assert files(tmp_path) == before          # previous intact, no temporary file left


def test_an_interrupted_solve_keeps_the_previous_outputs(tmp_path, site, monkeypatch):
    previous = {"design.json": "old json\n", "schedule.csv": "old csv\n"}
    for name, text in previous.items():
        (tmp_path / name).write_text(text, encoding="utf-8")
    before = files(tmp_path)

    def interrupt(*_args: object) -> None:
        raise KeyboardInterrupt

    monkeypatch.setattr(outputs.os, "replace", interrupt)
    code, _, err = run("solve", str(site), "--json", str(tmp_path / "design.json"),
                       "--csv", str(tmp_path / "schedule.csv"), "--quiet")
    assert code == 130 and err == "sizer: interrupted\n"
    assert files(tmp_path) == before


def test_a_successful_write_replaces_the_file_whole(tmp_path, site):
    target = tmp_path / "design.json"
    target.write_text("previous\n", encoding="utf-8")
    code, _, err = run("solve", str(site), "--json", str(target), "--quiet")
    assert code == 0, err
    assert json.loads(target.read_text(encoding="utf-8"))["status"] == "optimal"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["design.json", "site.toml"]


def test_a_write_error_is_one_line_and_exit_2(tmp_path, site, monkeypatch):
    target = tmp_path / "design.json"
    target.write_text("previous\n", encoding="utf-8")
    before = files(tmp_path)
    monkeypatch.setattr(outputs.os, "replace", no_space)
    code, _, err = run("solve", str(site), "--json", str(target), "--quiet")
    assert code == 2
    assert len(err.splitlines()) == 1 and "Traceback" not in err and str(target) in err
    assert files(tmp_path) == before


# --- the input is never overwritten ----------------------------------------------------------


@pytest.mark.parametrize("option", ["--json", "--csv", "--xlsx", "--report"])
def test_an_output_naming_the_scenario_is_refused(tmp_path, site, option):
    before = files(tmp_path)
    code, out, err = run("solve", str(site), option, str(site), "--quiet")
    assert code == 2
    assert err.splitlines() == [f"{site}: refusing to overwrite the input scenario"]
    assert out == ""
    assert files(tmp_path) == before


@pytest.mark.parametrize("spelling", ["dotdot", "symlink", "relative"])
def test_the_scenario_is_recognised_however_it_is_spelt(tmp_path, site, spelling, monkeypatch):
    if spelling == "dotdot":
        (tmp_path / "sub").mkdir()
        target = str(tmp_path / "sub" / ".." / "site.toml")
    elif spelling == "symlink":
        target = str(tmp_path / "link.json")
        os.symlink(site, target)
    else:
        monkeypatch.chdir(tmp_path)
        target = "./site.toml"
    before = files(tmp_path)
    code, _, err = run("solve", str(site), "--json", target, "--quiet")
    assert code == 2 and "refusing to overwrite the input scenario" in err
    assert files(tmp_path) == before


def _schedule_scenario(folder: Path) -> tuple[Path, Path]:
    """A head .toml whose nodes come from circuits.csv."""
    head = write_scenario(folder, "")
    text = head.read_text(encoding="utf-8").replace(
        'currency = "USD"\n', 'currency = "USD"\nschedule = "circuits.csv"\n', 1)
    head.write_text(text, encoding="utf-8")
    schedule = folder / "circuits.csv"
    schedule.write_text("id,parent,length,load\nA,SRC,20 m,10 A\n", encoding="utf-8")
    return head, schedule


def test_the_csv_schedule_read_by_the_scenario_is_not_overwritten(tmp_path):
    head, schedule = _schedule_scenario(tmp_path)
    before = files(tmp_path)
    code, _, err = run("solve", str(head), "--csv", str(schedule), "--quiet")
    assert files(tmp_path) == before
    assert code == 2 and "refusing to overwrite" in err


def test_the_head_of_a_csv_schedule_is_not_overwritten(tmp_path):
    head, schedule = _schedule_scenario(tmp_path)
    before = files(tmp_path)
    code, _, err = run("solve", str(schedule), "--json", str(head), "--quiet")
    assert files(tmp_path) == before
    assert code == 2 and "refusing to overwrite" in err


# --- nothing written when the run cannot succeed ----------------------------------------------


def test_an_output_folder_that_does_not_exist(tmp_path, site):
    before = files(tmp_path)
    missing = tmp_path / "no" / "such" / "folder" / "design.json"
    code, out, err = run("solve", str(site), "--json", str(missing), "--quiet")
    assert code == 2 and out == ""
    assert err.splitlines() == [f"{missing}: its folder does not exist"]
    assert files(tmp_path) == before
    assert not (tmp_path / "no").exists()


def test_an_output_that_is_a_folder(tmp_path, site):
    (tmp_path / "out").mkdir()
    before = files(tmp_path)
    code, _, err = run("solve", str(site), "--json", str(tmp_path / "out"), "--quiet")
    assert code == 2 and len(err.splitlines()) == 1 and "folder" in err
    assert files(tmp_path) == before


@pytest.mark.parametrize("broken", [
    ('length = "20 m"', 'length = "-20 m"'),       # a bad field
    ('parent = "SRC"', 'parent = "NOWHERE"'),        # not a tree
    ('[economics]', '[economics'),                   # not TOML
])
def test_bad_input_creates_no_output(tmp_path, site, broken):
    site.write_text(site.read_text(encoding="utf-8").replace(*broken, 1), encoding="utf-8")
    before = files(tmp_path)
    code, out, err = run("solve", str(site), "--json", str(tmp_path / "d.json"),
                         "--csv", str(tmp_path / "s.csv"), "--xlsx", str(tmp_path / "s.xlsx"),
                         "--report", str(tmp_path / "r.html"), "--quiet")
    assert code == 2 and out == "" and "Traceback" not in err
    assert files(tmp_path) == before


# --- names are data ---------------------------------------------------------------------------


def test_csv_schedule_neutralises_formulas(tmp_path, site):
    target = tmp_path / "schedule.csv"
    code, _, err = run("solve", str(site), "--csv", str(target), "--quiet")
    assert code == 0, err
    rows = {r["id"]: r for r in csv.DictReader(io.StringIO(target.read_text(encoding="utf-8")))}
    for node_id in FORMULA_IDS:
        # OWASP CSV injection advice: prefix the cell with an apostrophe (common practice).
        assert "'" + node_id in rows, sorted(rows)
        assert rows["'" + node_id]["parent"] == "'=PANEL"
    assert rows[MARKUP]["parent"] == "'=PANEL"       # text that is not a formula stays as is
    assert rows["'=PANEL"]["parent"] == "SRC"
    # Numbers are still numbers.
    assert all(float(r["length_m"]) > 0 for r in rows.values())


def test_xlsx_cells_are_text_not_formulas(tmp_path, site):
    openpyxl = pytest.importorskip("openpyxl")
    target = tmp_path / "schedule.xlsx"
    code, _, err = run("solve", str(site), "--xlsx", str(target), "--quiet")
    assert code == 0, err
    sheet = openpyxl.load_workbook(target)["Schedule"]
    cells = {c.value: c for row in sheet.iter_rows() for c in row if isinstance(c.value, str)}
    for node_id in (*FORMULA_IDS, "=PANEL"):
        assert node_id in cells
        assert cells[node_id].data_type == "s"          # "f" would be a formula


def test_json_keeps_names_exactly(tmp_path, site):
    target = tmp_path / "design.json"
    code, _, err = run("solve", str(site), "--json", str(target), "--quiet")
    assert code == 0, err
    doc = json.loads(target.read_text(encoding="utf-8"))
    assert {s["id"] for s in doc["segments"]} == {"=PANEL", *FORMULA_IDS, MARKUP}


def test_html_report_escapes_names(tmp_path, site):
    target = tmp_path / "report.html"
    code, _, err = run("solve", str(site), "--report", str(target), "--quiet")
    assert code == 0, err
    html = target.read_text(encoding="utf-8")
    assert MARKUP not in html and "<img src=x" not in html and "<b>Plant</b>" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    assert "&lt;img src=x onerror=alert(1)&gt;" in html
    assert "&lt;b&gt;Plant&lt;/b&gt; &amp;" in html
