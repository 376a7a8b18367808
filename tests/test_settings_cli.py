"""The parameter surface: the three groups (segmentation parameters, run options, reading
options), the strict TOML parameter file, and the reading options every command shares.

Outside references: the TOML 1.0.0 specification (toml.io/en/v1.0.0) for what a boolean,
a string, a number, an array and a table are (the standard library's ``tomllib`` parses);
``scipy.ndimage.label`` for the dark components of a hand-drawn image and their pixel
counts; NumPy's own serialisation (``ndarray.tofile`` with an explicit byte order, and
``.npy``) as the reference a raw file must read back to. Exit codes are the README's table.
"""

from __future__ import annotations

import json
import pickle
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import ndimage

import cavitas
from cavitas import ParameterError
from cavitas.batch._task import Task
from cavitas.cli import main
from cavitas.io import read, write
from cavitas.segment import SegmentParams
from cavitas.workflow import ReadOptions, RunOptions, Settings, segment_file

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

FAST = ["-q", "--no-report", "--no-thickness"]

#: Pixel size given on the command line; a pixel is then 0.25 µm².
PIXEL = 0.5


def _cells() -> np.ndarray:
    """Bright walls (200) around two large (20 x 20) and two small (6 x 6) dark cells (20).

    Hand-made geometry; the areas are the pixel counts scipy finds (checked in the tests).
    """
    image = np.full((60, 60), 20, np.uint16)
    image[4:56, 4:56] = 200
    image[8:28, 8:28] = image[8:28, 32:52] = 20
    image[36:42, 10:16] = image[36:42, 40:46] = 20
    return image


def _err_line(capsys, command: str = "segment") -> str:
    captured = capsys.readouterr()
    lines = [line for line in captured.err.splitlines() if line.strip()]
    assert len(lines) == 1, captured.err  # one sentence, no traceback
    assert lines[0].startswith(f"cavitas {command}: error: ")
    return lines[0]


# -- the parameter file: strict types, every problem one sentence (never exit 5) ---------

#: (file content, exit code, words the sentence holds). Types after TOML 1.0.0: ``true`` is
#: a boolean, ``"no"`` a string, ``5`` an integer, ``{a = 1}`` an inline table.
HOSTILE = [
    ("segment = 5\n", 2, ["segment must be a table"]),
    ("label_format = 5\n", 2, ["label_format must be a file suffix", "got 5"]),
    ("mask = 3\n", 2, ["mask must be a file name"]),
    ("top = {a = 1}\n", 2, ["top must be a whole number", "got a table"]),
    ("top = 2.0\n", 2, ["top must be a whole number"]),
    ('enclosures = "no"\n', 2, ["enclosures must be true or false", "'no'"]),
    ('auto = "yes"\n', 2, ["auto must be true or false"]),
    ("keep_border = 1\n", 2, ["keep_border must be true or false"]),
    ("min_volume = true\n", 2, ["min_volume must be a number", "got true"]),
    ('smooth = "2"\n', 2, ["smooth must be a number"]),
    ("smooth = nan\n", 2, ["smooth must be finite"]),
    ("safety = inf\n", 2, ["safety must be finite"]),
    ("walls = 1979-05-27\n", 2, ["walls must be 'bright' or 'dark'"]),
    ('[reading]\nspacing = "2,1,1"\n', 2, ["spacing must be 2 or 3 numbers"]),
    ("[reading]\nspacing = [1, 0]\n", 2, ["spacing must be 2 or 3 numbers > 0"]),
    ("[reading]\nshape = [4, 4.5]\n", 2, ["shape must be 2 or 3 whole numbers"]),
    ("[reading]\noffset = -1\n", 2, ["offset must be a whole number of bytes >= 0"]),
    ('[reading]\nbyte_order = "middle"\n', 2, ["byte_order must be one of"]),
    ('[outputs]\nwalls = "dark"\n', 2, ["[outputs] holds 'walls'"]),
    ('walls = "dark"\n[segment]\nwalls = "bright"\n', 2, ["walls is given twice"]),
    ("colour = 3\n", 2, ["Unknown parameter", "colour"]),
    ("walls = \n", 3, ["is not valid TOML"]),
    ("x = " + "[" * 5000 + "]" * 5000 + "\n", 3, ["nests brackets too deeply"]),
    ("x = " + "{a = " * 3000 + "1" + "}" * 3000 + "\n", 3, ["nests brackets too deeply"]),
]


