"""Batch tables: one summary row per input, and all regions of all inputs in one table."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from .._caution import RESEARCH_ONLY
from .._table import Table
from ._task import FAILED

__all__ = ["REFERENCE_PREFIX", "SUMMARY_COLUMNS", "combined_regions", "summary_table"]

#: Summary keys of the distances to a reference scan: ``to_reference_H0`` ...
REFERENCE_PREFIX = "to_reference_H"

#: Summary columns taken from each worker's figures: column name -> keys tried in order.
SUMMARY_COLUMNS: dict[str, tuple[str, ...]] = {
    "regions": ("regions",),
    "border_cut": ("border_cut",),
    "enclosures": ("enclosures",),
    "porosity": ("porosity", "volume_fraction"),
    "noise": ("noise",),
    "threshold": ("threshold",),
    "walls_euler": ("walls_euler",),
    "connectivity_density": ("connectivity_density",),
    "unit": ("unit",),
}


def _figure(summary: Mapping[str, Any], keys: tuple[str, ...]) -> Any:
    value = next((summary[k] for k in keys if summary.get(k) is not None), None)
    return np.nan if value is None else value


def summary_table(results: Sequence[Mapping[str, Any]]) -> Table:
    """One row per input: where it went, its status, main figures, time and error sentence.

    The figures are :data:`SUMMARY_COLUMNS`, then the distances to a reference scan
    (``to_reference_H0`` ...) when the inputs' summaries have them.

    Examples
    --------
    >>> rows = [{"input": "/d/a.tif", "name": "a-1", "status": "done", "seconds": 1.5,
    ...          "error": "", "summary": {"regions": 3, "porosity": 0.2}},
    ...         {"input": "/d/b.tif", "name": "b-2", "status": "failed", "seconds": 0.1,
    ...          "error": "File '/d/b.tif' is empty.", "summary": {}}]
    >>> t = summary_table(rows)
    >>> t["status"].tolist(), t["regions"].tolist(), t.header()[-2]
    (['done', 'failed'], [3, nan], 'seconds [s]')
    """
    figures = dict(SUMMARY_COLUMNS)
    figures.update({key: (key,) for key in sorted(
        {k for r in results for k in (r.get("summary") or {}) if k.startswith(REFERENCE_PREFIX)})})
    columns: dict[str, list[Any]] = {"input": [], "output": [], "status": []}
    columns.update({name: [] for name in figures})
    columns.update(seconds=[], error=[])
    for result in results:
        summary = result.get("summary") or {}
        columns["input"].append(str(result["input"]))
        columns["output"].append("" if result["status"] == FAILED else result["name"])
        columns["status"].append(result["status"])
        for name, keys in figures.items():
            columns[name].append(_figure(summary, keys))
        columns["seconds"].append(float(result.get("seconds") or 0.0))
        columns["error"].append(result.get("error", ""))
    arrays = {k: np.array(v, dtype=float if k == "seconds" else object)
              for k, v in columns.items()}
    return Table(arrays, units={"seconds": "s"}, meta={"caution": RESEARCH_ONLY})


def combined_regions(results: Sequence[Mapping[str, Any]], root: Path, *,
                     table_name: str = "regions.csv") -> Table:
    """All regions of the completed inputs in one table, with the source file in each row.

    Columns are the union over inputs, in order of first appearance; a column an input
    lacks is empty there. A column whose unit differs between inputs keeps its values, and
    its unit moves to a ``<column> unit`` column beside it.
    """
    parts: list[tuple[str, str, Table]] = []
    for result in results:
        path = root / result["name"] / table_name
        if result["status"] != FAILED and path.is_file():
            parts.append((str(result["input"]), result["name"], Table.from_csv(path)))
    names: dict[str, None] = {}
    units: dict[str, set[str]] = {}
    for _, _, table in parts:
        for name in table.names:
            names.setdefault(name, None)
            units.setdefault(name, set()).add(table.units.get(name, ""))
    mixed = {n for n, u in units.items() if len(u) > 1}
    columns: dict[str, list[np.ndarray]] = {"source": [], "output": []}
    for name in names:
        columns[name] = []
        if name in mixed:
            columns[f"{name} unit"] = []
    for source, output, table in parts:
        n = len(table)
        columns["source"].append(np.full(n, source, dtype=object))
        columns["output"].append(np.full(n, output, dtype=object))
        for name in names:
            columns[name].append(table[name] if name in table else np.full(n, np.nan))
            if name in mixed:
                columns[f"{name} unit"].append(np.full(n, table.units.get(name, ""),
                                                       dtype=object))
    merged = {k: (_concat(v) if v else np.array([], dtype=object)) for k, v in columns.items()}
    merged_units = {n: next(iter(u)) for n, u in units.items() if n not in mixed}
    return Table(merged, units=merged_units, meta={"caution": RESEARCH_ONLY})


def _concat(arrays: list[np.ndarray]) -> np.ndarray:
    kinds = {a.dtype.kind for a in arrays if len(a)}
    if kinds <= {"i", "u", "b"} and len(kinds) == 1:
        return np.concatenate(arrays)
    if kinds <= {"i", "u", "f", "b"}:
        return np.concatenate([a.astype(float) for a in arrays])
    return np.concatenate([a.astype(object) for a in arrays])
