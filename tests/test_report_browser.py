"""The report in a real browser: Debian's headless Chromium driven by Selenium through the
system chromedriver (nothing downloaded). `make test` installs both when they are missing.

Checks what a reader meets: no console errors, every figure and drawing has a size, the
picks and the safety notes are on the first screen of a 1400-px-wide window, clicking a
header sorts the table, and a hostile id stays text and never runs.
"""

from __future__ import annotations

import shutil
import tempfile

import pytest
from report_campaigns import HOSTILE_ID

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
CHROMEDRIVER = shutil.which("chromedriver")
pytestmark = pytest.mark.skipif(
    CHROMIUM is None or CHROMEDRIVER is None,
    reason="Debian packages chromium and chromium-driver are not installed (`make test` installs them)",
)
WIDTH, HEIGHT = 1400, 900
"""A laptop screen: 1400 px wide, 900 px high."""


@pytest.fixture(scope="module")
def browser():
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    profile = tempfile.mkdtemp(prefix="redoxfront-chromium-")
    opts = webdriver.ChromeOptions()
    opts.binary_location = CHROMIUM
    for flag in ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync",
                 "--disable-dev-shm-usage", f"--user-data-dir={profile}", f"--window-size={WIDTH},{HEIGHT}"):
        opts.add_argument(flag)
    opts.set_capability("goog:loggingPrefs", {"browser": "ALL"})
    opts.set_capability("unhandledPromptBehavior", "ignore")  # a dialog stays open for us to find
    driver = webdriver.Chrome(service=Service(executable_path=CHROMEDRIVER), options=opts)
    driver.set_window_size(WIDTH, HEIGHT)
    try:
        yield driver
    finally:
        driver.quit()
        shutil.rmtree(profile, ignore_errors=True)


def _open(browser, folder):
    browser.get((folder / "results" / "report.html").resolve().as_uri())
    browser.execute_script("window.scrollTo(0, 0)")
    return browser


def _no_dialog(browser) -> bool:
    from selenium.common.exceptions import NoAlertPresentException

    try:
        browser.switch_to.alert
    except NoAlertPresentException:
        return True
    return False


@pytest.mark.parametrize("campaign", ["demo_results", "first_screen_results", "funnel_results"])
def test_report_reads_in_a_real_browser(browser, campaign, request):
    folder = request.getfixturevalue(campaign)
    page = _open(browser, folder)
    # no console errors (Chromium reports them as SEVERE)
    severe = [e for e in page.get_log("browser") if e["level"] == "SEVERE"]
    assert severe == []
    # every figure and structure drawing is laid out with a size
    sizes = page.execute_script(
        "return Array.from(document.querySelectorAll('figure svg, figure img, .drawing svg'))"
        ".map(e => { const r = e.getBoundingClientRect(); return [r.width, r.height]; });")
    assert len(sizes) >= 3
    assert all(w > 50 and h > 50 for w, h in sizes), sizes
    # picks (with their first card) and safety start within the first screen height
    tops = page.execute_script(
        "return ['#picks', '#picks .card', '#safety'].map(s => document.querySelector(s)"
        ".getBoundingClientRect().top).concat([window.innerHeight, window.innerWidth]);")
    *section_tops, inner_h, inner_w = tops
    assert inner_w == pytest.approx(WIDTH, abs=20)
    assert all(0 <= t < inner_h for t in section_tops), tops


def test_clicking_a_header_sorts_the_rows(browser, demo_results):
    page = _open(browser, demo_results)
    index = page.execute_script(
        "const ths = Array.from(document.querySelectorAll('#candidate-table thead th'));"
        "return ths.findIndex(th => th.textContent.trim().startsWith('Half-life'));")
    assert index > 0

    def column():
        return page.execute_script(
            "return Array.from(document.querySelectorAll('#candidate-table tbody tr'))"
            f".map(r => r.cells[{index}].getAttribute('data-sort'));")

    def ids():
        return page.execute_script(
            "return Array.from(document.querySelectorAll('#candidate-table tbody tr'))"
            ".map(r => r.cells[1].textContent);")

    before = ids()
    button = page.find_elements("css selector", "#candidate-table thead th button")[index]
    button.click()
    up = [float(v) for v in column() if v]
    assert up == sorted(up) and len(up) >= 10
    button.click()
    down = [float(v) for v in column() if v]
    assert down == sorted(down, reverse=True)
    assert ids() != before and sorted(ids()) == sorted(before)  # same rows, new order


