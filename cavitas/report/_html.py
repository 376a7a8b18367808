"""Assemble the self-contained HTML report: one file, pictures inlined, no network."""

from __future__ import annotations

import datetime
import html
import os
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from .. import _checks
from .._caution import RESEARCH_ONLY
from .._errors import ParameterError
from .._shared.atomic import atomic_path, check_writable
from .._shared.units import length_unit
from .._table import Table
from .._version import __version__
from ..cubical._diagram import Diagram
from ..cubical._euler import ConnectivityDensity, EulerCurve
from ._browser import BROWSER_SCRIPT, browser_html, embed_scan
from ._encode import REPORT_DPI, data_uri, figure_png, png_size
from ._findings import findings_html, gather_findings
from ._histograms import plot_histograms
from ._overview import plot_overview
from ._params_html import parameters_html, plain_value
from ._regions import region_centroids
from ._render import intensity_window
from ._slices import plot_region_slices
from ._table_html import SORT_SCRIPT, TABLE_SCRIPT, region_table_html
from ._topology_html import euler_caption, topology_html
from ._words import Words
from .diagram_plots import SAVE_DPI, plot_barcode, plot_diagram, smoothing_phrase
from .euler_plot import plot_euler_curve

__all__ = ["write_report"]

_CSS = """
:root { --ink: #1d232a; --muted: #5b6570; --line: #c9ced4; --panel: #f4f5f2; --warn: #8a3b12; }
* { box-sizing: border-box; }
body { font: 15px/1.45 system-ui, sans-serif; color: var(--ink); margin: 0 auto;
       max-width: 1240px; padding: 1.2rem 1.5rem 3rem; }
h1 { font-size: 1.6rem; margin: 0 0 .3rem; overflow-wrap: anywhere; }
h2 { font-size: 1.2rem; border-bottom: 2px solid var(--line); padding-bottom: .2rem;
     margin-top: 2rem; }
.meta { color: var(--muted); margin: 0 0 1rem; overflow-wrap: anywhere; }
.caution { border: 3px solid var(--warn); background: #fff4e8; padding: .7rem 1rem;
           font-size: 1.05rem; margin: 1rem 0; }
.caution strong { color: var(--warn); text-transform: uppercase; letter-spacing: .04em; }
.empty { border-left: 6px solid var(--muted); background: var(--panel); padding: .6rem 1rem; }
.facts { display: flex; flex-wrap: wrap; gap: 1rem 2.5rem; align-items: flex-start; }
table.kv td, table.kv th { padding: .15rem .8rem .15rem 0; text-align: left;
                           vertical-align: top; overflow-wrap: anywhere; }
table.kv th { font-weight: 600; white-space: nowrap; }
.plots { display: flex; flex-wrap: wrap; gap: 1.2rem; align-items: flex-start; }
.plots figure { margin: 0; max-width: 100%; }
.plots img { max-width: 100%; height: auto; border: 1px solid var(--line); }
figcaption { color: var(--muted); font-size: .9rem; }
#browser .views { display: flex; flex-wrap: wrap; gap: 1rem; }
#browser .view { margin: 0; max-width: 100%; }
#browser .stage { position: relative; background: #000; max-width: 100%; }
#browser .stage canvas { position: absolute; inset: 0; width: 100%; height: 100%;
                         image-rendering: pixelated; cursor: crosshair; }
#browser .slider { width: 100%; margin: .4rem 0 0; }
#browser .hover { margin: 0; font-weight: 600; min-height: 1.4em; }
.scalebar { position: absolute; left: 8px; bottom: 8px; pointer-events: none;
            display: flex; flex-direction: column; align-items: flex-start; gap: 2px; }
.scalebar .bar { display: block; height: 6px; background: #fff; border: 1.5px solid #000; }
.scalebar .text { font-size: .8rem; background: rgba(255,255,255,.85); color: #000;
                  padding: 0 .3rem; border-radius: 2px; }
.top { display: flex; flex-wrap: wrap; gap: 1.5rem; align-items: flex-start; }
.top .answer { flex: 1 1 28rem; min-width: 0; }
.top .overview { flex: 1 1 30rem; min-width: 0; }
.top figure { margin: 0; }
.top img { max-width: 100%; height: auto; border: 1px solid var(--line); }
dl.findings { margin: 0 0 1rem; }
dl.findings div { display: grid; grid-template-columns: 11rem 1fr; gap: .8rem;
                  padding: .3rem 0; border-bottom: 1px solid #e6e8ea; }
dl.findings dt { font-weight: 600; }
dl.findings dd { margin: 0; }
.warnings { border-left: 6px solid var(--warn); background: #fff8f0; padding: .3rem 1rem;
            margin: 0 0 1rem; }
.warnings h3 { margin: .4rem 0; font-size: 1rem; }
details { margin: .6rem 0; }
summary { cursor: pointer; color: var(--muted); }
.table-wrap { max-height: 70vh; overflow: auto; border: 1px solid var(--line); }
#regions { border-collapse: collapse; font-variant-numeric: tabular-nums; font-size: .9rem; }
#regions th { position: sticky; top: 0; z-index: 2; background: var(--panel); }
#regions td:first-child, #regions th:first-child { position: sticky; left: 0; z-index: 1;
                                                   border-right: 1px solid var(--line); }
#regions td:first-child { background: #fff; }
#regions th:first-child { z-index: 3; }
#regions th button { font: inherit; font-weight: 600; border: 0; background: none;
                     padding: .35rem .5rem; cursor: pointer; white-space: nowrap; }
#regions th[aria-sort=ascending] button::after { content: " \\25B2"; }
#regions th[aria-sort=descending] button::after { content: " \\25BC"; }
#regions td { padding: .2rem .5rem; text-align: right; border-top: 1px solid #e6e8ea; }
#regions tbody tr { cursor: pointer; }
#regions tbody tr:hover, #regions tbody tr:focus,
#regions tbody tr:hover td:first-child { background: #eef3f6; }
#regions tbody tr.picked, #regions tbody tr.picked td:first-child { background: #fbe9c8; }
#regions tbody tr.picked { outline: 2px dashed var(--ink); outline-offset: -2px; }
#csv { font: inherit; padding: .25rem .7rem; cursor: pointer; }
.note { color: var(--muted); }
footer { margin-top: 2.5rem; color: var(--muted); font-size: .9rem; }
"""

