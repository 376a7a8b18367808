"""The HTML report in a real headless browser (Debian's chromium + chromedriver, via selenium).

Common practice for interactive pages (no published source): load the written file from a
file:// URL, then check what a reader would see and do: every picture decodes, a header
click sorts the table, every slice of an axis can be reached, clicking a region in the
image picks its row and a row click moves the sliders to the region, the CSV download holds
the table's rows (read back with the standard library's csv module), a 2D page uses 2D
words, and no two headings or captions overlap at two window widths. Scenes are invented
data (tests/report_scene.py), for regression only.
"""

from __future__ import annotations

import csv
import io
import shutil
import time
from urllib.parse import unquote

import numpy as np
import pytest

from cavitas import RESEARCH_ONLY
from cavitas._table import Table
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


def _open(browser, path, width=1200):
    browser.set_window_size(width, 1600)
    browser.get(path.resolve().as_uri())
    assert browser.execute_script("return document.readyState") == "complete"
    for _ in range(100):  # the slices are unpacked asynchronously
        if browser.execute_script("return document.body.dataset.browser"):
            break
        time.sleep(0.05)
    assert browser.execute_script("return document.body.dataset.browser") == "ready"


def _column(browser, name):
    return browser.execute_script(
        "var k = Array.from(document.querySelectorAll('#regions th'))"
        ".findIndex(h => h.dataset.name === arguments[0]);"
        "return Array.from(document.querySelectorAll('#regions tbody tr'))"
        ".map(r => r.cells[k].getAttribute('data-v'));", name)


def _pixel(browser, view, row, col):
    """RGB of the canvas of ``view`` at the centre of grid pixel (row, col)."""
    return browser.execute_script(
        "var cv = document.querySelectorAll('#browser canvas')[arguments[0]];"
        "var up = cv.width / arguments[3];"
        "return Array.from(cv.getContext('2d').getImageData("
        "Math.floor((arguments[2] + 0.5) * up), Math.floor((arguments[1] + 0.5) * up), 1, 1)"
        ".data).slice(0, 3);", view, row, col, _grid_cols(browser, view))


def _grid_cols(browser, view):
    return browser.execute_script(
        "var D = JSON.parse(document.getElementById('scan').textContent);"
        "var v = D.views[arguments[0]];"
        "return D.ndim === 2 ? D.shape[1] : D.shape[v.cols];", view)


def test_page_renders_every_picture(browser, report):
    ndim, path, regions = report
    _open(browser, path)
    images = browser.execute_script(
        "return Array.from(document.images).map(i => [i.complete, i.naturalWidth, i.alt]);")
    assert len(images) >= (5 if ndim == 2 else 7)
    assert all(done and width > 0 and alt for done, width, alt in images)
    canvases = browser.find_elements("css selector", "#browser canvas")
    assert len(canvases) == (1 if ndim == 2 else 3)
    assert all(c.get_attribute("aria-label") for c in canvases)
    assert RESEARCH_ONLY in browser.find_element("id", "caution").text
    assert len(browser.find_elements("css selector", "#regions tbody tr")) == len(regions)
    errors = [e for e in browser.get_log("browser") if e["level"] == "SEVERE"]
    assert errors == []  # no script error and no blocked (non-embedded) resource


def test_header_click_sorts_the_table(browser, report):
    _, path, regions = report
    _open(browser, path)
    button = browser.find_element("css selector", '#regions th[data-name="margin"] button')
    button.click()
    ascending = [float(v) for v in _column(browser, "margin")]
    assert ascending == sorted(np.asarray(regions["margin"]).tolist())
    button.click()
    assert [float(v) for v in _column(browser, "margin")] == ascending[::-1]
    labels = [int(v) for v in _column(browser, "label")]
    order = np.argsort(-np.asarray(regions["margin"]))
    assert labels == np.asarray(regions["label"])[order].tolist()


