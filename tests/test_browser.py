"""The report in a real browser: headless Chromium renders its tables and figures offline."""

from __future__ import annotations

import os
import shutil
import subprocess

import matplotlib.image as mpimg
import numpy as np
import pytest

from sizer.demo import run_demo

CHROMIUM = shutil.which("chromium")
pytestmark = pytest.mark.skipif(
    CHROMIUM is None,
    reason="headless Chromium not found on PATH (Debian: apt-get install chromium; "
           ".ci/run installs it)")

FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
         "--disable-component-update", "--no-first-run", "--disable-sync")


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    """One demo report shared by every test here."""
    return run_demo(tmp_path_factory.mktemp("browser") / "demo").report


def chromium(tmp_path, *args: str) -> subprocess.CompletedProcess[str]:
    """Run Chromium with a fresh profile and home folder; fail with its stderr."""
    profile = tmp_path / "profile"
    env = {**os.environ, "HOME": str(tmp_path)}
    done = subprocess.run([CHROMIUM, *FLAGS, f"--user-data-dir={profile}", *args],
                          capture_output=True, text=True, timeout=120, env=env, check=False)
    assert done.returncode == 0, done.stderr[-2000:]
    return done


def test_dom_shows_the_tables(report, tmp_path):
    dom = chromium(tmp_path, "--dump-dom", report.resolve().as_uri()).stdout
    assert dom.count("<table") >= 6   # scenario, 3 assumptions, options, justification, ...
    assert dom.count("<tr") > 45      # the schedule alone has a row per run
    for section in ("scenario", "options", "justification", "schedule", "verification"):
        assert f'id="{section}"' in dom
    assert "<td>KILN-2</td>" in dom
    assert "authority having jurisdiction" in dom
    assert dom.count('src="data:image/png;base64,') == 3
    assert dom.count("<svg") >= 3  # the frontier chart, the tree key and the tree


def test_screenshot_is_not_blank(report, tmp_path):
    shot = tmp_path / "shot.png"
    chromium(tmp_path, f"--screenshot={shot}", "--window-size=1280,2400",
             "--hide-scrollbars", report.resolve().as_uri())
    image = mpimg.imread(shot)
    assert image.shape[0] >= 2400 and image.shape[1] >= 1280
    colours = np.unique(image.reshape(-1, image.shape[-1])[:, :3].round(3), axis=0)
    assert len(colours) > 20  # text, banner, cards and figures, not one flat colour
