"""One writer for every output (issue 19, items 1 to 3).

Every file a scenario reads (the TOML, its CSV schedule and head, the price list) is an
input of the run and is never overwritten, however the output names it (another
spelling, a symbolic link, a hard link), by any verb that writes. Every output path is
checked before any work; every output is written to a unique temporary file created
exclusively in its folder and renamed into place only when all outputs of the run are
complete, so the outputs of a run appear together or not at all.
"""

from __future__ import annotations

import errno
import io
import os
import shutil
import subprocess
import sys
from contextlib import redirect_stderr, redirect_stdout
from pathlib import Path

import pytest
from builders import write_scenario

from sizer.catalogue.prices import COSTDATA_DIR
from sizer.cli import main

NODES = """
[[node]]
id = "=PANEL"
parent = "SRC"
length = "20 m"

[[node]]
id = "+M1"
parent = "=PANEL"
length = "15 m"
load = "10 A"
description = "-2+3"

[[node]]
id = "@L2"
parent = "=PANEL"
length = "12 m"
load = "8 A"
"""


def run(*argv: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with redirect_stdout(out), redirect_stderr(err):
        code = main(list(argv))
    return code, out.getvalue(), err.getvalue()


def files(folder: Path) -> dict[str, bytes]:
    """Every file under ``folder`` (names relative to it) with its bytes."""
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*"))
            if p.is_file() and not p.is_symlink()}


@pytest.fixture
def priced(tmp_path: Path) -> Path:
    """A scenario whose [prices] catalogue is a price list beside it."""
    shutil.copy(COSTDATA_DIR / "demo-us.csv", tmp_path / "prices.csv")
    site = write_scenario(tmp_path, NODES)
    text = site.read_text(encoding="utf-8").replace(
        "[defaults]", '[prices]\ncatalogue = "prices.csv"\n\n[defaults]', 1)
    site.write_text(text, encoding="utf-8")
    return site


def one_line_exit_2(code: int, out: str, err: str) -> None:
    assert code == 2, err
    assert len(err.splitlines()) == 1 and "Traceback" not in err, err


# --- item 1: every input is protected, by path and by inode ------------------------------------


WRITING = [
    ("solve", "--csv"), ("solve", "--json"), ("solve", "--report"), ("solve", "--xlsx"),
    ("check", "--json"), ("frontier", "--json"), ("loads", "--csv"),
    ("sweep", "--json"), ("sweep", "--report"),
]


def _argv(verb: str, site: Path, option: str, target: str) -> list[str]:
    argv = [verb, str(site), option, target]
    if verb == "sweep":
        argv += ["--vary", "copper=8:9:2", "--jobs", "1"]
    if verb == "frontier":
        argv += ["--points", "2"]
    if verb != "loads":
        argv.append("--quiet")
    return argv


@pytest.mark.parametrize(("verb", "option"), WRITING)
@pytest.mark.parametrize("spelling", ["plain", "symlink", "hardlink"])
def test_the_price_list_is_never_an_output(tmp_path, priced, verb, option, spelling):
    prices = tmp_path / "prices.csv"
    target = prices
    if spelling == "symlink":
        target = tmp_path / "out.x"
        os.symlink(prices, target)
    elif spelling == "hardlink":
        target = tmp_path / "out.x"
        os.link(prices, target)
    before = files(tmp_path)
    code, out, err = run(*_argv(verb, priced, option, str(target)))
    one_line_exit_2(code, out, err)
    assert "input" in err and str(target) in err
    assert files(tmp_path) == before


def test_a_hard_link_to_the_scenario_is_refused(tmp_path, priced):
    link = tmp_path / "design.json"
    os.link(priced, link)
    before = files(tmp_path)
    code, out, err = run("solve", str(priced), "--json", str(link), "--quiet")
    one_line_exit_2(code, out, err)
    assert files(tmp_path) == before