_CSP = ("default-src 'none'; img-src data:; style-src 'unsafe-inline'; "
        "script-src 'unsafe-inline'")


def _esc(value: Any) -> str:
    return html.escape(str(value), quote=True)


def _figure(fig: Any, caption: str, *, alt: str | None = None) -> str:
    if fig is None:
        return ""
    return _picture(figure_png(fig), caption, alt=alt)


def _picture(png: bytes, caption: str, *, alt: str | None = None, scale: float = 1.0) -> str:
    """A PNG with its caption; ``scale`` < 1 shows a denser picture at the report's size."""
    size = ""
    if scale != 1.0:
        width, height = png_size(png)
        size = f' width="{round(width * scale)}" height="{round(height * scale)}"'
    return (f'<figure><img src="{data_uri(png)}"{size} alt="{_esc(alt or caption)}">'
            f"<figcaption>{_esc(caption)}</figcaption></figure>")


_HOW_TO_READ = (
    "How to read this: every point is one dark pocket of the image. It appears (birth) at "
    "the intensity of its darkest inside point and merges with a neighbour (death) at the "
    "intensity of the lowest point of its wall; the farther a point lies from the diagonal, "
    "the higher its wall stands above its inside. Points inside the shaded band along the "
    "diagonal are shallower than the threshold and count as noise; filled points are the "
    "regions kept. Hollow points outside the band were refused for another reason: their "
    "inside is not as dark as the image's inside class, their wall not as bright as its "
    "wall class, or they are too small for their depth.")


