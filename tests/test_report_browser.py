"""The written HTML reports, opened in a real browser (issue 21 item 8).

Headless Chromium from the system's packages (Debian's ``chromium`` and ``chromium-driver``,
installed by ``.ci/run``), driven by Selenium; nothing is downloaded at test time.  What a
person sees is checked: every image loaded and drawn with a non-empty size, tables present,
no horizontal overflow at 1,280 and 800 px, every contents link landing on its section, a
collapsed table that opens when its summary is clicked, no console errors, and in print
media the contents bar hidden and no figure split from its caption.  The pages: the demo
model's report, a 42-mode report, an audit report and a sweep folder's ``index.html``.

The module is skipped, with the reason, only where no Chromium or driver is installed; CI
sets ``PLANTCORE_REQUIRE_BROWSER=1`` and then a missing browser is a failure.  The checks
are common practice for testing pages in a browser (no outside reference values).
"""

from __future__ import annotations

import os
import shutil

import numpy as np
import pytest

import plantcore as pc
from plantcore.estimation.audit import audit_linearized_observability
from plantcore.reports.audit import audit_html

_BROWSERS = ("chromium", "chromium-browser", "google-chrome", "chrome")


def _find_browser():
    driver = shutil.which("chromedriver")
    binary = next((p for p in map(shutil.which, _BROWSERS) if p), None)
    return driver, binary


def _missing(reason: str):
    if os.environ.get("PLANTCORE_REQUIRE_BROWSER") == "1":
        pytest.fail(f"PLANTCORE_REQUIRE_BROWSER=1 but {reason}")
    pytest.skip(reason)


@pytest.fixture(scope="module")
def browser():
    try:
        from selenium import webdriver
        from selenium.common.exceptions import WebDriverException
        from selenium.webdriver.chrome.options import Options
        from selenium.webdriver.chrome.service import Service
    except ImportError:
        _missing("selenium is not installed (pip install -e '.[test]')")
    driver_path, binary = _find_browser()
    if driver_path is None or binary is None:
        _missing("no Chromium and chromedriver on PATH (apt-get install chromium chromium-driver)")
    os.environ.setdefault("SE_AVOID_STATS", "true")
    options = Options()
    options.binary_location = binary
    for arg in ("--headless=new", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage",
                "--window-size=1280,900", "--force-device-scale-factor=1"):
        options.add_argument(arg)
    options.set_capability("goog:loggingPrefs", {"browser": "ALL"})
    try:
        driver = webdriver.Chrome(service=Service(driver_path), options=options)
    except WebDriverException as exc:  # installed but cannot start: a real failure
        pytest.fail(f"Chromium is installed ({binary}) but could not be started: {exc}")
    yield driver
    driver.quit()


def _many_modes(n=42):
    """Enough modes that the mode table is summarized and the full table collapsed."""
    rng = np.random.default_rng(21)
    A = np.diag(-np.geomspace(0.1, 100.0, n))
    return pc.StateSpaceModel(A, rng.standard_normal((n, 2)), rng.standard_normal((2, n)),
                              name="forty-two cooling stages")


@pytest.fixture(scope="module")
def pages(tmp_path_factory):
    folder = tmp_path_factory.mktemp("browser")
    out = {}
    thermal = pc.load_model(os.path.join(os.path.dirname(pc.__file__), "examples",
                                         "thermal_process.toml"))
    for key, model in (("thermal", thermal), ("many", _many_modes())):
        out[key] = pc.write_html_report(model, folder / f"{key}.html", progress=False).path
    F = np.repeat(np.eye(2)[None], 6, axis=0)
    H = np.repeat(np.array([[[-1.0, 1.0]]]), 6, axis=0)
    audit = audit_linearized_observability(F, H, [[1.0], [1.0]])
    path = folder / "audit.html"
    path.write_text(audit_html(audit, source="survey-boat run 3"), encoding="utf-8")
    out["audit"] = path
    from plantcore.reports.sweep_folder import write_sweep_folder

    def two_tanks(point):   # a coupling that vanishes at c = 0: the structure changes there
        c = point["coupling"]
        return ([[-point["leak"], c], [0.0, -2.0]], [[0.0], [1.0]], [[1.0, 0.0]])

    result = pc.sweep(two_tanks, pc.grid(leak=[0.5, 1.0, 2.0], coupling=[0.0, 0.5, 1.0]),
                      executor="serial")
    write_sweep_folder(result, folder / "sweep")
    out["sweep"] = folder / "sweep" / "index.html"
    return out


def _open(browser, path, width):
    browser.set_window_size(width, 900)
    browser.get(path.resolve().as_uri())
    browser.get_log("browser")  # drop anything logged before this page
    browser.execute_script("window.scrollTo(0, 0)")


def _console_errors(browser):
    return [e for e in browser.get_log("browser") if e.get("level") == "SEVERE"]