@pytest.mark.parametrize("content, code, words", HOSTILE,
                         ids=[f"{i}" for i in range(len(HOSTILE))])
def test_parameter_file_types_are_strict(tmp_path, capsys, content, code, words):
    np.save(tmp_path / "cells.npy", _cells())
    (tmp_path / "p.toml").write_text(content, encoding="utf-8")
    out = tmp_path / "out"
    assert main(["segment", str(tmp_path / "cells.npy"), "-o", str(out), "--params",
                 str(tmp_path / "p.toml"), *FAST]) == code
    line = _err_line(capsys)
    assert "p.toml'" in line and line.endswith(".")
    for word in words:
        assert word in line, line
    assert not out.exists()  # nothing created before the options are checked


#: One value of every TOML 1.0.0 type (boolean, integer, float incl. nan/inf, string,
#: array, inline table, offset-free date and time) and edge values of each.
TOML_VALUES = ["true", "0", "-1", "3", "99999999999999999999", "1.5", "nan", "-inf",
               "1e308", '""', '"x"', '"uint16, uint8"', '"i99999999999999999999"', '"M8"',
               "[]", "[1, 2]", "[0, 0]", "[[1]]", "[true, 1]", "{a = 1}", "1979-05-27",
               "07:32:00"]


def test_every_name_with_every_type_is_a_sentence_or_a_value():
    # the fuzzing of issue 14 turned into a test: no value of any type, under any name,
    # escapes as anything but one sentence (never an internal error); parsed by the
    # standard library's TOML reader, checked as a parameter file's values are
    for name in sorted(Settings.names()):
        for value in TOML_VALUES:
            try:
                Settings().replace(**tomllib.loads(f"{name} = {value}\n"))
            except cavitas.CavitasError as exc:
                assert "\n" not in str(exc) and str(exc).endswith("."), (name, value, exc)


def test_binary_missing_and_huge_parameter_files_are_input_errors(tmp_path, capsys):
    np.save(tmp_path / "cells.npy", _cells())
    (tmp_path / "binary.toml").write_bytes(bytes(range(256)))
    (tmp_path / "huge.toml").write_text("# padding\n" * 200_000)  # 2 MB of comments
    for name, words in (("binary.toml", "is not a text file"),
                        ("missing.toml", "Cannot read parameter file"),
                        ("huge.toml", "a parameter file is a few lines")):
        assert main(["segment", str(tmp_path / "cells.npy"), "-o", str(tmp_path / "o"),
                     "--params", str(tmp_path / name), *FAST]) == 3  # README: 3 = input file
        line = _err_line(capsys)
        assert words in line and name in line


def test_python_values_are_strict_too_but_numpy_scalars_count():
    with pytest.raises(ParameterError, match="min_volume must be a number"):
        SegmentParams(min_volume="5")
    with pytest.raises(ParameterError, match="connectivity must be a whole number"):
        SegmentParams(connectivity=1.0)
    with pytest.raises(ParameterError, match="shells must be a thickness"):
        RunOptions(shells=True)
    # NumPy registers its scalars with the standard library's numbers ABCs (numbers.Real,
    # numbers.Integral): values computed with NumPy are numbers like Python's
    p = SegmentParams(top=np.int64(3), smooth=np.float32(1.5))
    assert (p.top, p.smooth) == (3, 1.5) and type(p.top) is int