def _diagram_figures(diagram: Diagram | None, kept: Any, threshold: float | None,
                     smoothing: float | None, unit: str, drawn: bytes | None = None) -> str:
    if diagram is None:
        return "<p>No persistence diagram was given to the report.</p>"
    if kept is not None and not isinstance(kept, Mapping):
        kept = {diagram.cavity_dim: kept}
    at = smoothing_phrase(smoothing, unit)
    alt = (f"Persistence diagram {at}: birth against death level of every pocket, the kept "
           "ones filled, the threshold band shaded.")
    if drawn is None:
        fig = plot_diagram(diagram, highlight=kept, threshold=threshold)
        fig.axes[0].set_title(f"Persistence diagram {at}".strip(), fontsize=10)
        parts = [_figure(fig, _HOW_TO_READ, alt=alt)]
    else:
        parts = [_picture(drawn, _HOW_TO_READ, alt=alt, scale=REPORT_DPI / SAVE_DPI)]
    if diagram.cavity_dim in diagram.dims:
        bars = plot_barcode(diagram, dim=diagram.cavity_dim, top=50, highlight=kept,
                            threshold=threshold)
        bars.axes[0].set_title(f"The 50 deepest pockets {at}".strip(), fontsize=10)
        parts.append(_figure(
            bars, "Barcode: the same pockets as bars from birth to death, deepest first (at "
                  "most 50); solid bars are kept regions, dashed ones were refused, the "
                  "dashed line marks the threshold."))
    return "".join(parts)


def _border_labels(regions: Table) -> list[int]:
    """Labels drawn as cut by the scan border (cut regions and kept ones touching it)."""
    if "label" not in regions or not len(regions):
        return []
    cut = np.zeros(len(regions), bool)
    if "kind" in regions:
        cut |= np.asarray(regions["kind"] == "cut")
    if "touches_border" in regions:
        cut |= np.asarray(regions["touches_border"], bool)
    return [int(v) for v in np.asarray(regions["label"])[cut]]


def _figures_html(figures: Mapping[str, Any], words: Words) -> str:
    """Every global figure, in the reader's words with its unit, behind a fold."""
    given = figures.get("units")
    units = given if isinstance(given, Mapping) else {}
    rows = []
    for key, value in figures.items():
        if key == "units":
            continue
        unit = units.get(key, "")
        if isinstance(value, tuple) and len(value) == 2 and isinstance(value[1], str):
            value, unit = value
        text = f"{plain_value(value)} {unit}".strip()
        rows.append(f"<tr><th>{_esc(words.column(key))}</th><td>{_esc(text)}</td></tr>")
    if not rows:
        return ""
    return (f'<details><summary>Every global figure</summary><table class="kv">'
            f'{"".join(rows)}</table></details>')


