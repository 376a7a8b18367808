"""A small column table with units: what segmentation and measurement return.

Columns are numpy arrays of equal length. CSV headers carry the unit in brackets
(``volume [µm³]``) so that a spreadsheet shows it; JSON keeps units in a separate map.

CSV files are UTF-8 with a byte-order mark: spreadsheet programs read a CSV without one
in the system's legacy code page, which turns ``µm³`` into ``ÂµmÂ³``; with the mark they
read UTF-8 (common practice). Floating-point cells hold :data:`CSV_DIGITS` significant
digits, written as the shortest decimal that reads back as that rounded value
(``98.76``, not ``98.76000000000002``): the arithmetic noise of float64 (about 1e-16 per
operation) goes, while far more digits stay than any voxel measurement carries; float32
columns are written as the shortest decimal of the float32 value (``0.1``, not
``0.100000001490116``). JSON keeps every digit.
"""

from __future__ import annotations

import csv
import math
import os
from collections.abc import Iterator, Mapping
from typing import Any

import numpy as np

from ._errors import InputFileError, ParameterError, safe_text
from ._json import dumps
from ._shared.atomic import atomic_path

__all__ = ["CSV_DIGITS", "CSV_ENCODING", "Table"]

#: Significant digits of floating-point CSV cells.
CSV_DIGITS = 12
#: UTF-8 with a byte-order mark, so spreadsheet programs read ``µ``, ``²`` and ``³`` right.
CSV_ENCODING = "utf-8-sig"


class Table:
    """Named columns of equal length, each with an optional unit.

    Parameters
    ----------
    columns : mapping of str to array_like
        Column name to values (one value per row). Order is kept.
    units : mapping of str to str, optional
        Unit per column name (omit or ``""`` for unitless columns).
    meta : mapping, optional
        Table-wide facts written to JSON (e.g. global figures, the caution).

    Examples
    --------
    >>> t = Table({"label": [1, 2], "volume": [3.5, 4.0]}, units={"volume": "µm³"})
    >>> len(t), t["volume"].tolist(), t.header()
    (2, [3.5, 4.0], ['label', 'volume [µm³]'])
    >>> t.row(1)
    {'label': 2, 'volume': 4.0}
    """

    def __init__(self, columns: Mapping[str, Any], units: Mapping[str, str] | None = None,
                 meta: Mapping[str, Any] | None = None) -> None:
        self._columns: dict[str, np.ndarray] = {}
        length = None
        for name, values in columns.items():
            arr = np.asarray(values)
            if arr.ndim == 0:
                raise ParameterError(f"Column {name!r} must be one-dimensional; got a scalar.")
            if length is None:
                length = len(arr)
            elif len(arr) != length:
                raise ParameterError(
                    f"Column {name!r} has {len(arr)} values; the other columns have {length}."
                )
            self._columns[str(name)] = arr
        self.units = {k: v for k, v in dict(units or {}).items() if v and k in self._columns}
        self.meta = dict(meta or {})

    @property
    def names(self) -> list[str]:
        """Column names in order."""
        return list(self._columns)

    def __len__(self) -> int:
        return len(next(iter(self._columns.values()))) if self._columns else 0

    def __contains__(self, name: object) -> bool:
        return name in self._columns

    def __getitem__(self, name: str) -> np.ndarray:
        try:
            return self._columns[name]
        except KeyError:
            raise KeyError(f"No column {name!r}; columns are {self.names}.") from None

    def __iter__(self) -> Iterator[dict[str, Any]]:
        for i in range(len(self)):
            yield self.row(i)

    def row(self, i: int) -> dict[str, Any]:
        """Row ``i`` as a dict of Python scalars."""
        return {k: _scalar(v[i]) for k, v in self._columns.items()}

    def select(self, rows: Any) -> Table:
        """A new table with the rows picked by a boolean mask or index array."""
        return Table({k: v[rows] for k, v in self._columns.items()}, self.units, self.meta)

    def with_columns(self, columns: Mapping[str, Any],
                     units: Mapping[str, str] | None = None) -> Table:
        """A new table with columns added (or replaced)."""
        merged = dict(self._columns)
        merged.update(columns)
        return Table(merged, {**self.units, **dict(units or {})}, self.meta)

    def header(self) -> list[str]:
        """CSV header: column names with ``[unit]`` where a unit is known."""
        return [f"{k} [{self.units[k]}]" if k in self.units else k for k in self._columns]

    def to_csv(self, path: str | os.PathLike, *, force: bool = False) -> None:
        """Write the table as CSV (atomically), UTF-8 with a byte-order mark, floats to
        :data:`CSV_DIGITS` significant digits (see the module notes)."""
        with atomic_path(path, force=force) as tmp, open(tmp, "w", newline="",
                                                         encoding=CSV_ENCODING) as fh:
            writer = csv.writer(fh)
            writer.writerow(self.header())
            writer.writerows(zip(*(_csv_column(c) for c in self._columns.values()), strict=True))

    def to_dict(self) -> dict[str, Any]:
        """A JSON-ready dict: ``columns`` (lists), ``units`` and ``meta``."""
        return {
            "columns": {k: _json_column(v) for k, v in self._columns.items()},
            "units": self.units,
            "meta": self.meta,
        }

    def to_json(self, path: str | os.PathLike, *, force: bool = False) -> None:
        """Write :meth:`to_dict` as JSON (atomically). Non-finite numbers become null."""
        with atomic_path(path, force=force) as tmp:
            tmp.write_text(dumps(self.to_dict(), indent=1, ensure_ascii=False),
                           encoding="utf-8")

    @classmethod
    def from_csv(cls, path: str | os.PathLike) -> Table:
        """Read a CSV written by :meth:`to_csv` (numbers become int or float columns)."""
        try:
            with open(path, newline="", encoding=CSV_ENCODING) as fh:  # with or without BOM
                rows = list(csv.reader(fh))
        except (OSError, UnicodeDecodeError) as exc:
            raise InputFileError(f"Cannot read table '{path}': {exc}.") from exc
        if not rows:
            raise InputFileError(f"Table '{path}' is empty (no header line).")
        names, units = [], {}
        for head in rows[0]:
            name, _, unit = head.partition(" [")
            names.append(name)
            if unit.endswith("]"):
                units[name] = unit[:-1]
        body = rows[1:]
        columns = {n: _parse_column([r[i] for r in body]) for i, n in enumerate(names)}
        return cls(columns, units)