def test_every_slice_of_a_96_slice_axis_is_reached(browser, tmp_path):
    # Slice z of the scan has one bright voxel at (z // 8, z % 8): at each slider position
    # the canvas must show that voxel bright and the previous slice's voxel dark.
    image = np.zeros((96, 12, 8), np.float32)
    for z in range(96):
        image[z, z // 8, z % 8] = 1.0
    labels = np.zeros(image.shape, np.int32)
    out = tmp_path / "slices.html"
    write_report(out, image=image, labels=labels, spacing=(1.0, 1.0, 1.0), unit="µm",
                 regions=Table({"label": np.zeros(0, int)}), params={}, figures={})
    _open(browser, out)
    slider = browser.find_elements("css selector", "#browser input.slider")[0]
    assert slider.get_attribute("max") == "95"
    captions = set()
    for z in range(96):
        browser.execute_script(
            "arguments[0].value = arguments[1];"
            "arguments[0].dispatchEvent(new Event('input'));", slider, z)
        assert min(_pixel(browser, 0, z // 8, z % 8)) > 200
        if z:
            assert max(_pixel(browser, 0, (z - 1) // 8, (z - 1) % 8)) < 50
        captions.add(browser.find_element("css selector", "#browser .where").text)
    assert len(captions) == 96 and any("slice 96 of 96" in c for c in captions)


def test_row_click_moves_to_the_region(browser, report):
    ndim, path, regions = report
    _open(browser, path)
    row = 2
    browser.find_elements("css selector", "#regions tbody tr")[row].click()
    centre = [regions[f"centroid_voxel_{a}"][row] for a in "zyx"[3 - ndim:]]
    sliders = browser.find_elements("css selector", "#browser input.slider")
    for axis, slider in enumerate(sliders):  # every slice is reachable: the nearest one
        assert int(slider.get_attribute("value")) == round(centre[axis])
    picked = browser.find_elements("css selector", "#regions tbody tr.picked")
    assert len(picked) == 1
    # the region is tinted in the image: warm (red well above blue) at its centroid
    r, _, b = _pixel(browser, 0, round(centre[-2]), round(centre[-1]))
    assert r - b > 60


def test_clicking_a_region_picks_its_row(browser, report):
    ndim, path, regions = report
    _open(browser, path)
    from selenium.webdriver.common.action_chains import ActionChains

    row = 3
    label = int(regions["label"][row])
    centre = [regions[f"centroid_voxel_{a}"][row] for a in "zyx"[3 - ndim:]]
    if ndim == 3:  # go to the region's slice first
        slider = browser.find_elements("css selector", "#browser input.slider")[0]
        browser.execute_script("arguments[0].value = arguments[1];"
                               "arguments[0].dispatchEvent(new Event('input'));",
                               slider, round(centre[0]))
    canvas = browser.find_elements("css selector", "#browser canvas")[0]
    shape = scene(ndim)[0].shape
    size = canvas.size
    dx = (centre[-1] + 0.5) / shape[-1] * size["width"] - size["width"] / 2
    dy = (centre[-2] + 0.5) / shape[-2] * size["height"] - size["height"] / 2
    ActionChains(browser).move_to_element_with_offset(canvas, int(dx), int(dy)).perform()
    hover = browser.find_elements("css selector", "#browser .hover")[0].text
    assert hover == f"region {label}"
    ActionChains(browser).move_to_element_with_offset(canvas, int(dx), int(dy)).click().perform()
    picked = browser.find_elements("css selector", "#regions tbody tr.picked")
    assert [p.get_attribute("data-label") for p in picked] == [str(label)]


def test_csv_download_holds_the_table_rows(browser, report):
    _, path, regions = report
    _open(browser, path)
    browser.find_element("css selector", '#regions th[data-name="margin"] button').click()
    browser.find_element("id", "csv").click()
    href = browser.find_element("id", "csv").get_attribute("data-href")
    assert href.startswith("data:text/csv")
    rows = list(csv.reader(io.StringIO(unquote(href.split(",", 1)[1]))))
    heads = [h.text for h in browser.find_elements("css selector", "#regions th")]
    assert rows[0] == heads
    assert len(rows) - 1 == len(regions)
    k = rows[0].index("margin")
    assert [float(r[k]) for r in rows[1:]] == sorted(np.asarray(regions["margin"]).tolist())
    lab = rows[0].index("label")
    assert sorted(int(r[lab]) for r in rows[1:]) == sorted(regions["label"].tolist())


#: Words that belong to volumes; a 2D page says area, perimeter, circularity, pixels.
WORDS_3D = ("volume", "voxel", "sphericity", "surface", "porosity", "sphere", "3D")


def test_a_2d_page_has_no_3d_words(browser, report):
    ndim, path, _ = report
    if ndim == 3:
        pytest.skip("the 2D page only")
    _open(browser, path)
    # the full parameter record keeps run.json's names on purpose (behind its fold)
    text = browser.execute_script(
        "var rec = document.querySelector('details.record'); if (rec) { rec.remove(); }"
        "return document.body.innerText + ' ' + Array.from(document.querySelectorAll("
        "'[alt], [aria-label], [title]')).map(e => (e.alt || '') + ' ' + "
        "(e.getAttribute('aria-label') || '') + ' ' + (e.title || '')).join(' ');")
    for word in WORDS_3D:
        assert word.lower() not in text.lower(), word


@pytest.mark.parametrize("width", [700, 1400])
def test_headings_and_captions_do_not_overlap(browser, report, width):
    _, path, _ = report
    _open(browser, path, width=width)
    boxes = browser.execute_script("""
        var els = Array.from(document.querySelectorAll(
          'h1, h2, h3, figcaption, dl.findings dt, dl.findings dd, .hover, summary, #csv'));
        return els.map(function (e, i) { var r = e.getBoundingClientRect();
          return [i, e.tagName, r.left, r.top, r.right, r.bottom]; });""")
    for a in boxes:
        for b in boxes:
            if a[0] < b[0] and a[4] > a[2] and b[4] > b[2]:
                apart = a[4] <= b[2] + 0.5 or b[4] <= a[2] + 0.5 or a[5] <= b[3] + 0.5 \
                    or b[5] <= a[3] + 0.5
                assert apart, (a, b)
    overflow = browser.execute_script(
        "return document.documentElement.scrollWidth - document.documentElement.clientWidth")
    assert overflow <= 1  # nothing wider than the window


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
    assert len(images) >= 2 and min(images) > 0
    assert [e for e in browser.get_log("browser") if e["level"] == "SEVERE"] == []


def test_batch_index_sorts_and_reads_plainly(browser, tmp_path):
    from cavitas.batch._index import index_html
    from cavitas.batch._summary import summary_table

    rows = [{"input": f"/d/{name}.tif", "name": name, "status": "done", "seconds": 1.0,
             "error": "", "summary": {"regions": count, "porosity": fraction}}
            for name, count, fraction in (("a", 12, 0.25), ("b", 3, 0.5), ("c", 40, 0.125))]
    out = tmp_path / "index.html"
    out.write_text(index_html(summary_table(rows), root=tmp_path, version="0",
                              params={"walls": "dark", "min_volume": None, "smooth": None},
                              tables={}), encoding="utf-8")
    browser.get(out.resolve().as_uri())
    heads = browser.find_elements("css selector", "#inputs th button")
    names = [h.text for h in heads]
    heads[names.index("regions wholly inside")].click()
    order = browser.execute_script(
        "return Array.from(document.querySelectorAll('#inputs tbody tr'))"
        ".map(r => r.cells[0].textContent);")
    assert order == ["/d/b.tif", "/d/a.tif", "/d/c.tif"]
    cells = browser.execute_script(
        "return Array.from(document.querySelectorAll('#inputs tbody tr'))"
        ".map(r => r.cells[arguments[0]].textContent);", names.index("filled fraction [%]"))
    assert cells == ["50", "25", "12.5"]  # percent, the unit said once in the header
    text = browser.find_element("tag name", "body").text
    assert "null" not in text and "walls are" in text and "{" not in text
    assert RESEARCH_ONLY in text