def write_report(path: str | os.PathLike, *, image: np.ndarray, labels: np.ndarray,
                 spacing: Sequence[float], unit: str, regions: Table,
                 diagram: Diagram | None = None, kept: Any = None,
                 threshold: float | None = None, params: Mapping[str, Any],
                 figures: Mapping[str, Any], title: str | None = None,
                 source: str | os.PathLike | None = None, force: bool = False,
                 max_rows: int = 5000, scan_budget: int = 9_000_000,
                 notes: Sequence[str] = (), euler: EulerCurve | None = None,
                 wall_topology: ConnectivityDensity | None = None,
                 diagram_png: bytes | None = None) -> Path:
    """Write a single self-contained HTML page that shows a segmentation.

    The page opens with what was found (counts, the size distribution, the filled
    fraction, noise and threshold in plain words, every warning of the run) beside an
    overview picture (the slice crossing most regions, each region filled and numbered,
    a scale bar). Then a slice browser over every slice along every axis (the region
    under the pointer is named, a click picks its table row), the region table (sortable,
    downloadable as CSV), the persistence diagram with a caption on how to read it, how
    the walls connect (when given: their Betti numbers, connectivity density and Euler
    characteristic curve), the parameters (set by hand / chosen from the data, the full
    record behind a fold) and closer looks at the least certain and the largest region.
    2D images are described in 2D words (area, perimeter, circularity, pixels). The
    research-only caution stays at the top and the bottom. Pictures are inlined; the page
    loads nothing and works offline.

    Parameters
    ----------
    path : path
        The ``.html`` file to write (atomically; an existing file needs ``force``).
    image, labels : array
        The scan and its label image (0 = no region), same 2D or 3D shape. Regions cut by
        the scan border may be in it too: they are drawn dashed (``kind`` = ``"cut"`` or
        ``touches_border`` in ``regions``). Dask arrays are read a slice or a slab at a
        time, the slice browser's slabs reduced on the Dask workers; place regions with
        the table's ``centroid_voxel_*`` columns then (else each label's centre is
        computed over the whole label image).
    spacing, unit : sequence of float, str
        Voxel size in ``(z, y, x)`` order and its unit.
    regions : Table
        One row per region (any columns; ``label`` and ``centroid_voxel_*`` are used to
        place regions, ``volume`` and ``margin`` to pick the largest and least certain).
    diagram : Diagram, optional
        The persistence diagram to draw.
    kept : array_like or mapping of int to array_like, optional
        Kept pairs (mask or indices); a bare array refers to the cavity dimension.
    threshold : float, optional
        The persistence threshold used for selection.
    params, figures : mapping
        Parameters of the run, and global figures (a value, or a ``(value, unit)`` pair;
        a ``"units"`` entry mapping names to units, as ``measure.global_figures`` gives,
        is used too).
    title, source : str, optional
        Page title (default from ``source``) and the input file name.
    force : bool
        Replace an existing file.
    max_rows : int
        Most table rows written (the regions.csv file holds them all).
    scan_budget : int
        Most bytes of the compressed scan and labels the slice browser embeds; larger
        scans are shown block-averaged.
    notes : sequence of str
        Warnings and remarks of the run, listed at the top (e.g. what set the threshold).
    euler : EulerCurve, optional
        The Euler characteristic curve of the image, drawn in the section on how the
        walls connect (see :func:`cavitas.workflow.wall_topology`).
    wall_topology : ConnectivityDensity, optional
        Betti numbers and connectivity density of the segmented walls, listed there too.
    diagram_png : bytes, optional
        The persistence diagram already drawn (``diagram.png`` of the same run: the
        diagram, ``kept`` and ``threshold`` given here, written by
        :func:`~cavitas.report.save_figure` and titled with
        :func:`~cavitas.report.diagram_plots.smoothing_phrase`): shown at the report's
        scale instead of drawn again.

    Returns
    -------
    Path
        The file written.

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> img = np.ones((12, 12)); img[3:9, 3:9] = 0.0
    >>> lab = np.zeros((12, 12), int); lab[4:8, 4:8] = 1
    >>> t = Table({"label": [1], "volume": [16.0]}, units={"volume": "µm²"})
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "report.html"
    >>> _ = write_report(out, image=img, labels=lab, spacing=(1.0, 1.0), unit="µm",
    ...                  regions=t, params={"walls": "bright"}, figures={"regions": 1})
    >>> "For research use only" in out.read_text(encoding="utf-8")
    True
    """
    check_writable(path, force=force)  # fail before the slow part
    # arrays (memory maps, Dask arrays) are read only where a picture needs them
    image = image if hasattr(image, "ndim") else np.asarray(image)
    labels = labels if hasattr(labels, "ndim") else np.asarray(labels)
    if image.ndim not in (2, 3):
        raise ParameterError(f"image must be 2D or 3D; got {image.ndim} dimensions.")
    if labels.shape != tuple(image.shape):
        raise ParameterError(
            f"labels must have the image's shape {tuple(image.shape)}; got {labels.shape}."
        )
    spacing = _checks.spacing(spacing, image.ndim)
    words = Words(image.ndim)
    name = Path(source).name if source else None
    title = title or (f"cavitas report: {name}" if name else "cavitas report")
    geometry = " × ".join(map(str, image.shape))
    sizes = " × ".join(f"{s:g}" for s in spacing)
    stamp = datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    meta = (f"{f'Input {_esc(source)} · ' if source else ''}{_esc(geometry)} "
            f"{words.element}s of {_esc(sizes)} {_esc(length_unit(unit, image.ndim))} · "
            f"cavitas {_esc(__version__)}"
            f" · {stamp}")

    n = len(regions)
    smoothing = params.get("smooth_sigma")
    found = gather_findings(regions, ndim=image.ndim, unit=length_unit(unit, image.ndim),
                            params=params, figures=figures, notes=notes)
    summary = findings_html(found)
    if not n:
        summary = ('<p class="empty" id="no-regions">No region was kept: no enclosed region '
                   "passed the selection. The persistence diagram below still shows every "
                   "pocket that was found.</p>") + summary
    border = _border_labels(regions)
    # Pictures of single regions and histograms show whole regions only.
    shown = regions.select(regions["kind"] == "chamber") if "kind" in regions else regions
    overview = ""
    window = intensity_window(image)  # one display range for every picture of the scan
    doubt = found.least_certain[0] if found.least_certain and image.ndim == 2 else None
    if n and labels.any():
        fig, where = plot_overview(image, labels, spacing=spacing, unit=unit, border=border,
                                   highlight=doubt, window=window)
        dashed = (f" The least certain region, number {doubt}, is outlined dashed."
                  if doubt is not None else "")
        overview = _figure(fig, f"Overview. {where} Each region is filled and carries its "
                                "number in the table; striped regions are cut by the scan "
                                f"border.{dashed}",
                           alt=f"Overview: {where} {found.whole} regions filled in "
                               "distinct colours and numbered, with a scale bar.")
    size_col = "volume" if "volume" in shown else "area"
    size_hist = _figure(plot_histograms(shown, columns=(size_col,), ndim=image.ndim),
                        f"How many regions have each {words.size}; the dashed line is the "
                        "median.") if n else ""
    centroids = region_centroids(labels, regions.select(slice(0, max_rows)))
    scan = embed_scan(image, labels if n else None, border=border, budget=scan_budget,
                      window=window)
    closer = [  # in 2D the overview shows the whole image, least certain region marked
        _figure(plot_region_slices(image, labels, shown, which="least_certain",
                                   spacing=spacing, unit=unit, window=window),
                "The least certain region (its wall stands least above the threshold), "
                "drawn dashed with a plus at its centre.") if image.ndim == 3 else "",
        _figure(plot_region_slices(image, labels, shown, which="largest", spacing=spacing,
                                   unit=unit, window=window), "The largest region.")
        if image.ndim == 3 else "",
        _figure(plot_histograms(shown, columns=("sphericity", "circularity"),
                                ndim=image.ndim),
                f"How round the regions are ({words.shape_name}: 1 for a perfect "
                f"{'circle' if image.ndim == 2 else 'sphere'})."),
    ]
    hint = " ".join(filter(None, [
        "Move a slider to go through every slice along that axis." if image.ndim == 3
        else "",
        "Point at a region to read its number; click it to pick its row in the table, or "
        "click a row to find the region here. A dark and a light line outline each region; "
        "dashed outlines mark regions cut by the scan border." if n else ""]))
    table = region_table_html(regions, centroids, ndim=image.ndim, max_rows=max_rows) if n \
        else ""
    connect = ""
    if euler is not None or wall_topology is not None:
        facts = topology_html(wall_topology, ndim=image.ndim) if wall_topology else ""
        curve = (_figure(plot_euler_curve(euler), euler_caption(euler, ndim=image.ndim))
                 if euler is not None else "")
        connect = (f'<section id="connectivity"><h2>How the walls connect</h2>{facts}'
                   f'<div class="plots">{curve}</div></section>\n')
    page = f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta http-equiv="Content-Security-Policy" content="{_CSP}">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{_esc(title)}</title><style>{_CSS}</style></head>
