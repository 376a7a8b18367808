"""The batch index: one self-contained HTML page listing every input and linking its report."""

from __future__ import annotations

import html
import json
import math
from collections.abc import Mapping
from datetime import datetime, timezone
from pathlib import Path
from typing import Any
from urllib.parse import quote

from .._caution import RESEARCH_ONLY
from .._table import Table
from ..io._atomic import atomic_path

__all__ = ["index_html", "write_index"]

_STYLE = """
body{font:14px/1.45 system-ui,sans-serif;margin:2em auto;max-width:75em;padding:0 1em;color:#1d2329}
.caution{border-left:4px solid #b35c00;background:#fff4e5;padding:.6em 1em;margin:1em 0}
table{border-collapse:collapse;width:100%}th,td{padding:.3em .6em;border-bottom:1px solid #d5dbe1;
text-align:left;vertical-align:top}td.n{text-align:right;font-variant-numeric:tabular-nums}
tr.failed td{background:#fdeeee}.status{font-weight:600}pre{background:#f3f5f7;padding:.8em;
overflow:auto}
"""


def _esc(value: Any) -> str:
    return html.escape(str(value), quote=True)


def _number(value: Any, digits: int = 4) -> str:
    if isinstance(value, float):
        return "" if math.isnan(value) else f"{value:.{digits}g}"
    return _esc(value)


def index_html(summary: Table, *, root: Path, params: Mapping[str, Any], version: str,
               tables: Mapping[str, str]) -> str:
    """HTML text of the batch index for the rows of ``summary`` (see ``summary_table``).

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
    rows = []
    for row in summary:
        name = row["output"]
        report = root / name / "report.html" if name else None
        links = []
        if name:
            links.append(f'<a href="{quote(name)}/">folder</a>')
        if report is not None and report.is_file():
            links.append(f'<a href="{quote(name)}/report.html">report</a>')
        rows.append(
            f'<tr class="{_esc(row["status"])}"><td>{_esc(row["input"])}</td>'
            f'<td class="status">{_esc(row["status"])}</td>'
            f'<td class="n">{_number(row["regions"])}</td>'
            f'<td class="n">{_number(row["porosity"])}</td>'
            f'<td class="n">{_number(row["noise"])}</td>'
            f'<td class="n">{_number(row["threshold"])}</td>'
            f'<td class="n">{_number(row["seconds"], 3)}</td>'
            f'<td>{" · ".join(links)}</td><td>{_esc(row["error"])}</td></tr>'
        )
    table_links = " · ".join(f'<a href="{quote(f)}">{_esc(label)}</a>'
                             for label, f in tables.items())
    when = datetime.now(timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>cavitas batch: {len(summary)} inputs</title><style>{_STYLE}</style></head>
<body>
<h1>Batch of {len(summary)} inputs</h1>
<p class="caution" role="note"><strong>Caution.</strong> {_esc(RESEARCH_ONLY)}</p>
<p>{counts["done"]} processed, {counts["reused"]} unchanged since an earlier run,
{counts["failed"]} failed. cavitas {_esc(version)}, {when}.</p>
<p>Tables: {table_links}</p>
<table><thead><tr><th>input</th><th>status</th><th>regions</th><th>porosity</th>
<th>noise</th><th>threshold</th><th>time [s]</th><th>outputs</th><th>problem</th></tr></thead>
<tbody>
{chr(10).join(rows)}
</tbody></table>
<h2>Parameters</h2>
<pre>{_esc(json.dumps(dict(params), indent=1, sort_keys=True, default=str))}</pre>
</body></html>
"""


def write_index(path: Path, summary: Table, **kwargs: Any) -> None:
    """Write :func:`index_html` to ``path`` atomically (the batch owns this file)."""
    with atomic_path(path, force=True) as tmp:
        tmp.write_text(index_html(summary, **kwargs), encoding="utf-8",
                       errors="backslashreplace")  # names that are not UTF-8