def test_groups_route_each_name_and_the_file_takes_every_layout(tmp_path):
    flat = tmp_path / "flat.toml"
    flat.write_text('walls = "dark"\nshells = 0.5\nspacing = [2, 0.5, 0.5]\n'
                    'mask = "roi.tif"\n')
    tables = tmp_path / "tables.toml"
    tables.write_text('[segment]\nwalls = "dark"\n[outputs]\nshells = 0.5\n'
                      '[reading]\nspacing = [2, 0.5, 0.5]\nmask = "roi.tif"\n')
    legacy = tmp_path / "legacy.toml"  # everything in [segment], as earlier files had it
    legacy.write_text('[segment]\nwalls = "dark"\nshells = 0.5\nspacing = [2, 0.5, 0.5]\n'
                      'mask = "roi.tif"\n')
    read_back = [Settings.from_toml(f) for f in (flat, tables, legacy)]
    assert read_back[0] == read_back[1] == read_back[2]
    s = read_back[0]
    assert s.params == SegmentParams(walls="dark")
    assert s.options == RunOptions(shells=0.5, mask=str(tmp_path / "roi.tif"))  # its folder
    assert s.reading == ReadOptions(spacing=(2.0, 0.5, 0.5))
    with pytest.raises(ParameterError, match="Unknown segmentation parameter.*shells"):
        cavitas.segment(_cells(), shells=0.5)  # an output: the workflow's, not segment()'s


def test_batch_ships_its_groups_to_spawned_workers():
    # a spawned worker process receives the task pickled (the standard library's pickle)
    task = Task(path="/d/a.npy", name="a", root="/d/out", params=SegmentParams(top=2),
                options=RunOptions(partition=True), read_options={"spacing": (1.0, 1.0)})
    assert pickle.loads(pickle.dumps(task)) == task


# -- image-dependent bounds: checked where the image is known, before any work -----------

@pytest.mark.parametrize("option", ["--smooth", "--shells"])
def test_smoothing_and_shells_larger_than_the_image_are_refused(tmp_path, capsys, option):
    np.save(tmp_path / "cells.npy", _cells())
    assert main(["segment", str(tmp_path / "cells.npy"), "-o", str(tmp_path / "o"),
                 option, "1e9", *FAST]) == 2
    line = _err_line(capsys)
    assert f"{option} (1e+09 voxel) exceeds the image's longest side (60 voxel)" in line


# -- geometry and raw layout on the command line ------------------------------------------

def test_spacing_gives_an_uncalibrated_file_physical_sizes(tmp_path, capsys):
    image = _cells()
    np.save(tmp_path / "cells.npy", image)
    labels, _ = ndimage.label(image < 100)  # scipy: the outside and the four cells
    outside = labels[0, 0]  # the component touching the faces
    areas = np.bincount(labels.ravel())[1:] * PIXEL**2
    inside = np.delete(areas, outside - 1)
    assert sorted(inside) == [9.0, 9.0, 100.0, 100.0]  # 6x6 and 20x20 pixels of 0.25 µm²
    out = tmp_path / "out"
    assert main(["segment", str(tmp_path / "cells.npy"), "-o", str(out), "--spacing",
                 f"{PIXEL},{PIXEL}", "--min-volume", "50", *FAST]) == 0
    run = json.loads((out / "run.json").read_text(encoding="utf-8"))
    assert run["spacing"] == [PIXEL, PIXEL] and run["unit"] == "µm"
    assert run["read_options"] == {"spacing": [PIXEL, PIXEL]}
    assert run["summary"]["regions"] == int(np.count_nonzero(inside >= 50))
    assert run["options"] == RunOptions().to_dict()
    assert "shells" not in run["parameters"]  # outputs are not the algorithm's parameters
    kept = np.load(out / "labels.npy")
    assert len(np.unique(kept[kept > 0])) == 2
    # the unit given is kept, in the table's header too
    assert main(["segment", str(tmp_path / "cells.npy"), "-o", str(tmp_path / "nm"),
                 "--spacing", "500,500", "--unit", "nm", "--min-volume", "50000",
                 *FAST]) == 0
    header = (tmp_path / "nm" / "regions.csv").read_text(encoding="utf-8-sig").splitlines()[0]
    assert "nm²" in header


