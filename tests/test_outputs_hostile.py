"""Outputs under faults: unwritable folders, odd names, links, corrupted earlier outputs.

The contract is the project's own (design notes: "nothing already written is lost or left
half-written"; errors are one sentence with the documented exit code); the names used are
those the fuzzing of issue 14 found failing. File-system limits: names of at most 255
bytes (POSIX NAME_MAX on Linux file systems, handbook value)."""

import errno
import json
import sys
import tempfile
from pathlib import Path

import numpy as np
import pytest

from cavitas._errors import InputFileError, OutputError
from cavitas.batch import run_batch
from cavitas.batch._lock import LOCK_NAME, folder_lock
from cavitas.batch._resume import DONE_NAME
from cavitas.cli import main
from cavitas.io import read, write
from cavitas.segment import SegmentParams
from cavitas.workflow import RunOptions, segment_file

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))  # spawned workers import the stand-in by module name
STANDIN = "batch_standin:segment"


def test_unwritable_folder_is_an_output_error(tmp_path, monkeypatch, capsys):
    """A folder the system refuses to write in (read-only mount, permissions): exit 4."""
    def refused(*args, **kwargs):
        raise PermissionError(errno.EACCES, "Permission denied")

    monkeypatch.setattr(tempfile, "mkstemp", refused)
    with pytest.raises(OutputError, match=r"^Cannot write '.*a\.tif': Permission denied\.$"):
        write(tmp_path / "a.tif", np.zeros((4, 4), np.uint8))
    np.save(tmp_path / "in.npy", np.zeros((4, 4), np.uint8))
    assert main(["segment", str(tmp_path / "in.npy"), "-o", str(tmp_path / "out")]) == 4
    assert "Permission denied" in capsys.readouterr().err


def test_name_of_255_bytes_is_written(tmp_path):
    target = tmp_path / ("x" * 251 + ".tif")
    write(target, np.ones((4, 4), np.uint8))
    assert read(target).shape == (4, 4)


def test_link_at_the_target_is_replaced_not_followed(tmp_path):
    elsewhere = tmp_path / "elsewhere.tif"
    write(elsewhere, np.zeros((4, 4), np.uint8))
    before = elsewhere.read_bytes()
    link = tmp_path / "out.tif"
    link.symlink_to(elsewhere)
    with pytest.raises(OutputError, match="already exists"):
        write(link, np.ones((4, 4), np.uint8))
    write(link, np.ones((4, 4), np.uint8), force=True)
    assert not link.is_symlink() and elsewhere.read_bytes() == before
    dangling = tmp_path / "dangling.tif"
    dangling.symlink_to(tmp_path / "nowhere" / "x.tif")
    with pytest.raises(OutputError, match="already exists"):  # not written through the link
        write(dangling, np.ones((4, 4), np.uint8))


def test_linked_lock_file_and_meshes_folder_are_refused(tmp_path, square_ring):
    root = tmp_path / "out"
    root.mkdir()
    (root / LOCK_NAME).symlink_to(tmp_path / "victim")
    with pytest.raises(OutputError, match="is a symbolic link"), folder_lock(root):
        pass
    assert not (tmp_path / "victim").exists()
    volume = np.zeros((8, 24, 24), np.uint8)
    volume[2:6] = square_ring
    write(tmp_path / "v.tif", volume)
    (tmp_path / "seg").mkdir()
    (tmp_path / "seg" / "meshes").symlink_to(tmp_path)
    with pytest.raises(OutputError, match=r"meshes' is a symbolic link"):
        segment_file(tmp_path / "v.tif", tmp_path / "seg", SegmentParams(),
                     options=RunOptions(mesh="ply"), progress=False, report=False)


