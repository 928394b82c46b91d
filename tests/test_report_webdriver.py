"""The report in a real browser driven by WebDriver: explore the trade-off, fit, print.

Debian's chromium and chromium-driver with the selenium package; selenium is pointed at
/usr/bin/chromedriver so it never fetches a driver. Skipped when either is missing
(.ci/run installs both).
"""

from __future__ import annotations

import base64
import io
import json
import shutil

import pytest

from sizer.demo import bundled_scenario, run_demo
from sizer.optimize import prepare
from sizer.results import REPORT_FRONTIER_POINTS, REPORT_FRONTIER_TIME_LIMIT_S
from sizer.scenario import load_scenario
from sizer.workflow import frontier, frontier_designs

webdriver = pytest.importorskip("selenium.webdriver")
pypdf = pytest.importorskip("pypdf")
from selenium.webdriver.chrome.service import Service  # noqa: E402
from selenium.webdriver.common.by import By  # noqa: E402
from selenium.webdriver.common.print_page_options import PrintOptions  # noqa: E402

DRIVER = shutil.which("chromedriver") or (
    "/usr/bin/chromedriver" if shutil.which("/usr/bin/chromedriver") else None)
BROWSER = shutil.which("chromium")
pytestmark = pytest.mark.skipif(
    DRIVER is None or BROWSER is None,
    reason="chromium and chromium-driver not installed (Debian: apt-get install chromium "
           "chromium-driver; .ci/run installs them)")


def make_driver(tmp_path, *, javascript: bool = True, width: int = 1280):
    options = webdriver.ChromeOptions()
    for flag in ("--headless=new", "--no-sandbox", "--disable-gpu", "--hide-scrollbars",
                 "--disable-background-networking", "--disable-component-update",
                 "--no-first-run", "--disable-sync", f"--window-size={width},1000",
                 f"--user-data-dir={tmp_path / 'profile'}"):
        options.add_argument(flag)
    if not javascript:
        options.add_experimental_option(
            "prefs", {"profile.managed_default_content_settings.javascript": 2})
    options.binary_location = BROWSER
    options.set_capability("goog:loggingPrefs", {"browser": "ALL"})
    return webdriver.Chrome(service=Service(DRIVER), options=options)


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """The demo report, and the frontier's designs computed apart from the page."""
    result = run_demo(tmp_path_factory.mktemp("webdriver") / "demo")
    prep = prepare(load_scenario(bundled_scenario()))
    points = frontier(prep, REPORT_FRONTIER_POINTS, time_limit_s=REPORT_FRONTIER_TIME_LIMIT_S)
    designs = frontier_designs(prep, points)
    return result, designs


@pytest.fixture(scope="module")
def browser(tmp_path_factory, demo):
    driver = make_driver(tmp_path_factory.mktemp("chrome"))
    driver.get(demo[0].report.resolve().as_uri())
    yield driver
    driver.quit()


def schedule_conductors(driver) -> list[str]:
    """The conductor column, in run order (whatever the sort)."""
    rows = driver.execute_script(
        "return Array.from(document.querySelectorAll('#schedule-table tbody tr'))"
        ".map(r => [Number(r.dataset.i), r.querySelector('td[data-k=c]').textContent]);")
    return [c for _, c in sorted(rows)]


def conductor_text(s) -> str:
    text = f"{s.sets}x {s.size} {s.material}" if s.sets > 1 else f"{s.size} {s.material}"
    return text + (" (pinned)" if s.pinned else "")


def card(driver, key: str) -> str:
    return driver.find_element(By.CSS_SELECTOR, f'[data-card="{key}"] .value').text


def test_without_script_the_page_shows_the_lifecycle_optimum(demo, tmp_path):
    result, _ = demo
    driver = make_driver(tmp_path, javascript=False)
    try:
        driver.get(result.report.resolve().as_uri())
        assert schedule_conductors(driver) == [conductor_text(s)
                                               for s in result.design.segments]
        # The controls need the script, so they stay hidden; the chart and tree show.
        assert not driver.find_element(By.ID, "explore-controls").is_displayed()
        assert driver.find_element(By.ID, "frontier-chart").is_displayed()
        assert driver.find_elements(By.CSS_SELECTOR, "svg.tree path.run")
        doc = json.loads(result.results_json.read_text(encoding="utf-8"))
        assert card(driver, "capex") == f"{doc['totals']['capex']:,.0f} USD"
    finally:
        driver.quit()


def test_clicking_a_frontier_point_shows_its_design(browser, demo):
    result, designs = demo
    data = browser.execute_script("return window.sizerReport.data;")
    before = schedule_conductors(browser)
    assert before == [conductor_text(s) for s in result.design.segments]
    # The point with the least upfront cost that is not the design shown.
    target = next(i for i, p in enumerate(data["points"]) if i != data["shown"]
                  and p["label"].startswith("frontier point"))
    browser.find_element(By.CSS_SELECTOR, f'#frontier-chart .pick[data-p="{target}"]').click()
    after = schedule_conductors(browser)
    capex = data["points"][target]["capex"]
    expected = next(d for d in designs if abs(d.totals.capex - capex) < 0.01)
    assert after == [conductor_text(s) for s in expected.segments]
    assert after != before
    assert card(browser, "capex") == f"{expected.totals.capex:,.0f} USD"
    ring = browser.find_element(By.CSS_SELECTOR, "#frontier-chart .pick.on")
    assert ring.get_attribute("data-p") == str(target)
    diff = browser.find_element(By.ID, "explore-diff").text
    changed = sum(a != b for a, b in zip(after, before, strict=True))
    assert f"{changed} run{'s' if changed != 1 else ''} changed" in diff
    # The tree picture follows: each run's label carries the conductor shown.
    labels = browser.execute_script(
        "return Array.from(document.querySelectorAll('svg.tree text.c[data-i]'))"
        ".map(t => [Number(t.dataset.i), t.textContent.replace(' ↑', '')]);")
    assert labels and all(after[i] == text for i, text in labels)
    # Back to the optimum by the slider.
    browser.execute_script(
        "const s = document.getElementById('frontier-slider'); s.value = arguments[0];"
        "s.dispatchEvent(new Event('input'));", data["reference"])
    assert schedule_conductors(browser) == before
    errors = [e for e in browser.get_log("browser") if e["level"] == "SEVERE"]
    assert errors == []  # the page's script ran without an error


