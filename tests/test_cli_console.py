"""The console: --rows, --version, a closed pipe, one meaning per drop, light start-up."""

from __future__ import annotations

import re
import subprocess
import sys

import pytest

import sizer
from sizer.cli import main
from sizer.demo import bundled_scenario

REACH = ["reach", "--conductor", "4 AWG Cu", "--insulation", "90 degC", "--current", "50 A",
         "--voltage", "240 V", "--phases", "1", "--limit", "3 %"]
SCHEDULE_ROW = re.compile(r"^\S+\s+(feeder|branch)\s", re.M)


@pytest.fixture(scope="module")
def scenario():
    return str(bundled_scenario("kiln-hall.toml"))


def test_version(capsys):
    assert main(["--version"]) == 0
    assert capsys.readouterr().out.strip() == f"sizer {sizer.__version__}"


def test_rows_cuts_the_schedule_and_says_how_to_see_it(scenario, capsys):
    assert main(["solve", scenario, "--quiet", "--rows", "3"]) == 0
    out = capsys.readouterr().out
    assert len(SCHEDULE_ROW.findall(out)) == 3
    # nothing was written, so the cut does not point to files
    assert "in the files" not in out
    assert "... 42 more runs not shown (--rows all prints them)" in out


def test_rows_all_prints_every_run(scenario, capsys):
    assert main(["solve", scenario, "--quiet", "--rows", "all"]) == 0
    out = capsys.readouterr().out
    assert len(SCHEDULE_ROW.findall(out)) == 45
    assert "more run" not in out


def test_a_cut_schedule_points_to_the_file_written(scenario, tmp_path, capsys):
    csv = tmp_path / "s.csv"
    assert main(["solve", scenario, "--quiet", "--rows", "5", "--csv", str(csv)]) == 0
    assert f"... 40 more runs in {csv}" in capsys.readouterr().out


@pytest.mark.parametrize("value", ["x", "-1", "2.5"])
def test_bad_rows_is_one_usage_line(scenario, value, capsys):
    assert main(["solve", scenario, "--rows", value]) == 2
    err = capsys.readouterr().err
    assert "--rows" in err and "Traceback" not in err


def test_drops_say_which_they_are_and_agree_with_the_report(scenario, tmp_path, capsys):
    report = tmp_path / "r.html"
    assert main(["solve", scenario, "--quiet", "--report", str(report)]) == 0
    out = capsys.readouterr().out
    assert "path % LF" in out
    m = re.search(r"worst path drop: (\d+\.\d\d) % by AC load flow \((\d+\.\d\d) % by the "
                  r"linear estimate\)", out)
    assert m, out
    page = report.read_text(encoding="utf-8")
    card = re.search(r'data-card="drop"><div class="label">[^<]*</div><div class="value">'
                     r"([\d.]+) %</div><div class=\"sub\">AC load flow", page)
    assert card and card.group(1) == m.group(1)
    # payback is one figure, labelled simple, wherever it is named
    assert "simple payback" in page
    assert "discounted break-even" not in page


def test_a_closed_pipe_ends_quietly(scenario):
    proc = subprocess.Popen([sys.executable, "-m", "sizer.cli", "solve", scenario, "--quiet",
                             "--rows", "all"], stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    assert proc.stdout is not None and proc.stderr is not None
    proc.stdout.close()  # the reader is gone before sizer writes: as `| head` at its end
    with proc.stderr:
        err = proc.stderr.read()
    assert proc.wait(timeout=300) == 141  # 128 + SIGPIPE
    assert err == b""


LIGHT = ("import sys\n"
         "from sizer.cli import main\n"
         "try:\n"
         "    main(sys.argv[1:])\n"
         "except SystemExit:\n"
         "    pass\n"
         "heavy = ('pulp', 'matplotlib', 'pandas', 'scipy', 'dask', 'pandapower', 'rich',\n"
         "         'sizer.engines', 'sizer.optimize', 'sizer.verify', 'sizer.workflow',\n"
         "         'sizer.report')\n"
         "print('heavy:', ' '.join(sorted(m for m in sys.modules if m.split('.')[0] in heavy\n"
         "                      or any(m.startswith(h) for h in heavy if '.' in h))))\n")


@pytest.mark.parametrize("argv", [["--help"], ["--version"], REACH], ids=["help", "version",
                                                                         "reach"])
def test_start_up_imports_no_optimiser_plotting_or_load_flow(argv):
    done = subprocess.run([sys.executable, "-c", LIGHT, *argv], capture_output=True,
                          text=True, timeout=120, check=True)
    assert done.stdout.splitlines()[-1].strip() == "heavy:", done.stdout


def test_import_sizer_is_light():
    code = ("import sys, sizer\n"
            "print(sorted(m for m in sys.modules if m.split('.')[0] in "
            "('numpy', 'pandas', 'pint', 'pulp', 'matplotlib')))\n")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=120, check=True)
    assert done.stdout.strip() == "[]"


def test_dask_and_scipy_still_import_after_the_registry():
    code = ("from sizer.units import parse_quantity, registry\n"
            "registry()\n"
            "import dask, scipy\n"
            "print(parse_quantity('100 ft', 'm'))\n")
    done = subprocess.run([sys.executable, "-W", "error", "-c", code], capture_output=True,
                          text=True, timeout=120, check=True)
    assert float(done.stdout) == pytest.approx(30.48)  # 1 ft = 0.3048 m exactly (definition)


def test_reach_works_without_a_writable_cache_folder(tmp_path):
    # pint's definitions cache is a speed-up only: no cache folder, same answer
    env = {"PATH": "/usr/bin:/bin", "HOME": str(tmp_path), "XDG_CACHE_HOME": "/proc/no-cache"}
    done = subprocess.run([sys.executable, "-W", "error", "-m", "sizer.cli", *REACH],
                          capture_output=True, text=True, timeout=120, env=env, check=False)
    assert done.returncode == 0, done.stderr
    assert "reach" in done.stdout and done.stderr == ""
