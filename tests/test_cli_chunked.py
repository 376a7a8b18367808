"""``cavitas diagram FILE --scheduler ADDRESS`` / ``--dask-local``: the chunked route.

Checks and their sources:

* The diagram written from a Zarr store (zarr's own writer) and an HDF5 dataset (h5py's own
  writer), read lazily and computed on the workers of a loopback LocalCluster, equals
  ``persistence()`` of the same voxels in memory, pair for pair (the in-memory engine is
  itself checked against the textbook reduction in ``test_persistence_oracle.py``); that a
  distributed path equals its serial one is common practice (DEVELOPERS.md).
* Each refusal is one sentence with the documented exit code (``cavitas/_errors.py``):
  2 for an option that cannot apply or a scheduler that cannot be reached, 3 for a missing
  input; never 5.
"""

from __future__ import annotations

import numpy as np
import pytest

from cavitas.cli import main
from cavitas.cubical import load_diagram, persistence

pytest.importorskip("distributed", reason="Dask distributed (extra 'cluster') is not installed")
zarr = pytest.importorskip("zarr", reason="zarr (extra 'zarr') is not installed")


def _lattice(shape=(12, 10, 11), pitch=4, seed=3) -> np.ndarray:
    """Bright walls every ``pitch`` voxels around dark cells, with noise (invented data)."""
    rng = np.random.default_rng(seed)
    wall = np.zeros(shape, bool)
    for coord in np.indices(shape):
        wall |= coord % pitch == 0
    return (np.where(wall, 180, 40) + rng.integers(0, 30, size=shape)).astype(np.uint16)


@pytest.fixture(scope="module")
def address(client):
    """The loopback scheduler of tests/conftest.py's client, for --scheduler."""
    return client.scheduler.address


def _same_pairs(written, expected) -> None:
    for dim in expected.dims:
        np.testing.assert_array_equal(written.pairs(dim), expected.pairs(dim))


@pytest.mark.cluster
def test_zarr_and_hdf5_diagrams_equal_in_memory(address, tmp_path, capsys):
    h5py = pytest.importorskip("h5py", reason="h5py (extra 'hdf5') is not installed")
    image = _lattice()
    mask = np.ones(image.shape, bool)
    mask[:, :, 9:] = False
    store = zarr.open_array(str(tmp_path / "v.zarr"), mode="w", shape=image.shape,
                            chunks=(5, 3, 11), dtype=image.dtype)
    store[...] = image
    roi = zarr.open_array(str(tmp_path / "roi.zarr"), mode="w", shape=image.shape,
                          chunks=(4, 10, 4), dtype=np.uint8)
    roi[...] = mask
    with h5py.File(tmp_path / "v.h5", "w") as handle:
        handle.create_dataset("scan", data=image, chunks=(1, 10, 6))
        handle.create_dataset("other", data=image[0])
    for name, extra, walls, conn, masked in (
            ("v.zarr", ["--mask", str(tmp_path / "roi.zarr")], "bright", 1, mask),
            ("v.h5", ["--dataset", "scan"], "dark", 3, None)):
        out = tmp_path / f"out-{name}"
        code = main(["diagram", str(tmp_path / name), "-o", str(out), "--walls", walls,
                     "--connectivity", str(conn), "--scheduler", address, *extra])
        assert code == 0
        expected = persistence(image, walls=walls, connectivity=conn, mask=masked,
                               dims=(0, 2))
        _same_pairs(load_diagram(out / "diagram.npz"), expected)
        assert len(expected.pairs(2)) >= 8  # the cells' cavities were exercised
    said = capsys.readouterr().out
    assert "chunk by chunk on 2 Dask worker(s)" in said and "(H1) are not computed" in said


@pytest.mark.cluster
def test_refusals_are_one_sentence_with_their_exit_code(address, tmp_path, capsys,
                                                         monkeypatch):
    import cavitas.batch._dask

    image = _lattice((6, 6, 6))
    np.save(tmp_path / "v.npy", image)
    zarr.open_array(str(tmp_path / "v.zarr"), mode="w", shape=image.shape, chunks=3,
                    dtype=image.dtype)[...] = image
    monkeypatch.setattr(cavitas.batch._dask, "CONNECT_TIMEOUT", "0.5s")
    zarr_in = str(tmp_path / "v.zarr")
    cases = [
        ([zarr_in, "--scheduler", "not::an::address"], 2, "Cannot reach a Dask scheduler"),
        ([zarr_in, "--scheduler", "tcp://127.0.0.1:9"], 2, "Cannot reach a Dask scheduler"),
        ([str(tmp_path / "v.npy"), "--scheduler", address], 2, "neither a Zarr store"),
        ([str(tmp_path / "none.zarr"), "--scheduler", address], 3, "does not exist"),
        ([zarr_in, "--scheduler", address, "--euler"], 2, "--euler applies to an image"),
        ([zarr_in, "--scheduler", address, "--spacing", "1,1,1"], 2, "--spacing does not"),
    ]
    for argv, code, words in cases:
        assert main(["diagram", *argv, "-o", str(tmp_path / "out")]) == code
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1 and words in err[0], err
    assert not (tmp_path / "out").exists()  # nothing written by a refused run
    assert main(["diagram", zarr_in, "-o", str(tmp_path / "out"), "--dask-local", "0"]) == 2
    assert "expected a whole number of workers" in capsys.readouterr().err


@pytest.mark.cluster
def test_workers_that_die_are_an_input_problem(address, tmp_path, capsys, monkeypatch):
    # A worker killed (out of memory, as a chunk too large for it) ends the run with exit
    # code 3 and one sentence, not as an internal error (5).
    import distributed

    import cavitas.cubical._chunked

    def killed(*args, **kwargs):
        raise distributed.KilledWorker("task", "worker", 3)

    monkeypatch.setattr(cavitas.cubical._chunked, "chunked_persistence", killed)
    image = _lattice((6, 6, 6))
    zarr.open_array(str(tmp_path / "v.zarr"), mode="w", shape=image.shape, chunks=3,
                    dtype=image.dtype)[...] = image
    code = main(["diagram", str(tmp_path / "v.zarr"), "-o", str(tmp_path / "out"),
                 "--scheduler", address])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 3 and len(err) == 1 and "Dask workers died" in err[0]
    assert not (tmp_path / "out").exists()