@pytest.mark.parametrize("campaign", ["demo_results", "first_screen_results", "funnel_results"])
def test_hostile_id_is_text_and_never_runs(browser, campaign, request):
    page = _open(browser, request.getfixturevalue(campaign))
    assert _no_dialog(page)  # no alert fired while the page loaded
    found = page.execute_script(
        "return Array.from(document.querySelectorAll('#candidate-table tbody tr'))"
        ".map(r => r.cells[1].textContent);")
    assert HOSTILE_ID in found  # shown as the characters it is made of
    assert page.execute_script("return document.querySelectorAll('img[src=\"x\"], [onerror]').length;") == 0
    # sorting moves the rows; the id must still not turn into markup
    page.find_elements("css selector", "#candidate-table thead th button")[1].click()
    assert _no_dialog(page)
    assert page.execute_script("return document.querySelectorAll('img[src=\"x\"]').length;") == 0


def test_first_pass_section_shows_the_tier_figure_and_the_left_out_candidates(browser, funnel_results):
    from redoxfront.compute.funnel import SELECTION_COLUMN
    from redoxfront.outputs import read_table

    page = _open(browser, funnel_results)
    assert [e for e in page.get_log("browser") if e["level"] == "SEVERE"] == []
    fig = page.execute_script(
        "const s = document.querySelector('#first-pass figure svg').getBoundingClientRect();"
        "return [s.width, s.height, document.querySelector('#first-pass figcaption').textContent];")
    # a figure a reader can see: laid out with a size inside a 1400-px window
    assert 250 < fig[0] <= 1400 and fig[1] > 200 and fig[2].startswith("Full tier against fast tier")
    shown = page.execute_script(
        "return Array.from(document.querySelectorAll('#first-pass table.left-out tbody tr'))"
        ".map(r => [r.cells[0].textContent, r.cells[1].textContent, r.getBoundingClientRect().height]);")
    fast = read_table(funnel_results / "results" / "fast_tier.csv", remedy="rerun")
    left = set(fast.loc[fast[SELECTION_COLUMN] == "not selected", "id"])
    # common practice, no source: every row listed is one the rule left out, and it reads as a number
    assert len(shown) == min(10, len(left)) and {r[0] for r in shown} <= left
    assert all(float(r[1]) > 0 and r[2] > 10 for r in shown)
    headers = page.execute_script(
        "return Array.from(document.querySelectorAll('#first-pass table.left-out thead th')).map(t => t.textContent);")
    assert any("fast tier estimate" in h for h in headers)


def test_printed_table_fits_an_a4_landscape_page(browser, demo_results):
    # A4 landscape, 10 mm margins: 277 mm = 1047 CSS px at 96 px per inch (CSS 2.1 reference pixel)
    page = _open(browser, demo_results)
    page.execute_cdp_cmd("Emulation.setEmulatedMedia", {"media": "print"})
    try:
        page.set_window_size(1047, HEIGHT)
        width = page.execute_script("return document.querySelector('#candidate-table').scrollWidth;")
        shown = page.execute_script(
            "return Array.from(document.querySelectorAll('#candidate-table thead th'))"
            ".filter(th => th.offsetParent !== null).map(th => th.textContent.trim());")
        body = page.execute_script("return document.body.clientWidth;")
        assert width <= body <= 1047  # the table inside the printed page
        assert not any(h.startswith("SMILES") or h.startswith("Notes") for h in shown)  # long text stays in the CSV
    finally:
        page.execute_cdp_cmd("Emulation.setEmulatedMedia", {"media": ""})
        page.set_window_size(WIDTH, HEIGHT)
