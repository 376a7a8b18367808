"""Report plots and the HTML page: what is drawn, what the page holds, what it must not hold.

Common practice for report tests (no published source): inspect the Matplotlib Artists
behind each figure, parse the written HTML with the standard library's parser, decode every
embedded picture, and compare outlines and histogram counts with general-purpose reference
libraries (scikit-image's ``find_boundaries``, numpy's ``histogram``). Scenes are invented
data (tests/report_scene.py), used for regression only.
"""

from __future__ import annotations

import base64
import html
import io
import zlib
from html.parser import HTMLParser

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from matplotlib import patheffects
from matplotlib.figure import Figure
from PIL import Image
from skimage.segmentation import find_boundaries

from cavitas import RESEARCH_ONLY, OutputError, ParameterError
from cavitas._table import Table
from cavitas.report import (
    plot_histograms,
    plot_region_slices,
    plot_slices,
    write_report,
)
from cavitas.report._browser import embed_scan
from cavitas.report._encode import figure_png
from cavitas.report._findings import gather_findings
from cavitas.report._numbers import add_numbers
from cavitas.report._overview import plot_overview
from cavitas.report._params_html import parameter_lists
from cavitas.report._regions import pick_region, region_centroids
from cavitas.report._render import (
    OUTLINE_DARK,
    OUTLINE_LIGHT,
    intensity_window,
    outline_mask,
    render_slice,
)
from cavitas.report._table_html import format_value
from tests.report_scene import diagram, regions_of, scene

DTYPES = [np.float32, np.uint16]


class _Page(HTMLParser):
    """Collects tags with their attributes, and the text, of a written page."""

    def __init__(self) -> None:
        super().__init__()
        self.tags: list[tuple[str, dict[str, str | None]]] = []
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    def handle_data(self, data):
        self.text.append(data)


def _parse(path) -> tuple[str, _Page]:
    source = path.read_text(encoding="utf-8")
    page = _Page()
    page.feed(source)
    return source, page


def _report(tmp_path, ndim, *, empty=False, with_diagram=True, **kw):
    image, labels = scene(ndim)
    spacing = (2.0, 0.5, 0.5)[3 - ndim:]
    regions = regions_of(labels, spacing=spacing)
    if empty:
        labels = np.zeros_like(labels)
        regions = regions.select(np.zeros(len(regions), bool))
    out = tmp_path / "report.html"
    write_report(out, image=image, labels=labels, spacing=spacing, unit="µm", regions=regions,
                 diagram=diagram(ndim, 4) if with_diagram else None, kept=np.arange(4),
                 threshold=0.5, params={"walls": "bright", "connectivity": 1},
                 figures={"regions": len(regions), "porosity": (0.25, "%")},
                 source="scan.tif", **kw)
    return out, regions


SCAN_BUDGET = 300_000


@pytest.fixture(scope="module", params=[2, 3])
def written(request, tmp_path_factory):
    """One full report per ndim, shared by the page tests (rendering is the slow part)."""
    out, regions = _report(tmp_path_factory.mktemp("report"), request.param,
                           scan_budget=SCAN_BUDGET)
    return out, regions


# --- pixels and plots ------------------------------------------------------------------------

@pytest.mark.parametrize("ndim", [2, 3])
@pytest.mark.parametrize("walls", ["bright", "dark"])
def test_outline_pixels_are_the_inner_boundaries(ndim, walls):
    # Reference: skimage.segmentation.find_boundaries(mode="inner"), restricted to regions.
    image, labels = scene(ndim)
    image = image if walls == "bright" else 1.0 - image
    plane, lab = (image, labels) if ndim == 2 else (image[10], labels[10])
    grey, code = render_slice(plane, lab, (0.0, 1.0))
    expected = find_boundaries(lab, mode="inner") & (lab > 0)
    assert expected.any()
    np.testing.assert_array_equal(code > 0, expected)
    # two-tone: one tone per region, light when the region's pixels are dark on average
    for label in np.unique(lab[expected]):
        tones = np.unique(code[expected & (lab == label)])
        assert len(tones) == 1
        assert (tones[0] == 1) == (plane[lab == label].mean() < 0.5)
    assert set(np.unique(code[expected])) == ({1} if walls == "bright" else {2})


