"""The briefing in a real browser: headless Chromium driven by selenium.

One real output folder per session (the whole pipeline on the embedded demo), then:
every image loads, no JavaScript error, the ranked table sorts by mouse and keyboard, the
page prints to PDF without sticky elements, and a full-page screenshot is not blank.
Screenshots are kept in the session's temporary folder (path printed with -s) or in
$ANALOG_SCREENSHOT_DIR when set.
"""
from __future__ import annotations

import base64
import io
import os
import re
import time
import warnings
from pathlib import Path

import pytest

from analog.briefing import build_briefing
from analog.errors import AnalogWarning

pytestmark = pytest.mark.browser

CHROMIUM = "/usr/bin/chromium"
CHROMEDRIVER = "/usr/bin/chromedriver"
CHROME_ARGS = ("--headless=new", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage", "--no-first-run",
               "--disable-background-networking", "--disable-component-update", "--disable-sync",
               "--window-size=1280,1000")

# Runs before any script of the page: records uncaught errors, rejected promises and failed loads.
COLLECTOR = """
window.__errors = [];
window.onerror = function (message, source, line) { window.__errors.push('onerror: ' + message + ' @' + line); };
window.addEventListener('error', function (e) {
  if (e.target && e.target !== window) {
    window.__errors.push('load failed: <' + e.target.tagName + '> ' + String(e.target.src || e.target.href).slice(0, 80));
  }
}, true);
window.addEventListener('unhandledrejection', function (e) { window.__errors.push('rejection: ' + e.reason); });
"""


def _need_browser():
    missing = [p for p in (CHROMIUM, CHROMEDRIVER) if not os.path.exists(p)]
    if missing:
        pytest.skip(f"headless Chromium is not installed ({', '.join(missing)} missing; Debian packages "
                    "'chromium' and 'chromium-driver', which .ci/run installs)")
    pytest.importorskip("selenium", reason="selenium is not installed (it is in the test extra)")


@pytest.fixture(scope="session")
def demo_output(tmp_path_factory) -> Path:
    """The whole pipeline on the embedded demo, written once per session."""
    _need_browser()  # do not spend minutes on the pipeline when no browser can look at it
    from analog._resources import resource_dir
    from analog.intake import load_study
    from analog.pipeline import run_study, write_outputs

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AnalogWarning)  # the demo's planted unmatched names are expected
        run = run_study(load_study(resource_dir("demo")))
        target, written = write_outputs(run, tmp_path_factory.mktemp("demo") / "out")
    assert "briefing.html" in written
    return target


@pytest.fixture(scope="session")
def browser(tmp_path_factory):
    _need_browser()
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    previous = os.environ.get("SE_OFFLINE")
    os.environ["SE_OFFLINE"] = "true"  # selenium must never try to download a browser or driver
    options = webdriver.ChromeOptions()
    options.binary_location = CHROMIUM
    for arg in CHROME_ARGS:
        options.add_argument(arg)
    options.add_argument(f"--user-data-dir={tmp_path_factory.mktemp('chromium-profile')}")
    options.set_capability("goog:loggingPrefs", {"browser": "ALL"})
    driver = webdriver.Chrome(service=Service(executable_path=CHROMEDRIVER), options=options)
    driver.execute_cdp_cmd("Page.addScriptToEvaluateOnNewDocument", {"source": COLLECTOR})
    try:
        yield driver
    finally:
        driver.quit()
        if previous is None:
            os.environ.pop("SE_OFFLINE", None)
        else:
            os.environ["SE_OFFLINE"] = previous


def open_page(driver, path: Path):
    driver.get_log("browser")  # drop messages of earlier pages
    driver.get(path.resolve().as_uri())
    deadline = time.monotonic() + 60
    while driver.execute_script("return document.readyState") != "complete":
        assert time.monotonic() < deadline, f"{path} did not finish loading"
        time.sleep(0.1)
    driver.execute_script("return Promise.all(Array.from(document.images).map("
                          "i => i.decode().catch(() => null)))")


def page_problems(driver) -> list[str]:
    severe = [e["message"] for e in driver.get_log("browser") if e.get("level") == "SEVERE"]
    return severe + list(driver.execute_script("return window.__errors || ['collector missing']"))


