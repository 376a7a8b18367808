"""A file name is a file: a path that exists is read as itself, whatever characters it
holds; only a path that does not exist may be a glob pattern. The checksum recorded is
that of what was read.

Source: hashlib's SHA-256 (Python standard library, FIPS 180-4) of the file's bytes; the
glob rules are the standard library's (``[1]`` matches the character ``1``).
"""

import glob
import hashlib
import json

import numpy as np
import pytest

from cavitas._errors import InputFileError
from cavitas.batch._inputs import expand_inputs
from cavitas.cli import main
from cavitas.io import read, write
from cavitas.io._checksum import input_checksum


@pytest.fixture
def ring(square_ring):
    """The square ring with another inside value, so that files can be told apart."""
    def make(inside):
        img = square_ring.copy()
        img[7:17, 7:17] = inside
        return img
    return make


def test_an_existing_name_with_brackets_is_that_file(tmp_path, ring):
    bracketed = write(tmp_path / "scan[1].tif", ring(10), spacing=(0.5, 0.5))
    decoy = write(tmp_path / "scan1.tif", ring(90), spacing=(0.5, 0.5))
    assert glob.glob(str(bracketed)) == [str(decoy)]  # what a glob would have read
    vol = read(bracketed)
    assert int(np.asarray(vol.data)[12, 12]) == 10
    sha = hashlib.sha256(bracketed.read_bytes()).hexdigest()
    assert input_checksum(bracketed) == sha
    assert [i.path.name for i in expand_inputs([str(bracketed)])] == ["scan[1].tif"]


def test_segment_records_the_checksum_of_the_file_it_read(tmp_path, ring):
    bracketed = write(tmp_path / "scan[1].tif", ring(10), spacing=(0.5, 0.5))
    write(tmp_path / "scan1.tif", ring(90), spacing=(0.5, 0.5))
    out = tmp_path / "out"
    assert main(["segment", str(bracketed), "-o", str(out), "--no-report",
                 "--no-thickness", "-q"]) == 0
    record = json.loads((out / "run.json").read_text(encoding="utf-8"))
    assert record["input_sha256"] == hashlib.sha256(bracketed.read_bytes()).hexdigest()


def test_a_pattern_that_names_no_file_is_still_a_pattern(tmp_path, ring):
    for z in range(3):
        write(tmp_path / f"slice{z}.tif", ring(10 + z))
    vol = read(tmp_path / "slice[0-2].tif")
    assert vol.shape == (3, 24, 24)
    assert [int(v) for v in np.asarray(vol.data)[:, 12, 12]] == [10, 11, 12]


def test_a_folder_with_brackets_is_a_folder_and_its_checksum_covers_the_slices(tmp_path, ring):
    folder = tmp_path / "stack[a]"
    folder.mkdir()
    for z in range(2):
        write(folder / f"z{z}.tif", ring(10 + z))
    assert read(folder).shape == (2, 24, 24)
    before = input_checksum(folder)
    (folder / "notes.txt").write_text("not a slice, not read")
    assert input_checksum(folder) == before
    write(folder / "z1.tif", ring(50), force=True)
    assert input_checksum(folder) != before


def test_a_missing_name_with_brackets_says_it_is_no_file(tmp_path):
    with pytest.raises(InputFileError, match=r"scan\[2\]\.tif' is no file, and as a glob "
                                             r"pattern matches no slice files"):
        read(tmp_path / "scan[2].tif")
