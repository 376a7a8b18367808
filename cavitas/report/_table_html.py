"""The region table of the report: escaped cells, sortable headers, rows that jump to a slice."""

from __future__ import annotations

import html
import math
from typing import Any

import numpy as np

from .._table import Table

__all__ = ["TABLE_SCRIPT", "format_value", "region_table_html"]


def format_value(value: Any) -> tuple[str, str]:
    """Shown text and sort key of one cell (both unescaped).

    Examples
    --------
    >>> format_value(3.14159265), format_value(True), format_value(float("nan"))
    (('3.142', '3.14159265'), ('yes', '1'), ('–', ''))
    """
    if value is None:
        return "–", ""
    if isinstance(value, (bool, np.bool_)):
        return ("yes", "1") if value else ("no", "0")
    if isinstance(value, (float, np.floating)):
        value = float(value)
        if math.isnan(value):
            return "–", ""
        if math.isinf(value):  # a sort key that JavaScript's Number() reads as ±Infinity
            return ("∞" if value > 0 else "−∞"), ("Infinity" if value > 0 else "-Infinity")
        return f"{value:.4g}", repr(value)
    return str(value), str(value)


def region_table_html(regions: Table, centroids: np.ndarray, *, max_rows: int = 5000) -> str:
    """HTML of the region table: a header per column with its unit, one row per region.

    Each row carries its voxel centroid (``data-c``) so a click can move the slice browser;
    at most ``max_rows`` rows are written, with a note saying how many were left out.

    Examples
    --------
    >>> import numpy as np
    >>> t = Table({"label": [1], "volume": [2.5]}, units={"volume": "µm³"})
    >>> "volume [µm³]" in region_table_html(t, np.array([[1.0, 2.0]]))
    True
    """
    heads = "".join(
        f'<th scope="col" aria-sort="none"><button type="button">{html.escape(h)}</button></th>'
        for h in regions.header()
    )
    shown = min(len(regions), max_rows)
    columns = [np.asarray(regions[n]) for n in regions.names]
    body = []
    for i in range(shown):
        cells = []
        for col in columns:
            text, key = format_value(col[i].item() if hasattr(col[i], "item") else col[i])
            cells.append(f'<td data-v="{html.escape(key)}">{html.escape(text)}</td>')
        where = ",".join("nan" if not np.isfinite(v) else f"{v:.2f}" for v in centroids[i])
        body.append(f'<tr tabindex="0" data-c="{where}">{"".join(cells)}</tr>')
    note = ""
    if shown < len(regions):
        note = (f'<p class="note">Showing the first {shown:,} of {len(regions):,} regions; '
                "the CSV table written with this report lists them all.</p>")
    return (f'{note}<div class="table-wrap"><table id="regions"><thead><tr>{heads}</tr></thead>'
            f'<tbody>{"".join(body)}</tbody></table></div>')


#: Inline script: a click on a header sorts by that column (again: reverse); numbers sort
#: as numbers and empty cells go last. A click (or Enter) on a row asks the slice browser
#: to go to that region's centroid.
TABLE_SCRIPT = """
(function () {
  var table = document.getElementById('regions');
  if (!table) { return; }
  var body = table.tBodies[0];
  var heads = table.tHead.rows[0].cells;
  function key(row, k) { return row.cells[k].getAttribute('data-v'); }
  Array.prototype.forEach.call(heads, function (th, k) {
    th.querySelector('button').addEventListener('click', function () {
      var up = th.getAttribute('aria-sort') !== 'ascending';
      var rows = Array.prototype.slice.call(body.rows);
      var numeric = rows.every(function (r) { var v = key(r, k); return v === '' || !isNaN(+v); });
      rows.sort(function (a, b) {
        var x = key(a, k), y = key(b, k);
        if (x === '' || y === '') { return (x === '') - (y === ''); }
        var d = numeric ? (+x) - (+y) : (x < y ? -1 : x > y ? 1 : 0);
        return up ? d : -d;
      });
      rows.forEach(function (r) { body.appendChild(r); });
      Array.prototype.forEach.call(heads, function (h) { h.setAttribute('aria-sort', 'none'); });
      th.setAttribute('aria-sort', up ? 'ascending' : 'descending');
    });
  });
  function go(row) {
    var c = row.getAttribute('data-c').split(',').map(Number);
    if (c.some(isNaN)) { return; }
    Array.prototype.forEach.call(body.rows, function (r) { r.classList.remove('picked'); });
    row.classList.add('picked');
    document.dispatchEvent(new CustomEvent('cavitas:goto', { detail: c }));
    var b = document.getElementById('browser');
    if (b && b.scrollIntoView) { b.scrollIntoView({ block: 'nearest' }); }
  }
  body.addEventListener('click', function (e) {
    var row = e.target.closest('tr'); if (row) { go(row); }
  });
  body.addEventListener('keydown', function (e) {
    if (e.key === 'Enter' && e.target.tagName === 'TR') { go(e.target); }
  });
})();
"""