def images(driver) -> list[dict]:
    return driver.execute_script(
        "return Array.from(document.images).map(i => ({complete: i.complete, width: i.naturalWidth, "
        "alt: i.alt, src: i.currentSrc.slice(0, 22)}))")


def column(driver, table_id: str, index: int) -> list[str]:
    return driver.execute_script(
        "return Array.from(document.querySelectorAll('#' + arguments[0] + ' tbody tr')).map("
        "r => r.cells[arguments[1]].getAttribute('data-sort'))", table_id, index)


def header_button(driver, table_id: str, label: str):
    from selenium.webdriver.common.by import By

    for button in driver.find_elements(By.CSS_SELECTOR, f"#{table_id} thead th button.sort"):
        if button.text.strip().startswith(label):
            return button
    raise AssertionError(f"no '{label}' header in #{table_id}")


def aria_sort(driver, table_id: str) -> list:
    return driver.execute_script(
        "return Array.from(document.querySelectorAll('#' + arguments[0] + ' thead th')).map("
        "h => h.getAttribute('aria-sort'))", table_id)


def is_sorted_numbers(keys: list[str], *, descending: bool = False) -> bool:
    present = [float(k) for k in keys if k != ""]
    missing_last = all(k == "" for k in keys[len(present):])
    ordered = sorted(present, reverse=descending)
    return missing_last and present == ordered


def shot_dir(tmp_path_factory) -> Path:
    wanted = os.environ.get("ANALOG_SCREENSHOT_DIR")
    if wanted:
        Path(wanted).mkdir(parents=True, exist_ok=True)
        return Path(wanted)
    return tmp_path_factory.mktemp("screenshots")


def full_page_png(driver) -> bytes:
    """Whole page in one PNG, at half scale to keep the image a sensible size."""
    width, height = driver.execute_script(
        "return [document.documentElement.scrollWidth, document.documentElement.scrollHeight]")
    shot = driver.execute_cdp_cmd("Page.captureScreenshot", {
        "format": "png", "captureBeyondViewport": True,
        "clip": {"x": 0, "y": 0, "width": width, "height": height, "scale": 0.5}})
    return base64.b64decode(shot["data"])


def distinct_colours(png: bytes) -> int:
    try:
        from PIL import Image

        with Image.open(io.BytesIO(png)) as im:
            rgb = im.convert("RGB")
            return len(rgb.getcolors(maxcolors=1 << 24) or [])
    except ImportError:  # matplotlib reads PNGs too
        import matplotlib.image as mpimg
        import numpy as np

        arr = (mpimg.imread(io.BytesIO(png), format="png")[..., :3] * 255).astype(np.uint8)
        return len(np.unique(arr.reshape(-1, 3), axis=0))


# -- the real demo output ---------------------------------------------------------------------------

def test_every_image_loads_without_errors(browser, demo_output):
    open_page(browser, demo_output / "briefing.html")
    imgs = images(browser)
    n_pngs = len(list((demo_output / "figures").glob("*.png")))
    n_regions = len(list((demo_output / "regions").glob("*.html")))
    assert n_pngs > 0 and len(imgs) >= n_pngs  # every figure the writer drew is on the page
    bad = [i for i in imgs if not (i["complete"] and i["width"] > 0)]
    assert not bad, bad
    assert all(i["alt"] for i in imgs)
    assert n_regions >= 1
    assert page_problems(browser) == []
    # nothing was fetched from a network: every resource is the file itself or inline data
    fetched = browser.execute_script("return performance.getEntriesByType('resource').map(e => e.name)")
    assert [u for u in fetched if not u.startswith(("data:", "file:"))] == []


def test_ranked_table_sorts_by_click_and_keyboard(browser, demo_output):
    from selenium.webdriver.common.keys import Keys

    open_page(browser, demo_output / "briefing.html")
    table = "table-ranking"
    before = column(browser, table, 0)
    assert is_sorted_numbers(before)  # starts in rank order
    assert aria_sort(browser, table)[0] == "ascending"
    names_before = sorted(column(browser, table, 1))

    header_button(browser, table, "Combined score").click()
    keys = column(browser, table, 3)
    assert is_sorted_numbers(keys)
    assert aria_sort(browser, table) == [None, None, None, "ascending", None, None, None, None]
    assert column(browser, table, 0) != before  # the rows moved

    header_button(browser, table, "Combined score").click()
    assert is_sorted_numbers(column(browser, table, 3), descending=True)
    assert aria_sort(browser, table)[3] == "descending"

    button = header_button(browser, table, "Taxon")
    browser.execute_script("arguments[0].focus()", button)
    button.send_keys(Keys.ENTER)  # keyboard users sort the same way
    names = column(browser, table, 1)
    assert names == sorted(names, key=str.casefold)
    assert sorted(names) == names_before  # same rows, new order
    assert aria_sort(browser, table)[1] == "ascending"
    assert page_problems(browser) == []


