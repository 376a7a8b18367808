"""The HTML report in a real headless browser (Debian's chromium + chromedriver, via selenium).

Common practice for interactive pages (no published source): load the written file from a
file:// URL, then check what a reader would see and do: every picture decodes, a header
click sorts the table, a slider changes the frame, a row click moves the sliders to the
region's slice. Scenes are invented data (tests/report_scene.py), for regression only.
"""

from __future__ import annotations

import shutil

import numpy as np
import pytest

from cavitas import RESEARCH_ONLY
from cavitas.report import write_report
from tests.report_scene import diagram, regions_of, scene

pytestmark = pytest.mark.browser

CHROMIUM = next(filter(None, map(shutil.which, ("chromium", "chromium-browser"))), None)
DRIVER = shutil.which("chromedriver")
FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--window-size=1200,1600")


@pytest.fixture(scope="module")
def browser(tmp_path_factory):
    if CHROMIUM is None or DRIVER is None:
        pytest.skip("needs Debian's 'chromium' and 'chromium-driver' (apt-get install -y "
                    "chromium chromium-driver); not found on PATH")
    webdriver = pytest.importorskip("selenium.webdriver", reason="needs the selenium package")
    from selenium.webdriver.chrome.service import Service

    options = webdriver.ChromeOptions()
    options.binary_location = CHROMIUM
    for flag in FLAGS:
        options.add_argument(flag)
    options.add_argument(f"--user-data-dir={tmp_path_factory.mktemp('chromium-profile')}")
    options.set_capability("goog:loggingPrefs", {"browser": "ALL"})
    driver = webdriver.Chrome(service=Service(executable_path=DRIVER), options=options)
    yield driver
    driver.quit()


@pytest.fixture(scope="module", params=[2, 3])
def report(request, tmp_path_factory):
    ndim = request.param
    image, labels = scene(ndim)
    spacing = (2.0, 0.5, 0.5)[3 - ndim:]
    regions = regions_of(labels, spacing=spacing)
    out = tmp_path_factory.mktemp(f"report{ndim}d") / "report é <1>.html"
    write_report(out, image=image, labels=labels, spacing=spacing, unit="µm", regions=regions,
                 diagram=diagram(ndim, 4), kept=np.arange(4), threshold=0.5,
                 params={"walls": "bright"}, figures={"regions": len(regions)},
                 source="scan <&>.tif")
    return ndim, out, regions


def _open(browser, path):
    browser.get(path.resolve().as_uri())
    assert browser.execute_script("return document.readyState") == "complete"


def _column(browser, k):
    return browser.execute_script(
        "return Array.from(document.querySelectorAll('#regions tbody tr'))"
        ".map(r => r.cells[arguments[0]].getAttribute('data-v'));", k)


def test_page_renders_every_picture(browser, report):
    ndim, path, regions = report
    _open(browser, path)
    images = browser.execute_script(
        "return Array.from(document.images).map(i => [i.complete, i.naturalWidth]);")
    assert len(images) >= 6
    assert all(done and width > 0 for done, width in images)
    assert RESEARCH_ONLY in browser.find_element("id", "caution").text
    assert len(browser.find_elements("css selector", "#regions tbody tr")) == len(regions)
    errors = [e for e in browser.get_log("browser") if e["level"] == "SEVERE"]
    assert errors == []  # no script error and no blocked (non-embedded) resource


def test_header_click_sorts_the_table(browser, report):
    _, path, regions = report
    _open(browser, path)
    k = regions.names.index("margin")
    button = browser.find_elements("css selector", "#regions th button")[k]
    button.click()
    ascending = [float(v) for v in _column(browser, k)]
    assert ascending == sorted(np.asarray(regions["margin"]).tolist())
    button.click()
    assert [float(v) for v in _column(browser, k)] == ascending[::-1]
    labels = [int(v) for v in _column(browser, regions.names.index("label"))]
    order = np.argsort(-np.asarray(regions["margin"]))
    assert labels == np.asarray(regions["label"])[order].tolist()


def test_slider_changes_the_frame(browser, report):
    ndim, path, _ = report
    _open(browser, path)
    sliders = browser.find_elements("css selector", "#browser input.slider")
    if ndim == 2:
        assert sliders == []  # a 2D image is one frame
        return
    from selenium.webdriver.common.keys import Keys

    assert len(sliders) == 3
    base = browser.find_elements("css selector", "#browser img.base")[0]
    before, caption = base.get_attribute("src"), browser.find_element(
        "css selector", "#browser .where").text
    sliders[0].send_keys(Keys.ARROW_RIGHT)
    assert base.get_attribute("src") != before
    assert browser.find_element("css selector", "#browser .where").text != caption


def test_row_click_moves_to_the_region(browser, report):
    ndim, path, regions = report
    _open(browser, path)
    row = 2
    browser.find_elements("css selector", "#regions tbody tr")[row].click()
    centre = [regions[f"centroid_voxel_{a}"][row] for a in "zyx"[3 - ndim:]]
    shape = scene(ndim)[0].shape
    sliders = browser.find_elements("css selector", "#browser input.slider")
    for axis, slider in enumerate(sliders):  # every slice is a frame at this size
        nearest = np.argmin(np.abs(np.arange(shape[axis]) - centre[axis]))
        assert int(slider.get_attribute("value")) == nearest
    marker = browser.find_elements("css selector", "#browser .marker")[0]
    assert marker.is_displayed()
    top, left = (float(browser.execute_script(f"return arguments[0].style.{side}", marker)
                       .rstrip("%")) for side in ("top", "left"))
    # the centroid travels with 2 decimals: within 0.005 voxel
    assert top == pytest.approx(100 * (centre[-2] + 0.5) / shape[-2], abs=0.5 / shape[-2])
    assert left == pytest.approx(100 * (centre[-1] + 0.5) / shape[-1], abs=0.5 / shape[-1])
    picked = browser.find_elements("css selector", "#regions tbody tr.picked")
    assert len(picked) == 1


def test_empty_report_runs_without_errors(browser, tmp_path):
    image, labels = scene(3)
    regions = regions_of(labels, spacing=(1.0, 1.0, 1.0))
    out = tmp_path / "empty.html"
    write_report(out, image=image, labels=np.zeros_like(labels), spacing=(1.0, 1.0, 1.0),
                 unit="µm", regions=regions.select(np.zeros(len(regions), bool)),
                 diagram=diagram(3, 4), kept=np.zeros(7, bool), params={}, figures={})
    _open(browser, out)
    assert "No region was kept" in browser.find_element("id", "no-regions").text
    images = browser.execute_script("return Array.from(document.images).map(i => i.naturalWidth);")
    assert len(images) >= 3 and min(images) > 0
    assert [e for e in browser.get_log("browser") if e["level"] == "SEVERE"] == []
