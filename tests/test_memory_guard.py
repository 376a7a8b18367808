"""The memory guard: a run that cannot fit is refused up front in one sentence (exit 3) with
both figures and what to do; ``--skip-memory-check`` runs it anyway; a ``MemoryError`` that
still happens becomes the same kind of sentence. The contract is the project's own (issue
14); the memory available is replaced by a small figure so the refusal is tested on a small
image, and the estimate's formula is checked in ``tests/test_io_stats.py``."""

import re

import numpy as np
import pytest

import cavitas._shared.memory as memory
from cavitas._errors import EXIT_INPUT, InputFileError
from cavitas.cli import main
from cavitas.io import write
from cavitas.workflow import segment_file


@pytest.fixture
def ring(tmp_path, square_ring):
    path = tmp_path / "ring.tif"
    write(path, square_ring, spacing=(0.5, 0.5))
    return path


@pytest.fixture
def little_memory(monkeypatch):
    """The machine has 10 kB available (enough for reading the ring, not to segment it)."""
    monkeypatch.setattr(memory, "available_memory", lambda: 10_000)


def test_run_beyond_the_memory_available_is_refused_with_both_figures(ring, tmp_path,
                                                                      little_memory):
    need = memory.data_memory_bytes((24, 24), np.uint8)
    with pytest.raises(InputFileError) as caught:
        segment_file(ring, tmp_path / "out", progress=False, report=False)
    message = str(caught.value)
    assert re.search(r"ring\.tif' \(24 x 24 uint8\) needs about .* of memory to segment, but "
                     r"9\.8 KiB are available: crop or downsample it", message)
    assert memory.size_text(need) in message
    assert not (tmp_path / "out").exists()  # refused before anything was written


def test_cli_refusal_exits_3_and_names_the_option(ring, tmp_path, little_memory, capsys):
    assert main(["segment", str(ring), "-o", str(tmp_path / "out")]) == EXIT_INPUT
    error = capsys.readouterr().err
    assert "(--skip-memory-check tries anyway)" in error and error.count("\n") == 1


def test_skip_memory_check_runs_anyway(ring, tmp_path, little_memory):
    summary = segment_file(ring, tmp_path / "out", progress=False, report=False,
                           skip_memory_check=True)
    assert summary["regions"] == 1  # the one ring of the fixture


def test_memory_error_becomes_a_sentence(ring, tmp_path, monkeypatch, capsys):
    def exhausted(*args, **kwargs):
        raise MemoryError

    monkeypatch.setattr("cavitas.segment.segment", exhausted)
    with pytest.raises(InputFileError, match=r"^Segmenting '.*ring\.tif' ran out of memory: "
                                             r"crop or downsample it first"):
        segment_file(ring, tmp_path / "out", progress=False, report=False)
    assert main(["segment", str(ring), "-o", str(tmp_path / "out2")]) == EXIT_INPUT
    assert "--skip-memory-check" in capsys.readouterr().err


def test_declared_size_beyond_memory_is_refused_by_the_reader(tmp_path, little_memory):
    """A compressed .npz member declaring 1 MB (more than the 10 kB available) is refused
    before it is unpacked: a decompression bomb is read only up to the guard."""
    path = tmp_path / "bomb.npz"
    np.savez_compressed(path, image=np.zeros((1000, 1000), np.uint8))
    from cavitas.io import read

    with pytest.raises(InputFileError, match=r"declares 1000 x 1000 uint8 voxels \(976\.6 "
                                             r"KiB\), more than the 9\.8 KiB of memory"):
        read(path)
    with memory.memory_guard(False):
        assert read(path).shape == (1000, 1000)