def test_prints_without_sticky_elements(browser, demo_output):
    open_page(browser, demo_output / "briefing.html")
    browser.execute_cdp_cmd("Emulation.setEmulatedMedia", {"media": "print"})
    try:
        pinned = browser.execute_script(
            "return Array.from(document.querySelectorAll('*')).filter(e => "
            "['sticky', 'fixed'].includes(getComputedStyle(e).position)).map(e => e.tagName)")
        breaks = browser.execute_script(
            "return Array.from(document.querySelectorAll('section.major')).map(s => getComputedStyle(s).breakBefore)")
        rows = browser.execute_script("return getComputedStyle(document.querySelector('tbody tr')).breakInside")
    finally:
        browser.execute_cdp_cmd("Emulation.setEmulatedMedia", {"media": ""})
    assert pinned == []
    assert breaks and set(breaks) == {"page"}
    assert rows == "avoid"
    pdf = base64.b64decode(browser.execute_cdp_cmd("Page.printToPDF", {"printBackground": True})["data"])
    assert pdf[:5] == b"%PDF-"
    assert len(re.findall(rb"/Type\s*/Page\b", pdf)) >= len(breaks)


def test_full_page_screenshot_is_not_blank(browser, demo_output, tmp_path_factory):
    open_page(browser, demo_output / "briefing.html")
    png = full_page_png(browser)
    folder = shot_dir(tmp_path_factory)
    (folder / "briefing-demo.png").write_bytes(png)
    print(f"screenshot: {folder / 'briefing-demo.png'}")
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    assert distinct_colours(png) > 500  # text, tier colours and figures; a blank page has a handful


def test_region_page_opens_and_links_back(browser, demo_output, tmp_path_factory):
    from selenium.webdriver.common.by import By

    pages = sorted((demo_output / "regions").glob("*.html"))
    assert pages
    open_page(browser, pages[0])
    imgs = images(browser)
    assert imgs and all(i["complete"] and i["width"] > 0 for i in imgs)
    assert page_problems(browser) == []
    (shot_dir(tmp_path_factory) / "region-demo.png").write_bytes(full_page_png(browser))
    browser.find_element(By.LINK_TEXT, "Full briefing for the whole study").click()
    assert browser.current_url.endswith("/briefing.html")


# -- a synthetic run with thin data, odd names and a missing stage ------------------------------------

def test_synthetic_pages_sort_and_show_no_errors(browser, synthetic_run, synthetic_figures, tmp_path):
    synthetic_run.trajectory = None
    synthetic_run.skipped = {"trajectory": "trajectory stage not available in this build"}
    for name, html in build_briefing(synthetic_run, figures=synthetic_figures, draw_insets=False).items():
        (tmp_path / name).parent.mkdir(parents=True, exist_ok=True)
        (tmp_path / name).write_text(html, encoding="utf-8")
    open_page(browser, tmp_path / "briefing.html")
    assert page_problems(browser) == []
    assert browser.execute_script("return document.title").startswith("Briefing: Synthetic coast")
    table = "table-regions-overview"
    header_button(browser, table, "Expected losses").click()
    assert is_sorted_numbers(column(browser, table, 3))  # the region without data stays last
    header_button(browser, table, "Expected losses").click()
    keys = column(browser, table, 3)
    assert is_sorted_numbers(keys, descending=True) and keys[-1] == ""
    assert all(i["complete"] and i["width"] > 0 for i in images(browser))
    # the odd region name is shown as text, not run as a script
    assert browser.execute_script("return document.querySelectorAll('main script').length") == 0
    assert "<script>alert(1)</script> Bay & Shoals" in browser.find_element("id", "regions").text