def test_sort_and_filter_the_schedule(browser):
    rows = "#schedule-table tbody tr"
    head = browser.find_elements(By.CSS_SELECTOR, "#schedule-table thead th")
    upfront = next(th for th in head if th.text.startswith("Upfront"))
    upfront.click()
    upfront.click()   # descending
    values = browser.execute_script(
        "return Array.from(document.querySelectorAll(arguments[0]))"
        ".map(r => Number(r.querySelector('td[data-k=x]').textContent.replace(/,/g, '')));",
        rows)
    assert values == sorted(values, reverse=True)
    panel = browser.execute_script(
        "const s = document.getElementById('f-panel'); s.value = s.options[1].value;"
        "s.dispatchEvent(new Event('change')); return s.value;")
    visible = browser.execute_script(
        "return Array.from(document.querySelectorAll(arguments[0])).filter(r => !r.hidden)"
        ".map(r => r.dataset.panel);", rows)
    assert visible and set(visible) == {panel}
    browser.execute_script(
        "const s = document.getElementById('f-panel'); s.value = '';"
        "s.dispatchEvent(new Event('change'));")


def test_schedule_fits_a_1280_pixel_window(browser):
    browser.set_window_size(1280, 1000)
    widths = browser.execute_script(
        "const t = document.getElementById('schedule-table');"
        "return [document.documentElement.scrollWidth, window.innerWidth, t.scrollWidth,"
        " t.parentElement.clientWidth, t.getBoundingClientRect().right];")
    page, window, table, box, right = widths
    assert window <= 1280
    assert page <= window          # no sideways scrolling of the page
    assert table <= box            # the schedule fits its column
    assert right <= window


@pytest.mark.parametrize(("paper", "width_cm", "height_cm"),
                         [("A4", 29.7, 21.0), ("Letter", 27.94, 21.59)])
def test_prints_on_landscape_pages_without_cut_columns(browser, demo, paper, width_cm,
                                                       height_cm):
    result, _ = demo
    browser.get(result.report.resolve().as_uri())  # fresh: unsorted, unfiltered
    options = PrintOptions()
    options.orientation = "landscape"
    # WebDriver takes the sheet as it lies in portrait; landscape turns it.
    options.page_width, options.page_height = height_cm, width_cm
    options.shrink_to_fit = False
    options.background = True
    pdf = base64.b64decode(browser.print_page(options))
    assert pdf.startswith(b"%PDF")
    reader = pypdf.PdfReader(io.BytesIO(pdf))
    pages = reader.pages
    assert 3 <= len(pages) <= 40, len(pages)
    for page in pages:  # landscape: wider than tall
        assert float(page.mediabox.width) > float(page.mediabox.height)
    text = ["".join(p.extract_text().split()) for p in pages]  # whitespace dropped
    first = next(i for i, t in enumerate(text) if t.startswith("Cableschedule"))
    last = next(i for i, t in enumerate(text) if i > first and t.startswith("Figures"))
    schedule = text[first:last]
    assert schedule
    # Every schedule page repeats the header row, first column to last.
    for t in schedule:
        assert "FromRun(to)Kind" in t
        assert "LossPVUSD" in t
    # No cut column: every run's last cell (loss PV) and first (its feeder) are printed,
    # in run order.
    doc = json.loads(result.results_json.read_text(encoding="utf-8"))
    joined = "".join(schedule)
    at = 0
    for seg in doc["segments"]:
        cell = f"{seg['parent']}{seg['id']}"
        found = joined.find(cell, at)
        assert found >= 0, cell
        at = found
        assert f"{seg['loss_pv']:,.0f}" in joined
    # Lay the page out for print at the sheet's printable width (10 mm margins) and check
    # every schedule column ends inside it.
    css_px = (width_cm - 2.0) / 2.54 * 96
    browser.execute_cdp_cmd("Emulation.setEmulatedMedia", {"media": "print"})
    browser.execute_cdp_cmd("Emulation.setDeviceMetricsOverride", {
        "width": int(css_px), "height": 800, "deviceScaleFactor": 1, "mobile": False})
    try:
        right_edges = browser.execute_script(
            "return Array.from(document.querySelectorAll('#schedule-table thead th'))"
            ".map(th => th.getBoundingClientRect().right);")
        width = browser.execute_script("return document.documentElement.clientWidth;")
        assert max(right_edges) <= width + 0.5
        controls = browser.find_element(By.ID, "schedule-controls")
        assert not controls.is_displayed()  # the filter row does not print
    finally:
        browser.execute_cdp_cmd("Emulation.clearDeviceMetricsOverride", {})
        browser.execute_cdp_cmd("Emulation.setEmulatedMedia", {"media": ""})
