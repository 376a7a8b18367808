"""The region table of the report: the reader's column names and order, rounded numbers,
one sign for missing values, sortable headers, rows linked to the slice browser, and a CSV
download of the table's rows."""

from __future__ import annotations

import html
import math
from typing import Any

import numpy as np

from .._table import Table
from ._words import MISSING, Words, column_order, missing_mask, round_number

__all__ = ["SORT_SCRIPT", "TABLE_SCRIPT", "format_value", "region_table_html"]


def format_value(value: Any) -> tuple[str, str]:
    """Shown text and sort key of one cell (both unescaped); the key keeps every digit.

    Examples
    --------
    >>> format_value(3.14159265), format_value(True), format_value(float("nan"))
    (('3.14', '3.14159265'), ('yes', '1'), ('—', ''))
    """
    if value is None:
        return MISSING, ""
    if isinstance(value, (bool, np.bool_)):
        return ("yes", "1") if value else ("no", "0")
    if isinstance(value, (float, np.floating)):
        value = float(value)
        if math.isnan(value):
            return MISSING, ""
        if math.isinf(value):  # a sort key that JavaScript's Number() reads as ±Infinity
            return round_number(value), ("Infinity" if value > 0 else "-Infinity")
        return round_number(value), repr(value)
    if isinstance(value, (int, np.integer)):
        return round_number(value), str(int(value))
    return str(value), str(value)


def region_table_html(regions: Table, centroids: np.ndarray, *, ndim: int,
                      max_rows: int = 5000) -> str:
    """HTML of the region table: a header per column with its unit, one row per region.

    Each row carries its label (``data-label``) and voxel centroid (``data-c``) so the
    slice browser and the table can point at each other; at most ``max_rows`` rows are
    written, with a note saying how many were left out.

    Examples
    --------
    >>> import numpy as np
    >>> t = Table({"volume": [2.5], "label": [1]}, units={"volume": "µm²"})
    >>> page = region_table_html(t, np.array([[1.0, 2.0]]), ndim=2)
    >>> page.index(">label<") < page.index(">area [µm²]<")
    True
    """
    words = Words(ndim)
    names = column_order(regions.names)
    heads = []
    for name in names:
        unit = regions.units.get(name)
        text = words.column(name) + (f" [{unit}]" if unit else "")
        heads.append(f'<th scope="col" aria-sort="none" data-name="{html.escape(name)}">'
                     f'<button type="button">{html.escape(text)}</button></th>')
    shown = min(len(regions), max_rows)
    columns = [np.asarray(regions[n]) for n in names]
    missing = [missing_mask(n, c) for n, c in zip(names, columns, strict=True)]
    labels = np.asarray(regions["label"]) if "label" in regions else np.arange(1, shown + 1)
    body = []
    for i in range(shown):
        cells = []
        for col, gone in zip(columns, missing, strict=True):
            value = col[i].item() if hasattr(col[i], "item") else col[i]
            text, key = (MISSING, "") if gone[i] else format_value(value)
            cells.append(f'<td data-v="{html.escape(key)}">{html.escape(text)}</td>')
        where = ",".join("nan" if not np.isfinite(v) else f"{v:.2f}" for v in centroids[i])
        body.append(f'<tr tabindex="0" data-label="{int(labels[i])}" data-c="{where}">'
                    f'{"".join(cells)}</tr>')
    note = ""
    if shown < len(regions):
        note = (f'<p class="note">Showing the first {shown:,} of {len(regions):,} regions; '
                "the regions.csv file written with this report lists them all.</p>")
    return (f'{note}<p><button type="button" id="csv">Download this table as CSV</button> '
            f'<span class="note">{MISSING} marks a value that does not apply or could not '
            f'be measured.</span></p><div class="table-wrap">'
            f'<table id="regions" class="sortable"><thead><tr>'
            f'{"".join(heads)}</tr></thead><tbody>{"".join(body)}</tbody></table></div>')


#: Inline script for every ``table.sortable``: a click on a header button sorts by that
#: column (again: reverse) on the cells' ``data-v``; numbers sort as numbers, empty cells last.
SORT_SCRIPT = """
(function () {
  Array.prototype.forEach.call(document.querySelectorAll('table.sortable'), function (table) {
    var body = table.tBodies[0], heads = table.tHead.rows[0].cells;
    function key(row, k) { return row.cells[k].getAttribute('data-v'); }
    Array.prototype.forEach.call(heads, function (th, k) {
      th.querySelector('button').addEventListener('click', function () {
        var up = th.getAttribute('aria-sort') !== 'ascending';
        var rows = Array.prototype.slice.call(body.rows);
        var numeric = rows.every(function (r) {
          var v = key(r, k); return v === '' || !isNaN(+v);
        });
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
  });
})();
"""

#: Inline script of the region table: a click (or Enter) on a row picks that region in
#: the slice browser (``cavitas:goto``); a region picked in the browser (``cavitas:picked``)
#: picks its row. The CSV button downloads the rows in their current order, full precision.
TABLE_SCRIPT = """
(function () {
  var table = document.getElementById('regions');
  if (!table) { return; }
  var body = table.tBodies[0];
  var heads = table.tHead.rows[0].cells;
  function mark(row) {
    Array.prototype.forEach.call(body.rows, function (r) { r.classList.remove('picked'); });
    if (row) { row.classList.add('picked'); }
  }
  function go(row) {
    var c = row.getAttribute('data-c').split(',').map(Number);
    mark(row);
    document.dispatchEvent(new CustomEvent('cavitas:goto',
      { detail: { c: c, label: +row.getAttribute('data-label') } }));
    var b = document.getElementById('browser');
    if (b && b.scrollIntoView) { b.scrollIntoView({ block: 'nearest' }); }
  }
  body.addEventListener('click', function (e) {
    var row = e.target.closest('tr'); if (row) { go(row); }
  });
  body.addEventListener('keydown', function (e) {
    if (e.key === 'Enter' && e.target.tagName === 'TR') { go(e.target); }
  });
  document.addEventListener('cavitas:picked', function (e) {
    var row = body.querySelector('tr[data-label="' + e.detail + '"]');
    mark(row);
    if (row) {  // scroll the table box only, not the page
      var wrap = table.parentNode;
      wrap.scrollTop = row.offsetTop - wrap.clientHeight / 2;
    }
  });
  function cell(text) { return /[",\\n]/.test(text) ? '"' + text.replace(/"/g, '""') + '"' : text; }
  var csv = document.getElementById('csv');
  if (csv) {
    csv.addEventListener('click', function () {
      var lines = [Array.prototype.map.call(heads, function (h) {
        return cell(h.textContent);
      }).join(',')];
      Array.prototype.forEach.call(body.rows, function (r) {
        lines.push(Array.prototype.map.call(r.cells, function (c) {
          return cell(c.getAttribute('data-v') || c.textContent.replace('\\u2014', ''));
        }).join(','));
      });
      var a = document.createElement('a');
      a.href = 'data:text/csv;charset=utf-8,' + encodeURIComponent(lines.join('\\r\\n') + '\\r\\n');
      a.download = 'regions-table.csv';
      a.id = 'csv-link';
      document.body.appendChild(a);
      a.click();
      document.body.removeChild(a);
      csv.setAttribute('data-href', a.href);
    });
  }
})();
"""
