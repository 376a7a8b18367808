"""``cavitas segment FILE --scheduler ADDRESS`` / ``--dask-local``: the chunked route.

Checks and their sources:

* The label map written chunk by chunk to labels.zarr (read back with zarr's own reader)
  and regions.csv equal, voxel for voxel and row for row, what ``cavitas segment`` writes
  for the same Zarr store in memory with the same options (``--region component``, a hand
  threshold, with and without smoothing, both polarities, 2D and 3D, chunks of one voxel
  thickness and chunks that cut through every cell). The in-memory route is the reference;
  its labels are checked against ``scipy.ndimage.label`` of sublevel sets in
  ``tests/test_regions_chunked.py`` and ``tests/test_segment_regions.py``. That a
  distributed path equals its serial one is common practice (DEVELOPERS.md).
* Each refusal is one sentence with the documented exit code (``cavitas/_errors.py``: 2
  for an option the route does not compute) and leaves no output behind.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import tifffile

from cavitas._table import Table
from cavitas.cli import main

pytest.importorskip("distributed", reason="Dask distributed (extra 'cluster') is not installed")
zarr = pytest.importorskip("zarr", reason="zarr (extra 'zarr') is not installed")


def _cells(shape, pitch, seed) -> np.ndarray:
    """Bright walls every ``pitch`` voxels around dark cells, noise and a few inner walls
    with holes (invented data: a regression of the two routes against each other)."""
    rng = np.random.default_rng(seed)
    wall = np.zeros(shape, bool)
    for coord in np.indices(shape):
        wall |= coord % pitch == 0
    return (np.where(wall, 180, 40) + rng.integers(0, 60, size=shape)).astype(np.uint16)


@pytest.fixture(scope="module")
def address(client):
    """The loopback scheduler of tests/conftest.py's client, for --scheduler."""
    return client.scheduler.address


def _store(path, image, chunks) -> str:
    store = zarr.open_array(str(path), mode="w", shape=image.shape, chunks=chunks,
                            dtype=image.dtype)
    store[...] = image
    return str(path)


CASES = [  # (shape, pitch, chunks, walls, extra options)
    ((9, 10, 9), 4, (4, 5, 1), "bright", ["--smooth", "0.6", "--enclosures"]),
    ((13, 11, 12), 4, (2, 5, 7), "dark", []),
    ((37, 29), 6, (4, 7), "bright", ["--top", "5", "--spacing", "0.5,0.5",
                                     "--min-volume", "2"]),
    ((25, 21), 6, (1, 11), "dark", ["--smooth", "1", "--connectivity", "2"]),
]


@pytest.mark.cluster
@pytest.mark.parametrize("shape, pitch, chunks, walls, extra", CASES)
def test_labels_and_table_equal_in_memory(address, tmp_path, shape, pitch, chunks, walls,
                                          extra, capsys):
    image = _cells(shape, pitch, seed=len(shape) + len(extra))
    if walls == "dark":
        image = (image.max() - image).astype(np.uint16)
    source = _store(tmp_path / "v.zarr", image, chunks)
    common = ["--region", "component", "--min-persistence", "30", "--walls", walls,
              "--no-report", *extra]
    assert main(["segment", source, "-o", str(tmp_path / "mem"), *common]) == 0
    assert main(["segment", source, "-o", str(tmp_path / "big"), "--scheduler", address,
                 *common]) == 0
    out = capsys.readouterr().out
    assert "not made on this route" in out
    # the in-memory run writes labels.tif for a Zarr input: read back with tifffile's reader
    mem_labels = tifffile.imread(tmp_path / "mem" / "labels.tif")
    big_labels = zarr.open_array(str(tmp_path / "big" / "labels.zarr"), mode="r")[...]
    assert mem_labels.max() > 1
    np.testing.assert_array_equal(big_labels, mem_labels)
    mem_rows = Table.from_csv(tmp_path / "mem" / "regions.csv")
    big_rows = Table.from_csv(tmp_path / "big" / "regions.csv")
    assert len(big_rows) == len(mem_rows) and set(big_rows.names) <= set(mem_rows.names)
    for name in big_rows.names:  # the in-memory table adds measurements after these
        np.testing.assert_array_equal(big_rows[name], mem_rows[name], err_msg=name)
    if "--enclosures" in extra:
        np.testing.assert_array_equal(
            zarr.open_array(str(tmp_path / "big" / "enclosures.zarr"), mode="r")[...],
            tifffile.imread(tmp_path / "mem" / "enclosures.tif"))
    record = json.loads((tmp_path / "big" / "run.json").read_text(encoding="utf-8"))
    assert record["parameters"]["threshold"] == 30 and record["not_made"]


REFUSED = [  # (options, words of the one sentence)
    (["--min-persistence", "30"], "--region basin needs the whole volume"),
    (["--region", "breach", "--min-persistence", "30"], "--region breach needs"),
    (["--region", "component"], "automatic threshold"),
    (["--region", "component", "--min-persistence", "30", "--auto"], "automatic threshold"),
    (["--region", "component", "--min-persistence", "30", "--keep-border"], "--keep-border"),
    (["--region", "component", "--min-persistence", "30", "--partition"], "--partition"),
    (["--region", "component", "--relative-persistence", "0.1", "--no-auto"],
     "--relative-persistence"),
    (["--region", "component", "--min-persistence", "30", "--shells"], "--shells"),
]


@pytest.mark.parametrize("options, words", REFUSED)
def test_refusals_one_sentence_nothing_written(tmp_path, capsys, options, words):
    source = _store(tmp_path / "v.zarr", _cells((6, 7, 8), 3, seed=1), (3, 3, 3))
    out = tmp_path / "out"
    assert main(["segment", source, "-o", str(out), "--dask-local", "1", *options]) == 2
    err = capsys.readouterr().err.strip()
    assert words in err and "v.zarr" in err and err.count(". ") == 0, err
    assert not out.exists()