def test_the_bundled_price_list_is_protected_too(tmp_path):
    site = write_scenario(tmp_path, NODES)
    bundled = COSTDATA_DIR / "demo-us.csv"
    before = bundled.read_bytes()
    text = site.read_text(encoding="utf-8").replace(
        "[defaults]", f'[prices]\ncatalogue = "{bundled}"\n\n[defaults]', 1)
    site.write_text(text, encoding="utf-8")
    code, out, err = run("solve", str(site), "--csv", str(bundled), "--quiet")
    one_line_exit_2(code, out, err)
    assert bundled.read_bytes() == before


@pytest.mark.parametrize("argv", [["solve", "SITE", "--quiet", "--json"],
                                  ["bench", "--sizes", "10", "--quiet", "--json"]])
def test_the_rule_tables_are_protected_too(tmp_path, priced, argv):
    import sizer

    table = Path(sizer.__file__).parent / "rules" / "nec.toml"
    before = table.read_bytes()
    code, out, err = run(*[str(priced) if a == "SITE" else a for a in argv], str(table))
    one_line_exit_2(code, out, err)
    assert table.read_bytes() == before


# --- item 2: one writer; a unique temporary file; neutralised CSV everywhere ----------------


def test_loads_csv_ignores_a_planted_link_at_a_temporary_name(tmp_path, priced):
    before = priced.read_bytes()
    target = tmp_path / "nodes.csv"
    # The name the old writer used for its temporary file, pointing at the scenario.
    os.symlink(priced, tmp_path / ".nodes.csv.tmp")
    code, _, err = run("loads", str(priced), "--csv", str(target))
    assert code == 0, err
    assert priced.read_bytes() == before
    assert target.read_text(encoding="utf-8").startswith('"id","parent"')


def test_loads_csv_neutralises_formulas_and_reads_back(tmp_path, priced):
    from sizer.scenario import load_scenario

    target = tmp_path / "nodes.csv"
    code, _, err = run("loads", str(priced), "--csv", str(target))
    assert code == 0, err
    text = target.read_text(encoding="utf-8")
    # OWASP CSV injection advice: a leading apostrophe (common practice).
    for raw in ("=PANEL", "+M1", "-2+3", "@L2"):
        assert f'"{raw}' not in text
        assert f"\"'{raw}\"" in text
    head = tmp_path / "head.toml"
    head.write_text(priced.read_text(encoding="utf-8").split("[[node]]")[0].replace(
        'currency = "USD"\n', 'currency = "USD"\nschedule = "nodes.csv"\n', 1),
        encoding="utf-8")
    assert load_scenario(head).nodes == load_scenario(priced).nodes


def test_concurrent_runs_never_splice_their_rows(tmp_path, priced):
    # Enough rows that the runs' writes overlap in time.
    many = "".join(f'\n[[node]]\nid = "L{i}"\nparent = "=PANEL"\nlength = "{5 + i % 50} m"\n'
                   f'load = "2 A"\n' for i in range(1500))
    priced.write_text(priced.read_text(encoding="utf-8") + many, encoding="utf-8")
    target = tmp_path / "nodes.csv"
    code, _, err = run("loads", str(priced), "--csv", str(tmp_path / "alone.csv"))
    assert code == 0, err
    expected = (tmp_path / "alone.csv").read_bytes()
    argv = [sys.executable, "-m", "sizer.cli", "loads", str(priced), "--csv", str(target)]
    procs = [subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
             for _ in range(6)]
    for p in procs:
        _, perr = p.communicate(timeout=120)
        assert p.returncode == 0, perr
    assert target.read_bytes() == expected
    assert sorted(p.name for p in tmp_path.iterdir()) == [
        "alone.csv", "nodes.csv", "prices.csv", "site.toml"]


