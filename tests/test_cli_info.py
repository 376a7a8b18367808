"""``cavitas info`` through ``cavitas.cli.main``: output, JSON, exit codes, one-sentence
errors on stderr without traceback (exit codes as documented in cavitas/_errors.py).

Reference values come from numpy (min/max/percentile) and nibabel (shape, zooms) on the
same files."""

import gzip
import json
from pathlib import Path

import nibabel as nib
import numpy as np
import pytest
from nibabel.testing import data_path

from cavitas.cli import main
from cavitas.io import estimate_memory_bytes, write


def _one_sentence(stderr):
    lines = [line for line in stderr.splitlines() if line.strip()]
    assert len(lines) == 1, stderr
    assert "Traceback" not in stderr
    assert lines[0].startswith("cavitas info: error: ") and lines[0].endswith(".")
    return lines[0]


@pytest.fixture
def volume(tmp_path, rng):
    data = rng.integers(0, 1000, size=(4, 5, 6), dtype=np.uint16)
    return write(tmp_path / "scan.tif", data, spacing=(2.0, 0.5, 0.5), unit="µm"), data


def test_text_output(volume, capsys):
    path, data = volume
    assert main(["info", str(path)]) == 0
    out = capsys.readouterr().out
    assert "4 × 5 × 6" in out and "uint16" in out and "2 × 0.5 × 0.5 µm" in out
    assert f"min {data.min()}, max {data.max()}" in out  # source: numpy min/max


def test_json_output(volume, capsys):
    path, data = volume
    assert main(["info", "--json", str(path)]) == 0
    facts = json.loads(capsys.readouterr().out)
    assert facts["shape"] == [4, 5, 6] and facts["spacing"] == [2.0, 0.5, 0.5]
    assert (facts["unit"], facts["dtype"], facts["source"]) == ("µm", "uint16", str(path))
    assert (facts["min"], facts["max"]) == (int(data.min()), int(data.max()))
    np.testing.assert_allclose(list(facts["percentiles"].values()),
                               np.percentile(data, [1, 50, 99]))  # source: numpy.percentile
    assert facts["memory_bytes"] == estimate_memory_bytes((4, 5, 6), np.uint16)
    assert facts["warnings"] == [] and facts["nonfinite"] == 0


def test_nibabel_file_with_time(capsys):
    # source: nibabel reports example4d.nii.gz as (128, 96, 24, 2), zooms (2, 2, 2.2) mm
    path = Path(data_path) / "example4d.nii.gz"
    assert main(["info", "--json", "--time", "1", str(path)]) == 0
    facts = json.loads(capsys.readouterr().out)
    zooms = nib.load(path).header.get_zooms()[:3]
    assert facts["shape"] == [24, 96, 128] and facts["unit"] == "mm"
    assert np.float32(facts["spacing"]).tolist() == np.float32(zooms[::-1]).tolist()


def test_several_files_go_on_past_failures(volume, tmp_path, capsys):
    path, _ = volume
    code = main(["info", "--json", str(path), str(tmp_path / "missing.nii"), str(path)])
    captured = capsys.readouterr()
    assert code == 3
    assert len(captured.out.strip().splitlines()) == 2  # one JSON line per readable file
    assert "missing.nii' does not exist" in _one_sentence(captured.err)


def _bad_inputs(tmp_path):
    """(arguments, exit code, text the sentence must hold) for each bad-input case."""
    cases = [([str(tmp_path / "missing.tif")], 3, "does not exist")]
    (tmp_path / "a.jpg").write_bytes(b"\xff\xd8")
    cases.append(([str(tmp_path / "a.jpg")], 3, "extension"))
    (tmp_path / "bad.tif").write_text("not a tiff")
    cases.append(([str(tmp_path / "bad.tif")], 3, "cannot be read as TIFF"))
    full = write(tmp_path / "full.nii.gz", np.ones((5, 6, 7), np.int16))
    (tmp_path / "cut.nii.gz").write_bytes(full.read_bytes()[:-60])
    cases.append(([str(tmp_path / "cut.nii.gz")], 3, "cut.nii.gz"))
    with gzip.open(tmp_path / "junk.nii.gz", "wb") as stream:
        stream.write(b"\x01" * 30)
    cases.append(([str(tmp_path / "junk.nii.gz")], 3, "junk.nii.gz"))
    header = nib.Nifti1Header()
    header.set_data_shape((3, 4, 5))
    header["dim"][3] = 0
    (tmp_path / "dims.nii").write_bytes(header.binaryblock + bytes(4))
    cases.append(([str(tmp_path / "dims.nii")], 3, "impossible dimensions"))
    (tmp_path / "a.raw").write_bytes(bytes(10))
    cases.append(([str(tmp_path / "a.raw"), "--shape", "2,3", "--dtype", "uint8"], 3,
                  "has 10 bytes"))
    cases.append(([str(tmp_path / "a.raw")], 2, "give its --shape (z, y, x) and --dtype"))
    np.save(tmp_path / "empty.npy", np.zeros((3, 0), np.float32))
    cases.append(([str(tmp_path / "empty.npy")], 3, "holds no voxels"))
    np.save(tmp_path / "ok.npy", np.zeros((3, 4), np.float32))
    cases.append(([str(tmp_path / "ok.npy"), "--spacing", "0,1"], 2, "spacing"))
    return cases


