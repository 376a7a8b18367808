"""Saving, loading and summarising diagrams.

Diagrams here are hand-built from random numbers (invented data, for round trips only);
reference values come from numpy (``np.percentile``, ``np.unravel_index``).
"""

import csv
import io
import zipfile

import numpy as np
import pytest

from cavitas import RESEARCH_ONLY, InputFileError, OutputError, ParameterError
from cavitas.cubical import (
    PAIR_DTYPE,
    Diagram,
    diagram_summary,
    format_summary,
    load_diagram,
    save_diagram,
)


def _rows(rng, n, size, n_essential, sign):
    rows = np.zeros(n, dtype=PAIR_DTYPE)
    rows["birth"] = rng.normal(100.0, 30.0, n)  # full-precision floats test exactness
    rows["death"] = rows["birth"] - sign * rng.exponential(10.0, n)
    rows["birth_voxel"] = rng.integers(0, size, n)
    rows["death_voxel"] = rng.integers(0, size, n)
    rows["death"][:n_essential] = -sign * np.inf
    rows["death_voxel"][:n_essential] = -1
    return rows


def make_diagram(rng, ndim, walls="bright", masked=False):
    shape = (5, 6, 7)[-ndim:] if ndim == 3 else (6, 7)
    size = int(np.prod(shape))
    sign = 1 if walls == "bright" else -1
    pairs = {0: _rows(rng, 9, size, 1, sign), ndim - 1: _rows(rng, 4, size, 0, sign)}
    if ndim == 3:
        pairs[1] = _rows(rng, 0, size, 0, sign)  # computed but empty
    return Diagram(pairs, shape=shape, walls=walls, connectivity=ndim, masked=masked)


def assert_same(a, b):
    assert (a.shape, a.walls, a.connectivity, a.masked, a.dims) == \
        (b.shape, b.walls, b.connectivity, b.masked, b.dims)
    for dim in a.dims:
        assert a.pairs(dim).dtype == b.pairs(dim).dtype
        assert a.pairs(dim).tobytes() == b.pairs(dim).tobytes()  # bit-exact


@pytest.mark.parametrize("suffix", [".npz", ".csv"])
@pytest.mark.parametrize("ndim", [2, 3])
@pytest.mark.parametrize("walls", ["bright", "dark"])
def test_round_trip_is_exact(tmp_path, rng, suffix, ndim, walls):
    dgm = make_diagram(rng, ndim, walls, masked=(walls == "dark"))
    path = tmp_path / f"d{suffix}"
    save_diagram(dgm, path)
    assert_same(dgm, load_diagram(path))
    dgm.save(tmp_path / f"m{suffix}")  # the Diagram methods do the same
    assert_same(dgm, Diagram.load(tmp_path / f"m{suffix}"))


@pytest.mark.parametrize("suffix", [".npz", ".csv"])
def test_extra_columns_round_trip(tmp_path, rng, suffix):
    dgm = make_diagram(rng, 2)
    extra = {"kept": {1: np.array([True, False, True, False])},
             "significance": {1: rng.normal(size=4), 0: rng.normal(size=9)}}
    path = tmp_path / f"d{suffix}"
    save_diagram(dgm, path, extra=extra)
    back, got = load_diagram(path, extra=True)
    assert_same(dgm, back)
    assert sorted(got) == ["kept", "significance"]
    assert got["kept"][1].tolist() == [True, False, True, False]
    assert 0 not in got["kept"]
    for dim in (0, 1):
        np.testing.assert_array_equal(got["significance"][dim], extra["significance"][dim])


def test_csv_columns_are_readable(tmp_path, rng):
    # reference: np.unravel_index for the voxel coordinates (z, y, x order)
    dgm = make_diagram(rng, 3)
    path = tmp_path / "d.csv"
    save_diagram(dgm, path, extra={"kept": {2: np.ones(4, bool)}})
    text = path.read_text(encoding="utf-8")
    assert RESEARCH_ONLY in text
    body = list(csv.DictReader(io.StringIO(
        "\n".join(ln for ln in text.splitlines() if not ln.startswith("#")))))
    assert list(body[0]) == ["dimension", "birth", "death", "persistence", "birth_z", "birth_y",
                             "birth_x", "death_z", "death_y", "death_x", "kept"]
    first = dgm.pairs(0)[1]
    row = body[1]
    coords = np.unravel_index(first["death_voxel"], dgm.shape)
    assert [int(row[f"death_{a}"]) for a in "zyx"] == [int(c) for c in coords]
    assert float(row["persistence"]) == first["birth"] - first["death"]
    essential = body[0]
    assert essential["death"] == "-inf" and essential["death_z"] == "" and essential["kept"] == ""
    assert [r["kept"] for r in body if r["dimension"] == "2"] == ["true"] * 4


