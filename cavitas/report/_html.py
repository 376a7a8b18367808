"""Assemble the self-contained HTML report: one file, pictures inlined, no network."""

from __future__ import annotations

import datetime
import html
import os
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from .._caution import RESEARCH_ONLY
from .._errors import ParameterError
from .._table import Table
from .._version import __version__
from ..cubical._diagram import Diagram
from ..io._atomic import atomic_path, check_writable
from ._browser import BROWSER_SCRIPT, browser_html, build_frames
from ._encode import data_uri, figure_png
from ._histograms import plot_histograms
from ._regions import region_centroids
from ._slices import plot_region_slices, plot_slices
from ._table_html import TABLE_SCRIPT, format_value, region_table_html
from .diagram_plots import plot_barcode, plot_diagram

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
#browser .view { margin: 0; }
#browser .stage { position: relative; background: #000; }
#browser .stage img { position: absolute; inset: 0; width: 100%; height: 100%;
                      image-rendering: pixelated; }
#browser.no-outlines img.overlay { visibility: hidden; }
#browser .slider { width: 100%; margin: .4rem 0 0; }
#browser .marker { position: absolute; width: 22px; height: 22px; margin: -11px 0 0 -11px;
                   border: 2px dashed #fff; border-radius: 50%; outline: 2px solid #000;
                   pointer-events: none; }
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
.note { color: var(--muted); }
footer { margin-top: 2.5rem; color: var(--muted); font-size: .9rem; }
"""

_CSP = ("default-src 'none'; img-src data:; style-src 'unsafe-inline'; "
        "script-src 'unsafe-inline'")


def _esc(value: Any) -> str:
    return html.escape(str(value), quote=True)


def _plain(value: Any) -> str:
    """A value as a reader would write it: numbers to 4 digits, "–" for unset, records
    as ``name value`` pairs, lists joined by semicolons.

    Examples
    --------
    >>> _plain([{"sigma": 1.25, "count": 53}, {"sigma": 2.5, "count": 54}])
    'sigma 1.25, count 53; sigma 2.5, count 54'
    >>> _plain(None), _plain(0.123456789), _plain(True)
    ('–', '0.1235', 'yes')
    """
    if isinstance(value, np.generic):
        value = value.item()
    if value is None or isinstance(value, (bool, float, int)):
        return format_value(value)[0]
    if isinstance(value, Mapping):
        return ", ".join(f"{key} {_plain(item)}" for key, item in value.items())
    if isinstance(value, (list, tuple)):
        return "; ".join(_plain(item) for item in value)
    return str(value)


def _kv_table(items: Mapping[str, Any]) -> str:
    """Name–value rows; a ``"units"`` mapping among the items gives units to the others."""
    units = items.get("units") if isinstance(items.get("units"), Mapping) else {}
    rows = []
    for key, value in items.items():
        if key == "units" and units:
            continue
        if key in units and not isinstance(value, tuple):
            value = (value, str(units[key]))
        if isinstance(value, tuple) and len(value) == 2 and isinstance(value[1], str):
            text = f"{format_value(value[0])[0]} {value[1]}"  # (value, unit)
        else:
            text = _plain(value)
        rows.append(f"<tr><th>{_esc(key)}</th><td>{_esc(text)}</td></tr>")
    return f'<table class="kv">{"".join(rows)}</table>' if rows else "<p>None.</p>"


def _figure(fig: Any, caption: str) -> str:
    if fig is None:
        return ""
    return (f'<figure><img src="{data_uri(figure_png(fig))}" alt="{_esc(caption)}">'
            f"<figcaption>{_esc(caption)}</figcaption></figure>")


def _diagram_figures(diagram: Diagram | None, kept: Any, threshold: float | None) -> str:
    if diagram is None:
        return "<p>No persistence diagram was given to the report.</p>"
    if kept is not None and not isinstance(kept, Mapping):
        kept = {diagram.cavity_dim: kept}
    parts = [_figure(plot_diagram(diagram, highlight=kept, threshold=threshold),
                     "Persistence diagram: kept features filled, the others hollow; the "
                     "shaded band lies below the persistence threshold. In automatic mode, "
                     "hollow points above the band failed the image's own evidence (inside "
                     "not darker than the image's wall class, wall not reaching it, or too "
                     "small for their persistence).")]
    if diagram.cavity_dim in diagram.dims:
        parts.append(_figure(
            plot_barcode(diagram, dim=diagram.cavity_dim, top=50, highlight=kept,
                         threshold=threshold),
            "Barcode of the cavities, longest bars first (at most 50)."))
    return "".join(parts)


def _count_sentence(regions: Table) -> str:
    """"13 chambers, 2 enclosures and 1 region cut by the border." (or "N regions kept.")."""
    if "kind" not in regions:
        n = len(regions)
        return f"{n:,} region{'s' if n != 1 else ''} kept."
    kinds = regions["kind"]
    words = {"chamber": ("chamber", "chambers"), "enclosure": ("enclosure", "enclosures"),
             "cut": ("region cut by the scan border (listed, not in the label map)",
                     "regions cut by the scan border (listed, not in the label map)")}
    parts = []
    for kind, (one, many) in words.items():
        count = int((kinds == kind).sum())
        if count or kind == "chamber":
            parts.append(f"{count:,} {one if count == 1 else many}")
    text = parts[0] if len(parts) == 1 else ", ".join(parts[:-1]) + " and " + parts[-1]
    return _esc(text[0].upper() + text[1:] + ".")


def write_report(path: str | os.PathLike, *, image: np.ndarray, labels: np.ndarray,
                 spacing: Sequence[float], unit: str, regions: Table,
                 diagram: Diagram | None = None, kept: Any = None,
                 threshold: float | None = None, params: Mapping[str, Any],
                 figures: Mapping[str, Any], title: str | None = None,
                 source: str | os.PathLike | None = None, force: bool = False,
                 max_rows: int = 5000, frame_budget: int = 7_000_000,
                 notes: Sequence[str] = ()) -> Path:
    """Write a single self-contained HTML page that shows a segmentation.

    The page holds the research-only caution, the parameters and global figures, the
    persistence diagram (kept features marked, threshold drawn) and the cavity barcode,
    a slice browser (a slider per axis over the image with region outlines), a sortable
    region table whose rows move the browser to the region, and static plots (orthogonal
    slices, the largest and the least certain region, histograms of volume and sphericity).
    Pictures are inlined as PNG; the page loads nothing else and works offline.

    Parameters
    ----------
    path : path
        The ``.html`` file to write (atomically; an existing file needs ``force``).
    image, labels : array
        The scan and its label image (0 = no region), same 2D or 3D shape.
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
        Most table rows written (the CSV export holds them all).
    frame_budget : int
        Most bytes of slice-browser frames (before base64); frames are thinned to fit.
    notes : sequence of str
        Sentences shown under the summary (e.g. what set the threshold).

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
    image = image if hasattr(image, "ndim") else np.asarray(image)
    labels = np.asarray(labels)
    if image.ndim not in (2, 3):
        raise ParameterError(f"image must be 2D or 3D; got {image.ndim} dimensions.")
    if labels.shape != tuple(image.shape):
        raise ParameterError(
            f"labels must have the image's shape {tuple(image.shape)}; got {labels.shape}."
        )
    spacing = tuple(float(s) for s in spacing)
    if len(spacing) != image.ndim:
        raise ParameterError(
            f"spacing must have one value per axis ({image.ndim}); got {len(spacing)}."
        )
    name = Path(source).name if source else None
    title = title or (f"cavitas report: {name}" if name else "cavitas report")
    geometry = " × ".join(map(str, image.shape))
    sizes = ", ".join(f"{s:g}" for s in spacing)
    stamp = datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    meta = (f"{f'Input {_esc(source)} · ' if source else ''}{_esc(geometry)} voxels, "
            f"spacing ({_esc(sizes)}) {_esc(unit)} · cavitas {_esc(__version__)} · {stamp}")

    n = len(regions)
    if n:
        summary = f"<p>{_count_sentence(regions)}</p>"
    else:
        summary = ('<p class="empty" id="no-regions">No region was kept: no enclosed region '
                   "passed the selection. The persistence diagram below still shows every "
                   "feature that was found.</p>")
    summary += "".join(f'<p class="note">{_esc(note)}</p>' for note in notes)
    centroids = region_centroids(labels, regions.select(slice(0, max_rows)))
    views = build_frames(image, labels if n else None, budget=frame_budget)
    # Pictures of single regions and histograms show the regions of the label map only
    # (chambers), not enclosures or border-cut regions listed in the table.
    shown = regions.select(regions["kind"] == "chamber") if "kind" in regions else regions
    plots = [
        _figure(plot_slices(image, labels, spacing=spacing, unit=unit),
                "Orthogonal slices through the centre with region outlines."),
        _figure(plot_region_slices(image, labels, shown, which="largest", spacing=spacing,
                                   unit=unit), "Slices through the largest region."),
        _figure(plot_region_slices(image, labels, shown, which="least_certain",
                                   spacing=spacing, unit=unit),
                "Slices through the least certain region (smallest margin above the "
                "threshold)."),
        _figure(plot_histograms(shown), "Histograms of region measurements."),
    ]
    hint = " ".join(filter(None, [
        "Move a slider to go through the volume along that axis." if image.ndim == 3 else "",
        "Click a row of the table below to go to that region (a dashed ring marks its "
        "centroid)." if n else ""]))
    table = region_table_html(regions, centroids, max_rows=max_rows) if n else ""
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
<section id="summary"><h2>Summary</h2>{summary}
<div class="facts"><div><h3>Parameters</h3>{_kv_table(params)}</div>
<div><h3>Global figures</h3>{_kv_table(figures)}</div></div></section>
<section id="persistence"><h2>Persistence</h2><div class="plots">
{_diagram_figures(diagram, kept, threshold)}</div></section>
<section id="browser"><h2>Slice browser</h2><p>{hint}
<label><input type="checkbox" id="outlines" checked> show region outlines</label></p>
{browser_html(views, spacing=spacing, unit=unit)}</section>
<section id="table"><h2>Regions</h2>{table or "<p>No region to list.</p>"}</section>
<section id="plots"><h2>Plots</h2><div class="plots">{"".join(plots)}</div></section>
</main>
<footer><p>{_esc(RESEARCH_ONLY)}</p></footer>
<script>{BROWSER_SCRIPT}</script><script>{TABLE_SCRIPT}</script>
</body></html>
"""
    with atomic_path(path, force=force) as tmp:
        tmp.write_text(page, encoding="utf-8")
    return Path(path)