def test_every_bad_input_gives_one_sentence_and_its_exit_code(tmp_path, capsys):
    for arguments, code, text in _bad_inputs(tmp_path):
        assert main(["info", *arguments]) == code, arguments
        captured = capsys.readouterr()
        assert text in _one_sentence(captured.err), arguments
        assert captured.out == ""


def test_nan_is_reported_not_fatal(tmp_path, capsys):
    data = np.ones((3, 4), np.float32)
    data[0, :2] = np.nan
    np.save(tmp_path / "nan.npy", data)
    assert main(["info", "--json", str(tmp_path / "nan.npy")]) == 0
    assert json.loads(capsys.readouterr().out)["nonfinite"] == 2


def test_help_teaches(capsys):
    assert main(["info", "--help"]) == 0
    out = capsys.readouterr().out
    assert "examples:" in out and "--channel" in out and "Memory estimate" in out


def test_metadata_warnings_are_in_the_block_not_repeated_on_stderr(capsys):
    # source: nibabel reports xyzt_units 'unknown' for its standard.nii.gz
    assert main(["info", str(Path(data_path) / "standard.nii.gz")]) == 0
    captured = capsys.readouterr()
    assert "warning     the file gives a voxel size but no unit" in captured.out
    assert captured.err == ""


def test_chunked_files_name_their_path_and_worker_memory(tmp_path, capsys):
    # Reference: the chunk shape and chunk count that zarr's and h5py's own metadata give.
    zarr = pytest.importorskip("zarr", reason="zarr (extra 'zarr') is not installed")
    h5py = pytest.importorskip("h5py", reason="h5py (extra 'hdf5') is not installed")
    data = np.arange(12 * 10 * 9, dtype=np.uint16).reshape(12, 10, 9)
    store = zarr.open_array(str(tmp_path / "v.zarr"), mode="w", shape=data.shape,
                            chunks=(5, 10, 4), dtype=data.dtype)
    store[...] = data
    with h5py.File(tmp_path / "v.h5", "w") as handle:
        handle.create_dataset("scan", data=data, chunks=(3, 10, 9))
    np.save(tmp_path / "v.npy", data)
    assert main(["info", "--json", *(str(tmp_path / f"v.{ext}")
                                     for ext in ("zarr", "h5", "npy"))]) == 0
    zarr_facts, h5_facts, npy_facts = map(json.loads, capsys.readouterr().out.splitlines())
    assert zarr_facts["chunked"]["chunk_shape"] == list(store.chunks)
    assert zarr_facts["chunked"]["chunks"] == store.nchunks
    with h5py.File(tmp_path / "v.h5", "r") as handle:
        assert h5_facts["chunked"]["chunk_shape"] == list(handle["scan"].chunks)
    assert h5_facts["chunked"]["chunks"] == 4
    for facts in (zarr_facts, h5_facts):
        chunked = facts["chunked"]
        assert chunked["worker_bytes"] == max(chunked["chunk_sweep_bytes"],
                                              chunked["largest_join_bytes"]) > 0
    assert npy_facts["chunked"] is None  # read whole: no chunked path
    assert main(["info", str(tmp_path / "v.zarr")]) == 0
    text = capsys.readouterr().out
    assert "chunk by chunk on Dask workers" in text and "per worker  about" in text


def test_info_of_a_tiff_loads_no_kernels_and_no_plotting(tmp_path):
    # The start-up target (cavitas info under 0.5 s) rests on this: a file that is
    # not chunked needs neither numba, scipy nor Matplotlib (common practice: lazy imports;
    # checked in a fresh interpreter, which is what a user starts).
    import subprocess
    import sys

    path = tmp_path / "image.tif"
    write(path, np.arange(256, dtype=np.uint16).reshape(16, 16))
    code = ("import sys; from cavitas.cli import main; main(['info', sys.argv[1], '-q']); "
            "print(sorted(m for m in ('numba', 'scipy', 'matplotlib') if m in sys.modules))")
    done = subprocess.run([sys.executable, "-c", code, str(path)], capture_output=True,
                          text=True, check=True)
    assert done.stdout.splitlines()[-1] == "[]"


def test_console_command_exits_with_the_documented_codes(tmp_path):
    # Source: the exit codes documented in cavitas/_errors.py and the README (0 ok, 3 bad
    # or missing input file), through ``python -m cavitas`` as a user runs the command.
    import subprocess
    import sys

    path = tmp_path / "image.tif"
    write(path, np.arange(256, dtype=np.uint16).reshape(16, 16))
    ok = subprocess.run([sys.executable, "-m", "cavitas", "info", str(path), "--json"],
                        capture_output=True, text=True)
    assert ok.returncode == 0 and json.loads(ok.stdout)["shape"] == [16, 16]
    missing = subprocess.run([sys.executable, "-m", "cavitas", "info",
                              str(tmp_path / "none.tif")], capture_output=True, text=True)
    assert missing.returncode == 3
    assert "none.tif" in _one_sentence(missing.stderr)
