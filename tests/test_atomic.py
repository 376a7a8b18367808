"""Atomic output: a failed write leaves the old file intact and no temporary files.

Common practice (write to a temporary file in the same folder, then rename, which POSIX
``rename`` makes atomic)."""

import numpy as np
import pytest

from cavitas._errors import OutputError
from cavitas._shared.atomic import atomic_path
from cavitas.io import _dispatch, read, write


def _failing_writer(target, data, **options):
    target.write_bytes(b"half a file")  # something is written, then the writer fails
    raise RuntimeError("disk on fire")


@pytest.mark.parametrize("error", [RuntimeError, KeyboardInterrupt])
def test_failed_write_keeps_old_file_and_leaves_no_temp(tmp_path, monkeypatch, error):
    old = np.arange(24, dtype=np.uint16).reshape(2, 3, 4)
    path = write(tmp_path / "labels.tif", old)
    before = path.read_bytes()

    def failing(target, data, **options):
        target.write_bytes(b"half a file")
        raise error("simulated failure")

    monkeypatch.setattr(_dispatch, "write_tiff", failing)
    with pytest.raises(error):
        write(path, old + 1, force=True)
    assert path.read_bytes() == before
    np.testing.assert_array_equal(np.asarray(read(path).data), old)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["labels.tif"]


def test_failed_first_write_leaves_nothing(tmp_path, monkeypatch):
    monkeypatch.setattr(_dispatch, "write_nifti", _failing_writer)
    with pytest.raises(RuntimeError):
        write(tmp_path / "new.nii.gz", np.zeros((2, 3), np.uint8))
    assert list(tmp_path.iterdir()) == []


def test_temporary_name_keeps_the_suffixes(tmp_path):
    # libraries choose the format from the name: '.nii.gz' must survive
    with atomic_path(tmp_path / "a.nii.gz") as tmp:
        assert tmp.name.endswith(".nii.gz") and tmp.parent == tmp_path
        tmp.write_bytes(b"x")
    assert (tmp_path / "a.nii.gz").read_bytes() == b"x"


def test_output_appearing_during_the_write_is_not_replaced(tmp_path):
    target = tmp_path / "late.csv"
    with pytest.raises(OutputError, match="appeared"):
        with atomic_path(target) as tmp:
            tmp.write_text("ours")
            target.write_text("theirs")
    assert target.read_text() == "theirs"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["late.csv"]
