"""The MILP leaves no model files behind (issue 19, item 5).

CBC is run by PuLP through files (the model as MPS, the solution, the log). They live in
a private temporary folder removed in every case: a normal end, a solver crash, Ctrl-C
and SIGTERM (the command line turns SIGTERM into a clean stop, exit code 143).
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
import textwrap
from pathlib import Path

import pytest
from builders import write_scenario

from sizer.cli import main
from sizer.engines.milp import solver_available

pytestmark = pytest.mark.skipif(not solver_available("cbc"), reason="CBC is not installed")

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


@pytest.fixture
def private_tmp(tmp_path, monkeypatch) -> Path:
    """A fresh system temporary folder for this test only."""
    folder = tmp_path / "system-tmp"
    folder.mkdir()
    for name in ("TMPDIR", "TMP", "TEMP"):
        monkeypatch.setenv(name, str(folder))
    monkeypatch.setattr(tempfile, "tempdir", str(folder))
    return folder


# PuLP opens CBC's log before starting it and leaves it open when the start fails.
@pytest.mark.filterwarnings("ignore::pytest.PytestUnraisableExceptionWarning")
@pytest.mark.parametrize("crash", [KeyboardInterrupt, OSError])
def test_a_crashed_solver_leaves_no_files(tmp_path, private_tmp, monkeypatch, capsys, crash):
    import pulp.apis.coin_api

    def crashed(*_a: object, **_k: object) -> None:
        raise crash()

    monkeypatch.setattr(pulp.apis.coin_api.subprocess, "Popen", crashed)
    site = write_scenario(tmp_path, NODES)
    code = main(["solve", str(site), "--engine", "milp", "--quiet"])
    assert code in (2, 3, 130)
    assert list(private_tmp.iterdir()) == []


def test_a_normal_solve_leaves_no_files(tmp_path, private_tmp, capsys):
    site = write_scenario(tmp_path, NODES)
    assert main(["solve", str(site), "--engine", "milp", "--quiet"]) == 0
    assert list(private_tmp.iterdir()) == []


def test_sigterm_during_a_solve_stops_cleanly(tmp_path, private_tmp):
    site = write_scenario(tmp_path, NODES)
    out = tmp_path / "design.json"
    out.write_text("previous\n", encoding="utf-8")
    script = textwrap.dedent(f"""
        import os, signal, time
        import sizer.engines.milp as milp
        from sizer.cli import main

        def terminated(prob, solver):
            # The model files exist now; the process is told to stop.
            os.kill(os.getpid(), signal.SIGTERM)
            time.sleep(30)

        milp._run = terminated
        raise SystemExit(main(["solve", {str(site)!r}, "--engine", "milp", "--quiet",
                               "--json", {str(out)!r}]))
    """)
    env = {**os.environ, "TMPDIR": str(private_tmp), "TMP": str(private_tmp),
           "TEMP": str(private_tmp)}
    done = subprocess.run([sys.executable, "-c", script], env=env, capture_output=True,
                          text=True, timeout=120)
    assert done.returncode == 143, done.stderr
    assert done.stderr == "sizer: terminated\n"
    assert list(private_tmp.iterdir()) == []
    assert out.read_text(encoding="utf-8") == "previous\n"