@pytest.mark.parametrize("shape", [(1, 7), (23, 31), (9, 11, 13)])
def test_outline_mask_equals_find_boundaries_on_random_labels(shape):
    # Reference: skimage.segmentation.find_boundaries(mode="inner") restricted to the
    # regions, on random label maps (few labels, so runs and ties with 0 are common).
    rng = np.random.default_rng(sum(shape))
    for _ in range(5):
        lab = rng.integers(0, 4, size=shape)
        expected = find_boundaries(lab, mode="inner") & (lab > 0)
        np.testing.assert_array_equal(outline_mask(lab), expected)
    np.testing.assert_array_equal(outline_mask(np.zeros(shape, int)), np.zeros(shape, bool))


def _numbers_picture(draw) -> np.ndarray:
    """Grey pixels of a small figure (a grey picture, then ``draw(ax)``), as the report
    renders figures."""
    fig = Figure(figsize=(2.0, 0.8))
    ax = fig.add_axes((0, 0, 1, 1))
    ax.imshow(np.full((2, 2, 3), 0.3), extent=(0, 1, 0, 1))
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1)
    draw(ax)
    return np.asarray(Image.open(io.BytesIO(figure_png(fig))).convert("L"), dtype=int)


@pytest.mark.parametrize("size", [7, 9])
def test_region_numbers_look_like_matplotlib_text_with_a_halo(size):
    # Reference: Matplotlib's own text drawing (ax.text, centred, with a withStroke halo),
    # which the overview used for its region numbers before they became two collections.
    xs, ys, texts = [0.2, 0.5, 0.8], [0.3, 0.6, 0.4], ["7", "128", "40"]
    halo = [patheffects.withStroke(linewidth=2.6, foreground="white")]

    def as_text(ax):
        for x, y, text in zip(xs, ys, texts, strict=True):
            ax.text(x, y, text, ha="center", va="center", fontsize=size, color="black",
                    path_effects=halo)

    expected = _numbers_picture(as_text)
    got = _numbers_picture(lambda ax: add_numbers(ax, xs, ys, texts, size=size, halo=2.6))
    assert (expected > 200).sum() > 50 and (expected < 40).sum() > 20  # halos and glyphs
    difference = np.abs(got - expected)
    assert difference.max() <= 40, difference.max()  # anti-aliasing, not a shifted glyph
    assert difference.mean() < 0.5


@pytest.mark.parametrize("ndim", [2, 3])
@pytest.mark.parametrize("dtype", DTYPES)
def test_plot_slices_draws_outlines(ndim, dtype):
    image, labels = scene(ndim, dtype=dtype)
    fig = plot_slices(image, labels, spacing=(2.0, 0.5, 0.5)[3 - ndim:], unit="µm")
    assert len(fig.axes) == (1 if ndim == 2 else 3)
    rgb = fig.axes[0].images[0].get_array()
    outline = np.all(rgb == OUTLINE_LIGHT, axis=-1) | np.all(rgb == OUTLINE_DARK, axis=-1)
    middle = labels if ndim == 2 else labels[round((labels.shape[0] - 1) / 2)]
    np.testing.assert_array_equal(outline, find_boundaries(middle, mode="inner") & (middle > 0))
    assert fig.axes[0].get_xlabel() == "x [µm]"
    # physical extent: 64 (or 32) columns of 0.5 µm
    assert fig.axes[0].images[0].get_extent()[1] == pytest.approx(0.5 * image.shape[-1])