def _scalar(value: Any) -> Any:
    return value.item() if isinstance(value, np.generic) else value


def _csv_column(column: np.ndarray) -> list[str]:
    """``[_csv_cell(v) for v in column]``, with the values taken out of NumPy at once.

    Examples
    --------
    >>> _csv_column(np.array([1.5, np.nan])), _csv_column(np.array([0.1], np.float32))
    (['1.5', ''], ['0.1'])
    >>> _csv_column(np.array([2.5e9, np.nan, -np.inf, 1e-5], np.float32))
    ['2500000000.0', '', '-inf', '1e-05']
    """
    if column.ndim != 1:
        return [_csv_cell(v) for v in column]
    if column.dtype == np.float32:  # its own shortest decimal, written as Python writes it
        # NumPy's shortest float32 text equals Python's repr except where NumPy turns to
        # exponent notation sooner (from 1e8): those few go through Python's float
        return ["" if text == "nan" else repr(float(text)) if "e" in text else text
                for text in column.astype(str).tolist()]
    if column.dtype == np.float64:
        return ["" if math.isnan(v) else repr(float(f"{v:.{CSV_DIGITS}g}"))
                for v in column.tolist()]
    if column.dtype.kind in "iu":
        return [str(v) for v in column.tolist()]
    return [_csv_cell(v) for v in column.tolist()]


def _json_column(column: np.ndarray) -> list[Any]:
    """``[_json_value(_scalar(v)) for v in column]``, the values taken out of NumPy at once.

    Examples
    --------
    >>> _json_column(np.array([1.5, np.nan])), _json_column(np.array([2], np.int64))
    ([1.5, None], [2])
    """
    if column.dtype == object or column.ndim != 1:  # NumPy scalars inside stay as they are
        return [_json_value(_scalar(v)) for v in column]
    return [_json_value(v) for v in column.tolist()]


def _csv_cell(value: Any) -> str:
    """One CSV cell.

    Examples
    --------
    >>> _csv_cell(98.76000000000002), _csv_cell(1 / 3), _csv_cell(3.0), _csv_cell(True)
    ('98.76', '0.333333333333', '3.0', 'true')
    >>> _csv_cell(np.float32(0.1))  # float32 data: its own shortest decimal
    '0.1'
    """
    if isinstance(value, np.float32) and np.isfinite(value):
        return repr(float(str(value)))
    value = _scalar(value)
    if value is None:
        return ""
    if isinstance(value, float):
        return "" if math.isnan(value) else repr(float(f"{value:.{CSV_DIGITS}g}"))
    if isinstance(value, bool):
        return "true" if value else "false"
    return safe_text(str(value))  # a file name that is not UTF-8 (written escaped)


def _json_value(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def _parse_column(cells: list[str]) -> np.ndarray:
    if cells and all(c in ("true", "false") for c in cells):
        return np.array([c == "true" for c in cells])
    for kind in (int, float):
        try:
            return np.array([kind(c) if c != "" else np.nan for c in cells])
        except ValueError:
            continue
    return np.array(cells, dtype=object)