_IMAGES = """
return Array.from(document.images).map(img => {
  const r = img.getBoundingClientRect();
  return [img.complete, img.naturalWidth, img.naturalHeight, r.width, r.height];
});
"""


@pytest.mark.parametrize("width", [1280, 800])
@pytest.mark.parametrize("key", ["thermal", "many", "audit", "sweep"])
def test_page_fits_and_every_image_is_drawn(browser, pages, key, width):
    _open(browser, pages[key], width)
    overflow = browser.execute_script(
        "return [document.documentElement.scrollWidth, document.documentElement.clientWidth]")
    assert overflow[0] <= overflow[1], f"{key} at {width} px overflows sideways: {overflow}"
    images = browser.execute_script(_IMAGES)
    assert images, f"{key}: no image"
    for complete, nat_w, nat_h, w, h in images:
        assert complete and nat_w > 0 and nat_h > 0, f"{key}: an image did not load"
        assert 100 < w <= width and h > 50, f"{key}: an image drawn at {w} x {h} px"
    assert browser.execute_script("return document.querySelectorAll('table').length") >= 1
    assert not _console_errors(browser)


@pytest.mark.parametrize("width", [1280, 800])
@pytest.mark.parametrize(("key", "count"), [("thermal", 10), ("sweep", 6)])
def test_every_contents_link_lands_on_its_section(browser, pages, width, key, count):
    _open(browser, pages[key], width)
    links = browser.execute_script(
        "return Array.from(document.querySelectorAll('nav.contents a')).map(a => a.getAttribute('href'))")
    # the sweep: findings, where the structure changes, plots, weakest points, files, caution
    assert len(links) == count
    for href in links:
        browser.execute_script("window.scrollTo(0, 0)")
        link = browser.find_element("css selector", f"nav.contents a[href='{href}']")
        link.click()
        top, bottom_room = browser.execute_script(
            "const s = document.querySelector(arguments[0]);"
            "const r = s.getBoundingClientRect();"
            "return [r.top, document.documentElement.scrollHeight - window.scrollY - window.innerHeight];",
            href)
        # the section's top is at the top of the window, unless the page ends first
        assert abs(top) <= 12 or bottom_room <= 1, f"{href} lands {top:.0f} px from the top"
    assert not _console_errors(browser)


def test_collapsed_mode_table_opens(browser, pages):
    _open(browser, pages["many"], 1280)
    # checkVisibility: a closed <details> hides its content from rendering (its boxes may
    # keep a size), so "seen" is asked of the browser, not read from a rectangle
    closed = browser.execute_script(
        "const d = document.querySelector('details.all-modes');"
        "return [d.open, d.querySelector('table').checkVisibility()]")
    assert closed == [False, False]
    browser.find_element("css selector", "details.all-modes > summary").click()
    is_open, seen, height, rows = browser.execute_script(
        "const d = document.querySelector('details.all-modes'); const t = d.querySelector('table');"
        "return [d.open, t.checkVisibility(), t.getBoundingClientRect().height,"
        " d.querySelectorAll('tbody tr').length]")
    assert is_open and seen and height > 100 and rows == 42
    # the summary comes first: counts by part and the modes that deserve a look
    assert browser.execute_script(
        "return document.querySelector('#modes h3').compareDocumentPosition("
        "document.querySelector('details.all-modes')) & Node.DOCUMENT_POSITION_FOLLOWING") > 0


def test_open_details_show_their_tables(browser, pages):
    _open(browser, pages["thermal"], 1280)
    sizes = browser.execute_script(
        "return Array.from(document.querySelectorAll('details[open] table'))"
        ".map(t => [t.checkVisibility(), t.getBoundingClientRect().height])")
    assert sizes and all(seen and h > 0 for seen, h in sizes)


@pytest.mark.parametrize("key", ["thermal", "audit", "sweep"])
def test_print_hides_the_contents_and_keeps_figures_with_captions(browser, pages, key):
    _open(browser, pages[key], 1280)
    browser.execute_cdp_cmd("Emulation.setEmulatedMedia", {"media": "print"})
    try:
        nav, figures = browser.execute_script(
            "const n = document.querySelector('nav.contents');"
            "return [n ? getComputedStyle(n).display : 'none',"
            " Array.from(document.querySelectorAll('figure')).map(f => ["
            "  getComputedStyle(f).breakInside, !!f.querySelector('figcaption')])]")
    finally:
        browser.execute_cdp_cmd("Emulation.setEmulatedMedia", {"media": ""})
    assert nav == "none"
    assert figures and all(b == "avoid" and cap for b, cap in figures), figures


def test_sweep_index_links_the_files_of_its_folder(browser, pages):
    _open(browser, pages["sweep"], 1280)
    links = browser.execute_script(
        "return Array.from(document.querySelectorAll('section#files a'))"
        ".map(a => a.getAttribute('href'))")
    folder = pages["sweep"].parent
    assert "table.csv" in links and "summary.md" in links
    assert all((folder / name).is_file() for name in links), links