def test_name_that_is_not_utf8_is_read_segmented_and_reported(tmp_path, square_ring):
    """A file name with a Latin-1 byte (0xE9) on a UTF-8 system: every output is written and
    names it with an escape."""
    np.save(tmp_path / "plain.npy", square_ring)
    odd = Path(b"caf\xe9.npy".decode("utf-8", "surrogateescape"))
    (tmp_path / "plain.npy").rename(tmp_path / odd)
    summary = segment_file(tmp_path / odd, tmp_path / "out", progress=False)
    assert summary["regions"] == 1
    run = json.loads((tmp_path / "out" / "run.json").read_text(encoding="utf-8"))
    assert run["input"].endswith("caf\\xe9.npy")
    assert "caf\\xe9.npy" in (tmp_path / "out" / "report.html").read_text(encoding="utf-8")
    with pytest.raises(InputFileError) as caught:
        read(tmp_path / Path(b"gon\xe9.npy".decode("utf-8", "surrogateescape")))
    assert str(caught.value).encode("utf-8")  # printable as UTF-8


def test_run_json_lists_outputs_relative_to_its_folder(tmp_path, square_ring):
    write(tmp_path / "ring.tif", square_ring)
    segment_file(tmp_path / "ring.tif", tmp_path / "out", progress=False, report=False)
    outputs = json.loads((tmp_path / "out" / "run.json").read_text())["outputs"]
    assert outputs["labels"] == "labels.tif"
    assert all((tmp_path / "out" / name).exists() for name in outputs.values())


def test_same_size_corrupted_output_is_not_reused(tmp_path, rng):
    np.save(tmp_path / "scan.npy", rng.integers(0, 100, (6, 7, 8)).astype(np.uint16))
    first = run_batch([tmp_path / "scan.npy"], tmp_path / "out", {"level": 50}, jobs=1,
                      progress=False, worker=STANDIN)
    folder = tmp_path / "out" / first.results[0]["name"]
    record = json.loads((folder / DONE_NAME).read_text())
    name = next(iter(record["outputs"]))
    data = bytearray((folder / name).read_bytes())
    data[-1] ^= 0xFF  # same size, other content
    (folder / name).write_bytes(bytes(data))
    again = run_batch([tmp_path / "scan.npy"], tmp_path / "out", {"level": 50}, jobs=1,
                      progress=False, worker=STANDIN)
    assert again.results[0]["status"] == "failed"
    assert "is missing or changed" in again.results[0]["error"]


def test_interrupted_run_leaves_nothing_that_looks_complete(tmp_path, square_ring,
                                                            monkeypatch):
    """Ctrl-C after the label map was written: no output is in the folder, and the same
    command runs again without --force (outputs are published together, run.json last)."""
    import cavitas.workflow as workflow

    write(tmp_path / "ring.tif", square_ring)
    out = tmp_path / "out"
    out.mkdir()
    abandoned = out / ".cavitas-staging-999999999-dead"  # a pid no Linux system reaches
    abandoned.mkdir()

    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(workflow, "draw_diagram", interrupted)
    with pytest.raises(KeyboardInterrupt):
        segment_file(tmp_path / "ring.tif", out, progress=False, report=False)
    assert list(out.iterdir()) == []  # the abandoned staging folder went too
    monkeypatch.undo()
    summary = segment_file(tmp_path / "ring.tif", out, progress=False, report=False)
    assert summary["outputs"]["labels"] == str(out / "labels.tif")
    assert sorted(p.name for p in out.iterdir()) == [
        "diagram.csv", "diagram.png", "euler.csv", "labels.tif", "regions.csv", "regions.json",
        "run.json"]


def test_full_disk_leaves_no_partial_file(tmp_path, monkeypatch):
    """The disk fills half-way through a write (ENOSPC, simulated): one sentence, exit 4,
    and neither the target nor a temporary file is left."""
    import tifffile

    def half_then_full(target, *args, **kwargs):
        Path(target).write_bytes(b"II*\0" + b"\0" * 100)
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(tifffile, "imwrite", half_then_full)
    with pytest.raises(OutputError, match=r"^Cannot write '.*a\.tif': No space left on device"):
        write(tmp_path / "a.tif", np.zeros((4, 4), np.uint8))
    assert list(tmp_path.iterdir()) == []
