"""A built wheel is a whole product: installed outside the checkout, `sizer demo` runs.

Builds the wheel from this checkout, installs it into a fresh venv in a temporary folder
(its dependencies are borrowed from the test venv by a path file, so nothing is
downloaded), and runs the demo in an empty folder.
"""

from __future__ import annotations

import os
import subprocess
import sys
import sysconfig
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def wheel(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("wheel")
    subprocess.run([sys.executable, "-m", "pip", "wheel", "--no-deps",
                    "-q", "-w", str(out), str(ROOT)], check=True, cwd=out,
                   capture_output=True)
    (found,) = out.glob("sizer-*.whl")
    return found


def test_wheel_carries_the_price_lists_and_demo_scenarios(wheel: Path) -> None:
    names = set(zipfile.ZipFile(wheel).namelist())
    for folder in ("costdata", "scenarios"):
        shipped = {p.name for p in (ROOT / folder).iterdir() if p.is_file()}
        inside = {Path(n).name for n in names if n.startswith(f"sizer/{folder}/")}
        assert shipped <= inside, f"{folder}: missing {shipped - inside}"


def test_installed_wheel_runs_the_demo_outside_the_checkout(wheel: Path,
                                                            tmp_path: Path) -> None:
    venv = tmp_path / "venv"
    subprocess.run([sys.executable, "-m", "venv", str(venv)], check=True)
    py = venv / "bin" / "python"
    subprocess.run([str(py), "-m", "pip", "install", "-q", "--no-deps", "--no-index",
                    str(wheel)], check=True, capture_output=True)
    # The dependencies come from this test run's own site-packages, placed after the
    # fresh venv's, so `sizer` itself can only come from the wheel.
    site = sysconfig.get_paths()["purelib"]
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "PYTHONHOME")}
    pth_dir = Path(subprocess.run(
        [str(py), "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"],
        check=True, capture_output=True, text=True).stdout.strip())
    (pth_dir / "test-deps.pth").write_text(site + "\n", encoding="utf-8")
    work = tmp_path / "empty"
    work.mkdir()
    where = subprocess.run([str(py), "-c", "import sizer; print(sizer.__file__)"], cwd=work,
                           env=env, check=True, capture_output=True, text=True).stdout
    assert str(ROOT) not in where and str(venv) in where
    run = subprocess.run([str(venv / "bin" / "sizer"), "demo", "--quiet"], cwd=work, env=env,
                         capture_output=True, text=True, timeout=600)
    assert run.returncode == 0, run.stderr
    for name in ("report.html", "results.json", "schedule.csv"):
        assert (work / "sizer-demo" / name).stat().st_size > 0