<body>
<header><h1>{_esc(title)}</h1><p class="meta">{meta}</p>
<div class="caution" role="note" id="caution"><strong>Caution:</strong>
{_esc(RESEARCH_ONLY)}</div></header>
<main>
<section id="summary"><h2>What was found</h2><div class="top">
<div class="answer">{summary}{size_hist}{_figures_html(figures, words)}</div>
<div class="overview">{overview}</div></div></section>
<section id="browser"><h2>Every slice</h2><p>{hint}
<label><input type="checkbox" id="outlines" checked> show region outlines</label></p>
{browser_html(scan, image_shape=image.shape, spacing=spacing, unit=unit)}</section>
<section id="table"><h2>Regions</h2>{table or "<p>No region to list.</p>"}</section>
<section id="persistence"><h2>How regions were told from noise</h2><div class="plots">
{_diagram_figures(diagram, kept, threshold, smoothing, length_unit(unit, image.ndim),
                  diagram_png)}</div></section>
{connect}<section id="parameters"><h2>Parameters</h2>
{parameters_html(params, unit, element=words.element)}</section>
<section id="plots"><h2>Closer looks</h2><div class="plots">{"".join(closer)}</div></section>
</main>
<footer><p>{_esc(RESEARCH_ONLY)}</p></footer>
<script>{BROWSER_SCRIPT}</script><script>{SORT_SCRIPT}</script>
<script>{TABLE_SCRIPT}</script>
</body></html>
"""
    with atomic_path(path, force=force) as tmp:
        tmp.write_text(page, encoding="utf-8")
    return Path(path)