def test_existing_output_needs_force(tmp_path, rng):
    dgm = make_diagram(rng, 2)
    path = tmp_path / "d.npz"
    save_diagram(dgm, path)
    with pytest.raises(OutputError, match="already exists"):
        save_diagram(dgm, path)
    save_diagram(dgm, path, force=True)


def test_bad_arguments(tmp_path, rng):
    dgm = make_diagram(rng, 2)
    with pytest.raises(ParameterError, match=r"\.npz or \.csv"):
        save_diagram(dgm, tmp_path / "d.txt")
    with pytest.raises(ParameterError, match="kept"):
        save_diagram(dgm, tmp_path / "d.csv", extra={"kept": {1: [True]}})
    with pytest.raises(ParameterError, match="lower-case"):
        save_diagram(dgm, tmp_path / "d.csv", extra={"birth": {1: np.zeros(4)}})
    assert not (tmp_path / "d.csv").exists()


def _corrupt_files(tmp_path, rng):
    dgm = make_diagram(rng, 2)
    good_npz, good_csv = tmp_path / "good.npz", tmp_path / "good.csv"
    save_diagram(dgm, good_npz)
    save_diagram(dgm, good_csv)
    files = {}
    files["garbage.npz"] = b"this is not a zip archive"
    files["truncated.npz"] = good_npz.read_bytes()[:100]
    buf = io.BytesIO()
    np.savez(buf, a=np.arange(3))  # a foreign .npz
    files["foreign.npz"] = buf.getvalue()
    buf = io.BytesIO()
    with zipfile.ZipFile(good_npz) as src, zipfile.ZipFile(buf, "w") as dst:
        for item in src.namelist():  # replace the H0 pairs with a pickled object array
            data = src.read(item)
            if item == "h0.npy":
                inner = io.BytesIO()
                np.save(inner, np.array([{"x": 1}], dtype=object), allow_pickle=True)
                data = inner.getvalue()
            dst.writestr(item, data)
    files["pickled.npz"] = buf.getvalue()
    text = good_csv.read_text(encoding="utf-8")
    files["no_header.csv"] = b"dimension,birth\n0,1.0\n"
    files["short_row.csv"] = (text.rstrip("\n").rsplit(",", 2)[0] + "\n").encode()
    files["bad_number.csv"] = text.replace("\n0,", "\n0,x", 1).encode()
    files["voxel_outside.csv"] = text.replace("# shape: 6 x 7", "# shape: 2 x 2").encode()
    files["binary.csv"] = b"\xff\xfe\x00garbage"
    for name, data in files.items():
        (tmp_path / name).write_bytes(data)
    return list(files)


def test_corrupt_or_foreign_files_raise_input_file_error(tmp_path, rng):
    names = _corrupt_files(tmp_path, rng)
    for name in names:
        with pytest.raises(InputFileError, match=name.replace(".", r"\.")):
            load_diagram(tmp_path / name)
    with pytest.raises(InputFileError, match="missing.npz"):
        load_diagram(tmp_path / "missing.npz")


def test_summary_counts_and_quantiles(rng):
    # reference: np.percentile / np.max over the finite persistences
    dgm = make_diagram(rng, 3)
    s = diagram_summary(dgm)
    assert s["caution"] == RESEARCH_ONLY and s["cavity_dimension"] == 2
    assert s["dimensions"]["H0"]["pairs"] == 9 and s["dimensions"]["H0"]["essential"] == 1
    finite = dgm.persistence(0)[1:]
    expected = dict(zip(["p50", "p90", "p99"], np.percentile(finite, [50, 90, 99]), strict=True))
    for key, value in expected.items():
        assert s["dimensions"]["H0"]["persistence"][key] == pytest.approx(value)
    assert s["dimensions"]["H0"]["persistence"]["max"] == finite.max()
    assert s["dimensions"]["H1"] == {"pairs": 0, "essential": 0, "persistence": None}
    assert dgm.summary() == s
    text = format_summary(dgm)
    assert "H2 (cavities): 4 pairs, 0 essential" in text
    assert "H1 (tunnels): 0 pairs" in text
    two_d = Diagram({0: dgm.pairs(0)[:0]}, shape=(3, 3), walls="dark", connectivity=1)
    assert "H1 (cavities): not computed" in format_summary(two_d)
