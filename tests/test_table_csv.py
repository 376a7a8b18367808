"""CSV tables as spreadsheet programs read them: units with µ, ², ³ in the headers survive,
and numbers carry no float64 rounding noise.

Sources: Python's csv module reads the file back with ``utf-8-sig``, the encoding a
spreadsheet assumes when a UTF-8 byte-order mark is present (common practice: without the
mark, spreadsheet programs assume the system's legacy code page, e.g. cp1252);
``codecs.BOM_UTF8`` is the mark (Unicode standard, U+FEFF in UTF-8). IEEE 754 double
precision carries 15-17 significant digits (``np.finfo``), so 12 lose nothing a
measurement holds.
"""

import codecs
import csv

import numpy as np
import pytest

from cavitas._table import CSV_DIGITS, Table
from cavitas.cli import main
from cavitas.io import write


def _cells(path, encoding="utf-8-sig"):
    with open(path, newline="", encoding=encoding) as fh:
        return list(csv.reader(fh))


def test_units_survive_as_a_spreadsheet_reads_them(tmp_path):
    table = Table({"label": [1], "volume": [2.5], "area": [3.0]},
                  units={"volume": "µm³", "area": "µm²"})
    table.to_csv(tmp_path / "t.csv")
    raw = (tmp_path / "t.csv").read_bytes()
    assert raw.startswith(codecs.BOM_UTF8)
    assert _cells(tmp_path / "t.csv")[0] == ["label", "volume [µm³]", "area [µm²]"]
    # what a reader ignoring the mark would have shown: the reason the mark is there
    assert "ÂµmÂ³" in raw[len(codecs.BOM_UTF8):].decode("cp1252")


def test_floats_are_rounded_to_what_the_data_carry(tmp_path):
    values = np.array([98.76000000000002, 1 / 3, 0.1 + 0.2, 1e-12 / 3, 12345678.9])
    Table({"v": values, "f32": np.array([0.1, 2.675, 1e-7, 3.0, 7.1], np.float32)}).to_csv(
        tmp_path / "t.csv")
    rows = _cells(tmp_path / "t.csv")[1:]
    written = [row[0] for row in rows]
    assert written[:3] == ["98.76", "0.333333333333", "0.3"]
    for cell, value in zip(written, values, strict=True):
        digits = cell.split("e")[0].replace("-", "").replace(".", "").lstrip("0")
        assert len(digits) <= CSV_DIGITS
        assert float(cell) == pytest.approx(value, rel=10.0 ** (1 - CSV_DIGITS))
    assert CSV_DIGITS < np.finfo(np.float64).precision  # only noise is dropped
    # float32 columns: the shortest decimal that is the same float32 (numpy's repr)
    assert [row[1] for row in rows] == ["0.1", "2.675", "1e-07", "3.0", "7.1"]
    assert all(np.float32(row[1]) == v for row, v in
               zip(rows, np.array([0.1, 2.675, 1e-7, 3.0, 7.1], np.float32), strict=True))


def test_round_trip_keeps_columns_and_units(tmp_path):
    table = Table({"label": [1, 2], "volume": [1.5, np.nan], "flag": [True, False]},
                  units={"volume": "µm³"})
    table.to_csv(tmp_path / "t.csv")
    back = Table.from_csv(tmp_path / "t.csv")
    assert back.names == ["label", "volume", "flag"] and back.units == {"volume": "µm³"}
    assert back["label"].tolist() == [1, 2] and back["flag"].tolist() == [True, False]


def test_regions_csv_of_a_run_opens_with_its_units(tmp_path, square_ring):
    source = write(tmp_path / "ring.tif", square_ring, spacing=(0.3, 0.3))
    out = tmp_path / "out"
    assert main(["segment", str(source), "-o", str(out), "--no-report", "-q"]) == 0
    header, *rows = _cells(out / "regions.csv")
    assert any(h.endswith("[µm²]") for h in header)
    column = header.index(next(h for h in header if h.startswith("volume")))
    # 100 inside pixels of 0.3 µm: 9 µm² (0.3 * 0.3 * 100 = 9.000000000000002 in float64)
    assert rows[0][column] == "9.0"


def test_cells_taken_column_by_column_equal_cell_by_cell():
    # the fast column path against the one-cell formatter, on every column type a table holds
    from cavitas._table import _csv_cell, _csv_column

    rng = np.random.default_rng(2)
    columns = [rng.normal(size=50) * 10.0 ** rng.integers(-9, 9, 50),
               np.r_[np.nan, np.inf, -np.inf, 0.0, -0.0, 1 / 3],
               rng.random(20).astype(np.float32), rng.random(20).astype(np.float16),
               # float32 over its whole range: where NumPy's text turns to exponents sooner
               (10.0 ** rng.uniform(-45, 38, 2000) * rng.choice([-1, 1], 2000)).astype(
                   np.float32),
               np.array([np.nan, np.inf, -np.inf, 0.0, -0.0, 1e-45, 1e8, 1e16], np.float32),
               rng.integers(-10**12, 10**12, 30), rng.random(10) < 0.5,
               np.array(["a", "µm³", ""]), np.array([1, "x", None, 2.5], dtype=object)]
    for column in columns:
        assert _csv_column(column) == [_csv_cell(column[i]) for i in range(len(column))]


def test_json_values_taken_column_by_column_equal_value_by_value():
    # the same list, element types included, as converting each NumPy scalar on its own
    from cavitas._table import _json_column, _json_value, _scalar

    rng = np.random.default_rng(4)
    columns = [rng.normal(size=20), np.r_[np.nan, np.inf, 0.5], rng.random(9).astype(np.float32),
               rng.integers(-5, 5, 9), rng.random(6) < 0.5, np.array(["a", "µm³"]),
               np.array([np.int64(3), "x", None, np.float32(2.5)], dtype=object)]
    for column in columns:
        fast = _json_column(column)
        slow = [_json_value(_scalar(v)) for v in column]
        assert fast == slow and [type(v) for v in fast] == [type(v) for v in slow]
