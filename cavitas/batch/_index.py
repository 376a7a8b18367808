"""The batch index: one self-contained HTML page listing every input and linking its report."""

from __future__ import annotations

import html
from collections.abc import Mapping
from datetime import datetime, timezone
from pathlib import Path
from typing import Any
from urllib.parse import quote

from .._caution import RESEARCH_ONLY
from .._shared.atomic import atomic_path
from .._table import Table
from ..report._params_html import parameters_html
from ..report._table_html import SORT_SCRIPT, format_value
from ._summary import REFERENCE_PREFIX

__all__ = ["index_html", "write_index"]

_STYLE = """
body{font:14px/1.45 system-ui,sans-serif;margin:2em auto;max-width:75em;padding:0 1em;color:#1d2329}
.caution{border:3px solid #8a3b12;background:#fff4e8;padding:.6em 1em;margin:1em 0}
.caution strong{color:#8a3b12;text-transform:uppercase;letter-spacing:.04em}
.wrap{overflow:auto}table{border-collapse:collapse;width:100%}
th,td{padding:.3em .6em;border-bottom:1px solid #d5dbe1;text-align:left;vertical-align:top}
td.n{text-align:right;font-variant-numeric:tabular-nums}
th button{font:inherit;font-weight:600;border:0;background:none;padding:0;cursor:pointer}
th[aria-sort=ascending] button::after{content:" \\25B2"}
th[aria-sort=descending] button::after{content:" \\25BC"}
tr.failed td{background:#fdeeee}.status{font-weight:600}
.facts{display:flex;flex-wrap:wrap;gap:1rem 2.5rem}table.kv{width:auto}
table.kv th{white-space:nowrap}summary{cursor:pointer;color:#5b6570}
"""

#: Figures of the index: (summary column, header with its unit, factor to that unit).
_COLUMNS = (
    ("regions", "regions wholly inside", 1.0),
    ("border_cut", "cut by the border", 1.0),
    ("enclosures", "enclosures", 1.0),
    ("porosity", "filled fraction [%]", 100.0),
    ("noise", "noise σ [intensity]", 1.0),
    ("threshold", "threshold [intensity]", 1.0),
    ("walls_euler", "walls χ", 1.0),
    ("connectivity_density", "loops per unit³ (²)", 1.0),
    ("unit", "unit", 1.0),
)


def _esc(value: Any) -> str:
    return html.escape(str(value), quote=True)


def _cell(value: Any, scale: float) -> str:
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        value = value * scale if scale != 1.0 else value
    text, key = format_value(value)
    return f'<td class="n" data-v="{_esc(key)}">{_esc(text)}</td>'


def index_html(summary: Table, *, root: Path, params: Mapping[str, Any], version: str,
               tables: Mapping[str, str], reference_name: str | None = None) -> str:
    """HTML text of the batch index for the rows of ``summary`` (see ``summary_table``).

    One sortable row per input with its key figures (units once, in the headers; the
    distances to ``reference_name`` when the summary has them) and a link to its report;
    the parameters as a short list, the full record behind a fold.
    Every value from a file name or an error is escaped; links are relative, so the
    folder can be moved or shared as a whole.

    Examples
    --------
    >>> from cavitas.batch._summary import summary_table
    >>> rows = [{"input": "/d/<a>.tif", "name": "a-1", "status": "failed", "seconds": 0.1,
    ...          "error": "File '/d/<a>.tif' is empty.", "summary": {}}]
    >>> page = index_html(summary_table(rows), root=Path("."), params={}, version="0.1",
    ...                   tables={})
    >>> "&lt;a&gt;.tif" in page and "<a>.tif" not in page and "research use only" in page
    True
    """
    counts = {s: int((summary["status"] == s).sum()) for s in ("done", "reused", "failed")}
    columns = [c for c in _COLUMNS if c[0] in summary] + [
        (name, f"to reference H{name[len(REFERENCE_PREFIX):]} [intensity]", 1.0)
        for name in summary.names if name.startswith(REFERENCE_PREFIX)] + [
        ("seconds", "time [s]", 1.0)]
    rows = []
    for row in summary:
        name = row["output"]
        report = root / name / "report.html" if name else None
        links = []
        if report is not None and report.is_file():
            links.append(f'<a href="{quote(name)}/report.html">report</a>')
        if name:
            links.append(f'<a href="{quote(name)}/">folder</a>')
        figures = "".join(_cell(row[key], scale) for key, _, scale in columns)
        rows.append(
            f'<tr class="{_esc(row["status"])}"><td data-v="{_esc(row["input"])}">'
            f'{_esc(row["input"])}</td><td class="status" data-v="{_esc(row["status"])}">'
            f'{_esc(row["status"])}</td>{figures}<td data-v="">{" · ".join(links)}</td>'
            f'<td data-v="{_esc(row["error"])}">{_esc(row["error"])}</td></tr>'
        )
    heads = ["input", "status", *(head for _, head, _ in columns), "outputs", "problem"]
    head_html = "".join(f'<th scope="col" aria-sort="none"><button type="button">'
                        f"{_esc(h)}</button></th>" for h in heads)
    table_links = " · ".join(f'<a href="{quote(f)}">{_esc(label)}</a>'
                             for label, f in tables.items())
    when = datetime.now(timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    reference = (f" The distance to the reference scan {_esc(reference_name)} is the "
                 "bottleneck distance between the persistence diagrams of the unsmoothed "
                 "scans (intensity units): the largest shift that matching one diagram's "
                 "features onto the other's needs." if reference_name else "")
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>cavitas batch: {len(summary)} inputs</title><style>{_STYLE}</style></head>
<body>
<h1>Batch of {len(summary)} inputs</h1>
<p class="caution" role="note"><strong>Caution:</strong> {_esc(RESEARCH_ONLY)}</p>
<p>{counts["done"]} processed, {counts["reused"]} unchanged since an earlier run,
{counts["failed"]} failed. cavitas {_esc(version)}, {when}.</p>
<p>Tables: {table_links}</p>
<p>Click a column name to sort. Regions cut by the scan border are listed in each report
but left out of the count and of the filled fraction (the share of the image inside whole
regions: area fraction in 2D, closed porosity in 3D). Noise and threshold are in the
input's intensity units. The walls are every voxel in no region (regions cut by the
border count as regions); χ is their Euler characteristic and their loops per unit volume
(area in 2D) the connectivity density, per cubed (squared) unit of the unit
column.{reference}</p>
<div class="wrap"><table class="sortable" id="inputs"><thead><tr>{head_html}</tr></thead>
<tbody>
{chr(10).join(rows)}
</tbody></table></div>
<h2>Parameters</h2>
{parameters_html(params, "", batch=True)}
<script>{SORT_SCRIPT}</script>
</body></html>
"""


def write_index(path: Path, summary: Table, **kwargs: Any) -> None:
    """Write :func:`index_html` to ``path`` atomically (the batch owns this file)."""
    with atomic_path(path, force=True) as tmp:
        tmp.write_text(index_html(summary, **kwargs), encoding="utf-8",
                       errors="backslashreplace")  # names that are not UTF-8