def test_region_slices_mark_the_picked_region():
    image, labels = scene(3)
    regions = regions_of(labels, spacing=(1.0, 1.0, 1.0))
    largest = plot_region_slices(image, labels, regions, which="largest")
    doubt = plot_region_slices(image, labels, regions, which="least_certain")
    # region 4 has the largest radius; region 2 the smallest margin (0.05)
    assert largest.texts[-1].get_text() == "Largest region: label 4"
    assert doubt.texts[-1].get_text() == "Least certain region: label 2"
    for ax in largest.axes:  # a dashed contour and a plus marker in every panel
        assert any(line.get_marker() == "+" for line in ax.lines)
        assert ax.collections and ax.collections[0].get_linestyle()[0][1] is not None
    empty = regions.select(np.zeros(len(regions), bool))
    assert plot_region_slices(image, labels, empty, which="largest") is None


def test_histogram_counts_equal_the_table():
    # Reference: numpy.histogram on the same column; hand-made table (invented values).
    rng = np.random.default_rng(3)
    volume = rng.lognormal(3.0, 1.5, 200)
    sphericity = np.r_[rng.uniform(0.5, 1.0, 197), np.nan, np.nan, np.inf]
    table = Table({"volume": volume, "sphericity": sphericity}, units={"volume": "µm³"})
    fig = plot_histograms(table)
    assert [ax.get_xlabel() for ax in fig.axes] == ["volume [µm³]", "sphericity"]
    for ax, values in zip(fig.axes, (volume, sphericity[:197]), strict=True):
        (bars,) = [c for c in ax.collections if c.get_gid() == "bars"]
        corners = np.array([path.vertices[:4] for path in bars.get_paths()])
        heights, edges = corners[:, 2, 1], np.r_[corners[:, 0, 0], corners[-1, 1, 0]]
        assert heights.sum() == len(values)
        np.testing.assert_array_equal(heights, np.histogram(values, bins=edges)[0])
        assert ax.get_ylim()[0] == 0  # the bars rest on the axis
    assert fig.axes[0].get_xscale() == "log"  # volumes span more than 100×
    assert "3 not finite" in fig.axes[1].get_title()
    assert plot_histograms(Table({"label": [1, 2]})) is None


def test_pick_region_and_centroids():
    _, labels = scene(2)
    regions = regions_of(labels, spacing=(1.0, 1.0))
    from_columns = region_centroids(labels, regions)
    computed = region_centroids(labels, Table({"label": regions["label"]}))
    np.testing.assert_allclose(computed, from_columns)  # scipy center_of_mass (table) agrees
    assert pick_region(regions, "least_certain") == 1
    with pytest.raises(ParameterError, match="which"):
        pick_region(regions, "smallest")


@given(st.floats(allow_nan=False))
def test_sort_keys_read_back_as_the_value(value):
    # The table sorts on data-v; JavaScript's Number() parses repr and "±Infinity" exactly.
    key = format_value(value)[1]
    assert float(key.replace("Infinity", "inf")) == value