def _raw_copy(tmp_path: Path, image: np.ndarray) -> Path:
    """The image as a big-endian raw file behind a 16-byte header (NumPy's tofile)."""
    path = tmp_path / "cells.raw"
    with open(path, "wb") as fh:
        fh.write(b"H" * 16)
        image.astype(">u2").tofile(fh)
    return path


def test_raw_files_are_segmented_as_numpy_reads_them(tmp_path, capsys):
    image = _cells()
    np.save(tmp_path / "cells.npy", image)
    raw = _raw_copy(tmp_path, image)
    layout = ["--shape", "60,60", "--dtype", "uint16", "--byte-order", "big", "--offset",
              "16", "--spacing", "0.5,0.5"]
    assert main(["segment", str(tmp_path / "cells.npy"), "-o", str(tmp_path / "npy"),
                 "--spacing", "0.5,0.5", *FAST]) == 0
    assert main(["segment", str(raw), "-o", str(tmp_path / "raw"), *layout, *FAST]) == 0
    expected = np.load(tmp_path / "npy" / "labels.npy")
    assert expected.max() == 4  # the four cells drawn
    np.testing.assert_array_equal(np.asarray(read(tmp_path / "raw" / "labels.tif").data),
                                  expected)
    # the same layout from a parameter file, with a mask named relative to that file
    (tmp_path / "settings").mkdir()
    write(tmp_path / "settings" / "roi.tif", np.ones((60, 60), np.uint8))
    (tmp_path / "settings" / "p.toml").write_text(
        '[reading]\nshape = [60, 60]\ndtype = "uint16"\nbyte_order = "big"\noffset = 16\n'
        'spacing = [0.5, 0.5]\nmask = "roi.tif"\n[outputs]\nlabel_format = ".npy"\n')
    assert main(["segment", str(raw), "-o", str(tmp_path / "toml"), "--params",
                 str(tmp_path / "settings" / "p.toml"), *FAST]) == 0
    np.testing.assert_array_equal(np.load(tmp_path / "toml" / "labels.npy"), expected)
    run = json.loads((tmp_path / "toml" / "run.json").read_text(encoding="utf-8"))
    assert run["options"]["mask"] == str(tmp_path / "settings" / "roi.tif")
    # and the diagram of the raw file is the .npy file's, line for line
    assert main(["diagram", str(raw), "-o", str(tmp_path / "dr"), *layout, "-q"]) == 0
    assert main(["diagram", str(tmp_path / "cells.npy"), "-o", str(tmp_path / "dn"),
                 "-q"]) == 0
    assert ((tmp_path / "dr" / "diagram.csv").read_text()
            == (tmp_path / "dn" / "diagram.csv").read_text())


def test_batch_takes_the_reading_options(tmp_path, capsys):
    np.save(tmp_path / "a.npy", _cells())
    assert main(["batch", str(tmp_path / "a.npy"), "-o", str(tmp_path / "out"), "--spacing",
                 "0.5,0.5", "--min-volume", "50", "--jobs", "1", "-q"]) == 0
    batch = json.loads((tmp_path / "out" / "batch.json").read_text(encoding="utf-8"))
    assert batch["params"]["read_options"] == {"spacing": [0.5, 0.5]}
    assert batch["params"]["min_volume"] == 50 and batch["params"]["shells"] is None
    for item in batch["inputs"]:
        run = json.loads((tmp_path / "out" / item["name"] / "run.json").read_text("utf-8"))
        assert run["summary"]["regions"] == 2  # the two 100 µm² cells (scipy, above)


def test_segment_file_takes_typed_groups(tmp_path):
    np.save(tmp_path / "cells.npy", _cells())
    summary = segment_file(tmp_path / "cells.npy", tmp_path / "o", SegmentParams(min_volume=50),
                           options=RunOptions(enclosures=True),
                           read_options=ReadOptions(spacing=(0.5, 0.5)), progress=False,
                           report=False, thickness=False)
    assert summary["regions"] == 2 and "enclosures" in summary["outputs"]
    with pytest.raises(ParameterError, match="mask must be an array"):
        cavitas.segment(_cells(), mask=str(tmp_path / "roi.tif"))