def test_a_temporary_file_is_created_exclusively(tmp_path):
    from sizer import outputs

    target = tmp_path / "out.txt"
    victim = tmp_path / "victim.txt"
    victim.write_text("keep\n", encoding="utf-8")
    with outputs.Staged() as stage:
        stage.add(target, "new\n")
        pending = [p for p in tmp_path.iterdir() if p.name.startswith(".out.txt.")]
        assert len(pending) == 1 and not pending[0].is_symlink()
    assert target.read_text(encoding="utf-8") == "new\n"
    assert victim.read_text(encoding="utf-8") == "keep\n"


# --- item 3: every output checked before any work; together or not at all ------------------


@pytest.fixture
def no_solving(monkeypatch):
    """Make any solve an internal error, to prove the check came first."""
    import sizer.results
    import sizer.sweep
    import sizer.workflow

    def boom(*_a: object, **_k: object) -> None:
        raise AssertionError("solved before the outputs were checked")

    for module, name in ((sizer.results, "solve_results"), (sizer.results, "check_results"),
                         (sizer.workflow, "frontier"), (sizer.sweep, "sweep")):
        monkeypatch.setattr(module, name, boom)


@pytest.mark.parametrize("options", [
    ["--json", "X", "--csv", "X"],
    ["--json", "X", "--report", "sub/../X"],
    ["--csv", "X", "--xlsx", "Y"],          # Y is a hard link to X, made below
])
def test_two_outputs_naming_one_file(tmp_path, priced, monkeypatch, no_solving, options):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "sub").mkdir()
    (tmp_path / "X").write_text("old\n", encoding="utf-8")
    if "Y" in options:
        os.link(tmp_path / "X", tmp_path / "Y")
    before = files(tmp_path)
    code, out, err = run("solve", str(priced), *options, "--quiet")
    one_line_exit_2(code, out, err)
    assert "twice" in err
    assert files(tmp_path) == before


@pytest.mark.parametrize("verb", ["solve", "check", "frontier", "sweep"])
def test_an_unwritable_place_is_refused_before_solving(tmp_path, priced, no_solving, verb):
    # /proc refuses new files even to root, so this holds for every user.
    code, out, err = run(*_argv(verb, priced, "--json", "/proc/sizer-design.json"))
    one_line_exit_2(code, out, err)
    assert err.startswith("/proc/sizer-design.json: ")


def test_a_device_is_not_an_output(tmp_path, priced, no_solving):
    code, out, err = run("solve", str(priced), "--json", os.devnull, "--quiet")
    one_line_exit_2(code, out, err)


def test_a_failed_output_leaves_every_earlier_output_untouched(tmp_path, priced, monkeypatch):
    import sizer.report.html

    for name in ("design.json", "schedule.csv"):
        (tmp_path / name).write_text(f"previous {name}\n", encoding="utf-8")
    before = files(tmp_path)

    def full_disk(*_a: object, **_k: object) -> str:
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(sizer.report.html, "render_report", full_disk)
    code, out, err = run("solve", str(priced), "--json", str(tmp_path / "design.json"),
                         "--csv", str(tmp_path / "schedule.csv"),
                         "--report", str(tmp_path / "report.html"), "--quiet")
    one_line_exit_2(code, out, err)
    assert files(tmp_path) == before


def test_a_failed_rename_leaves_no_temporary_file(tmp_path, monkeypatch):
    from sizer import outputs

    calls = []

    def replace_once(src: str, dst: str) -> None:
        if calls:
            raise OSError(errno.ENOSPC, "No space left on device")
        calls.append(dst)
        os.rename(src, dst)

    (tmp_path / "a.txt").write_text("old a\n", encoding="utf-8")
    (tmp_path / "b.txt").write_text("old b\n", encoding="utf-8")
    monkeypatch.setattr(outputs.os, "replace", replace_once)
    with pytest.raises(outputs.ScenarioError, match="No space"), outputs.Staged() as stage:
        stage.add(tmp_path / "a.txt", "new a\n")
        stage.add(tmp_path / "b.txt", "new b\n")
    # The first rename is rolled back: the run's outputs appear together or not at all.
    assert files(tmp_path) == {"a.txt": b"old a\n", "b.txt": b"old b\n"}