def test_embedded_scan_holds_every_voxel_and_label():
    # Reference: the standard library's zlib (the page unpacks the same deflate stream
    # with the browser's DecompressionStream), and the display window of the other plots.
    image, labels = scene(3)
    scan = embed_scan(image, labels, border=[3])
    assert scan.factor == 1 and scan.shape == image.shape and scan.border == (3,)
    grey = np.frombuffer(zlib.decompress(scan.grey), np.uint8).reshape(image.shape)
    lab = np.frombuffer(zlib.decompress(scan.labels), "<u1").reshape(image.shape)
    np.testing.assert_array_equal(lab, labels)
    lo, hi = intensity_window(image)
    expected = np.clip(np.floor((image.astype(np.float64) - lo) / (hi - lo) * 64), 0, 63)
    assert np.mean(grey == expected) > 0.999  # float32 rounding at level edges only
    small = embed_scan(image, labels, budget=scan.nbytes // 4)
    assert small.factor >= 2 and small.nbytes <= scan.nbytes // 4
    assert small.shape == tuple(-(-n // small.factor) for n in image.shape)


# --- the page ----------------------------------------------------------------------------------

def test_report_is_self_contained(written):
    out, regions = written
    source, page = _parse(out)
    assert "http://" not in source and "https://" not in source
    links = [(tag, a) for tag, a in page.tags for k in ("src", "href") if a.get(k) is not None]
    images = [a for tag, a in page.tags if tag == "img"]
    assert images and all(a["src"].startswith("data:image/png;base64,") for a in images)
    assert all(tag == "img" for tag, _ in links)  # no link, stylesheet or script file
    assert not any(tag == "script" and "src" in a for tag, a in page.tags)
    for a in images:  # every embedded picture decodes to a non-empty PNG
        png = Image.open(io.BytesIO(base64.b64decode(a["src"].split(",", 1)[1])))
        assert png.format == "PNG" and png.size[0] > 0 and png.size[1] > 0
    alts = " ".join(a.get("alt", "") for a in images)
    assert "Persistence diagram" in alts and "Barcode" in alts and "Overview" in alts
    assert all(a.get("alt") for a in images)  # every picture says what it shows
    # one table row per region, each with its centroid for the slice browser
    rows = [a for tag, a in page.tags if tag == "tr" and "data-c" in a]
    assert len(rows) == len(regions)
    # units in the headers, in the image's own words
    assert "volume [µm³]" in source or "area [µm²]" in source


def test_report_shows_the_caution_prominently(written):
    out, _ = written
    source, page = _parse(out)
    assert source.count(html.escape(RESEARCH_ONLY)) >= 2  # top of the page and footer
    assert source.index('id="caution"') < source.index('id="summary"')


def test_report_escapes_hostile_names(tmp_path):
    hostile = "évil <script>alert('x')</script> & \"quotes\".tif"
    image, labels = scene(2)
    table = Table({"label": [1], "<b>odd</b>": ["<i>&amp;</i>"]}, units={"<b>odd</b>": "<u>"})
    out = tmp_path / "r.html"
    write_report(out, image=image, labels=labels, spacing=(1, 1), unit="<µm>", regions=table,
                 params={"<p>": "</td>"}, figures={}, source=hostile, title=None)
    source, page = _parse(out)
    assert "<script>alert" not in source
    assert "<b>odd" not in source and "<i>&amp;" not in source and "<u>" not in source
    assert html.escape(hostile) in source
    assert "évil" in "".join(page.text)
    assert "&lt;b&gt;odd&lt;/b&gt; [&lt;u&gt;]" in source
    assert sum(tag == "script" for tag, _ in page.tags) == 4  # scan JSON + three scripts


def test_report_with_no_region_still_shows_the_diagram(tmp_path):
    out, _ = _report(tmp_path, 3, empty=True)
    source, page = _parse(out)
    assert "No region was kept" in source
    assert any("Persistence diagram" in (a.get("alt") or "") for tag, a in page.tags)
    assert not any(tag == "tr" and "data-c" in a for tag, a in page.tags)


def test_report_caps_the_table_rows(tmp_path):
    out, regions = _report(tmp_path, 2, max_rows=3, with_diagram=False)
    source, page = _parse(out)
    assert sum(tag == "tr" and "data-c" in a for tag, a in page.tags) == 3
    assert f"first 3 of {len(regions)} regions" in source


def test_report_size_within_budget(written):
    # A moderate input: the scan budget bounds the page (base64 adds a third), plus the
    # static plots (well under 1 MB here).
    out, _ = written
    assert out.stat().st_size < SCAN_BUDGET * 4 / 3 + 1_000_000


def test_report_needs_force_and_matching_shapes(tmp_path):
    out, _ = _report(tmp_path, 2, with_diagram=False)
    with pytest.raises(OutputError, match="already exists"):
        _report(tmp_path, 2, with_diagram=False)
    _report(tmp_path, 2, with_diagram=False, force=True)
    image, labels = scene(2)
    with pytest.raises(ParameterError, match="labels must have the image's shape"):
        write_report(tmp_path / "x.html", image=image, labels=labels[:-1], spacing=(1, 1),
                     unit="µm", regions=Table({}), params={}, figures={})


def test_parameters_read_as_plain_text(tmp_path):
    # Common practice for reports: no JSON syntax in what a reader sees; unset values are a
    # dash, nested records become "name value" pairs, numbers keep 3 significant digits.
    image, labels = scene(2)
    out = tmp_path / "report.html"
    write_report(out, image=image, labels=labels, spacing=(0.5, 0.5), unit="µm",
                 regions=regions_of(labels, spacing=(0.5, 0.5)),
                 params={"walls": "dark", "safety": 1.25, "min_persistence": None,
                         "smooth_sigma": 1.25,
                         "scales_tried": [{"sigma": 1.25, "threshold": 49.0963062882},
                                          {"sigma": 2.5, "threshold": 16.4514426773}]},
                 figures={}, source="scan.tif")
    source = out.read_text(encoding="utf-8")
    mine = source.split("<h3>Set for this run</h3>", 1)[1].split("</table>", 1)[0]
    assert "<th>walls are</th><td>dark</td>" in mine and "safety" not in mine  # a default
    chosen = source.split("<h3>Chosen from the data</h3>", 1)[1].split("</table>", 1)[0]
    assert "<th>smoothing σ</th><td>1.25 µm</td>" in chosen
    assert "<th>smoothing scales tried</th><td>1.25, 2.5 µm</td>" in chosen
    record = source.split('<details class="record">', 1)[1].split("</details>", 1)[0]
    assert "null" not in record and '{"sigma"' not in record
    assert "sigma 1.25, threshold 49.1; sigma 2.5, threshold 16.5" in record
    assert "<th>min_persistence</th><td>—</td>" in record


def test_findings_count_whole_regions_and_warn_on_the_border():
    # Hand-made table (invented values): 3 whole regions, 1 on the border, 4 cut open.
    kinds = np.array(["chamber"] * 4 + ["cut"] * 4 + ["enclosure"], object)
    table = Table({"label": np.arange(1, 10), "kind": kinds,
                   "touches_border": np.r_[False, False, False, True, [True] * 4, False],
                   "volume": [10.0, 30.0, 20.0, 99.0, 1, 1, 1, 1, np.nan],
                   "margin": [0.5, 0.2, 0.9, 0.01, 0, 0, 0, 0, np.nan]},
                  units={"volume": "µm³"})
    found = gather_findings(table, ndim=3, unit="µm", params={"threshold": 2.0},
                            figures={"volume_fraction": 0.3}, notes=["A note.", None])
    assert (found.whole, found.touching, found.cut, found.enclosures) == (3, 1, 4, 1)
    assert sorted(found.sizes.tolist()) == [10.0, 20.0, 30.0]  # whole regions only
    assert found.least_certain == (2, 0.2)  # the border region's 0.01 does not count
    assert found.warnings[0] == "A note."
    assert "50% of the regions found are cut by the scan border" in found.warnings[1]


def test_parameters_set_by_hand_are_told_from_defaults():
    # The defaults are SegmentParams' own (the reference); connectivity resolved from
    # "unset" counts as chosen, not set.
    mine, chosen = parameter_lists({"walls": "bright", "min_volume": 20, "connectivity": 1,
                                    "noise_pixel_sigma": 3.0}, "µm", element="pixel")
    assert mine == [("smallest region kept", "20")]
    assert ("noise σ of single pixels", "3") in chosen and ("wall connectivity", "1") in chosen


def _text_boxes(fig):
    """Window extents of every visible, non-empty title, axis label and figure text."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    canvas = FigureCanvasAgg(fig)  # as figure_png renders
    canvas.draw()
    renderer = canvas.get_renderer()
    texts = list(fig.texts)
    for ax in fig.axes:
        texts += [ax.title, ax._left_title, ax._right_title, ax.xaxis.label, ax.yaxis.label]
    return [(t.get_text(), t.get_window_extent(renderer)) for t in texts
            if t.get_visible() and t.get_text()]


@pytest.mark.parametrize(("ndim", "spacing"), [(2, (0.5, 0.5)), (3, (2.0, 0.5, 0.5)),
                                               (3, (4.0, 2.5, 2.5)), (3, (5.0, 2.5, 2.5))])
def test_figure_titles_do_not_overlap(ndim, spacing):
    # Common practice: no two titles or axis labels of a figure share pixels (Matplotlib's
    # own window extents after drawing, as the report's PNGs are drawn). Tall volumes
    # (thick z slices) once pushed the figure title into the panel titles.
    image, labels = scene(ndim)
    regions = regions_of(labels, spacing=spacing)
    figures = [plot_region_slices(image, labels, regions, which=w, spacing=spacing, unit="µm")
               for w in ("largest", "least_certain")]
    figures.append(plot_overview(image, labels, spacing=spacing, unit="µm", border=[1])[0])
    figures.append(plot_histograms(regions, ndim=ndim))
    for fig in figures:
        boxes = _text_boxes(fig)
        for i, (a, box_a) in enumerate(boxes):
            for b, box_b in boxes[i + 1:]:
                assert not box_a.overlaps(box_b), (a, b)


@pytest.mark.parametrize(("ndim", "element"), [(2, "pixel"), (3, "voxel")])
def test_findings_give_the_smoothing_in_pixels_or_voxels_without_a_unit(tmp_path, ndim,
                                                                        element):
    # The units convention of cavitas/_shared/units.py (common practice: a plane's
    # elements are pixels): a scan with no physical size reads in its own elements.
    image, labels = scene(ndim)
    out = tmp_path / "report.html"
    write_report(out, image=image, labels=labels, spacing=(1.0,) * ndim, unit="voxel",
                 regions=regions_of(labels, spacing=(1.0,) * ndim), diagram=diagram(ndim, 4),
                 kept=np.arange(4), threshold=0.5,
                 params={"walls": "bright", "smooth_sigma": 1.5, "threshold": 0.5}, figures={},
                 source="s.tif")
    findings = out.read_text(encoding="utf-8").split('<dl class="findings">', 1)[1]
    assert f"above its darkest inside point after smoothing with σ = 1.5 {element}." in findings


def test_dask_arrays_give_the_same_page_a_slab_at_a_time(monkeypatch, tmp_path):
    # The chunk-by-chunk route hands the report Dask arrays: the page must be the one the
    # same arrays in memory give (the timestamp aside), and no task may compute more than a
    # slab of planes (the display window's strided sample bounded to a few voxels here).
    # Task results are watched with Dask's own scheduler callbacks.
    import re

    import dask
    import dask.array as da
    from dask.callbacks import Callback

    from cavitas.measure import measure_regions
    from cavitas.report import _browser, _html, _render

    rng = np.random.default_rng(0)
    shape = (24, 20, 18)
    image = rng.normal(100, 10, shape).astype(np.float32)
    labels = np.zeros(shape, np.int32)
    for label in range(1, 10):
        z, y, x = rng.integers(2, 14, 3)
        labels[z:z + 4, y:y + 5, x:x + 3] = label
    regions = measure_regions(labels, image=image, thickness=False)
    for module in (_html, _browser):  # a sample of about 500 voxels, not the whole image
        monkeypatch.setattr(module, "intensity_window", lambda img, **kw: (
            _render.intensity_window(img, max_samples=500, **kw)))
    results = []

    class Watch(Callback):
        def _posttask(self, key, result, dsk, state, worker_id):
            results.append(getattr(result, "size", 0))

    pages = []
    for arrays in ((image, labels), (da.from_array(image, chunks=(5, 7, 18)),
                                     da.from_array(labels, chunks=(24, 4, 5)))):
        with dask.config.set(scheduler="synchronous"), Watch():
            out = write_report(tmp_path / f"report{len(pages)}.html", image=arrays[0],
                               labels=arrays[1], spacing=(1.0, 1.0, 2.0), unit="µm",
                               regions=regions, params={"walls": "bright"},
                               figures={"regions": len(regions)},
                               scan_budget=2_000)  # the browser's slabs: several planes
        pages.append(re.sub(r"\d{4}-\d\d-\d\d \d\d:\d\d UTC", "",
                            out.read_text(encoding="utf-8")))
    assert pages[0] == pages[1]
    assert results and max(results) < image.size // 4  # a slab or a chunk, never the volume
