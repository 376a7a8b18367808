"""The automatic threshold chunk by chunk, at the smoothing scale given or chosen, equals the
in-memory one.

Checks and their sources:

* The two-class split (``segment/_chunked_split.py``) against the in-memory
  :func:`cavitas.segment._evidence.class_split`, itself checked against scikit-image's
  ``threshold_otsu`` and ``numpy.median`` of each class in ``tests/test_two_class.py``
  (Otsu 1979): the whole image's threshold and class medians and every block's threshold
  equal, for chunks one voxel thick, chunks smaller than a block and a subsample of every
  second voxel.
* ``segment_in_chunks`` in automatic mode (``--region component``, ``--smooth S`` or the
  scale chosen automatically) against ``cavitas.segment(image, smooth=S,
  region="component")`` in memory: the threshold, the rule that set it (the diagram's gap,
  the false discovery rate, the noise null), the gap, every scale tried, the splits
  joined, the labels voxel for voxel and the table row for row, in 2D and 3D, both
  polarities, white and correlated noise, chunks one voxel thick and chunks cutting
  through every cell, on a loopback Dask LocalCluster.
* The command line: ``cavitas segment --dask-local/--scheduler`` without a threshold,
  with ``--smooth`` or without it, writes the outputs the in-memory command writes (labels, tables,
  diagram; ``tests/test_segment_chunked_cli.py``'s comparison) and run.json's threshold,
  threshold rule and gap.
* The polarity check: the hint (the other polarity's census against this one's) equals
  the in-memory run's, absent where the walls are given right and the same sentence where
  they are given wrong (a second chunked tree, of the negated smoothed image).

The images are invented (cells of two wall heights with noise), so only the identity of
the two routes is checked; that a distributed path equals its serial one exactly is common
practice (DEVELOPERS.md).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from scipy import ndimage as ndi

from cavitas.segment import SegmentParams, segment
from cavitas.segment._evidence import class_split, sample_step

da = pytest.importorskip("dask.array", reason="Dask (extra 'cluster') is not installed")


def _cells(shape, pitch, seed, noise, correlated=0.0) -> np.ndarray:
    """Walls every ``pitch`` voxels (higher every ``2 pitch``) around cells, with normal
    noise of ``noise`` (blurred by ``correlated`` voxels if given)."""
    rng = np.random.default_rng(seed)
    wall = np.zeros(shape, np.float32)
    for coord in np.indices(shape):
        wall = np.maximum(wall, np.where(coord % pitch == 0, 180, 0))
        wall = np.maximum(wall, np.where(coord % (2 * pitch) == 0, 260, 0))
    grain = rng.normal(0, noise, size=shape)
    if correlated:
        grain = ndi.gaussian_filter(grain, correlated) * noise / grain.std()
    return (np.maximum(wall, 40) + grain).astype(np.float32)


def test_class_split_equals_in_memory():
    import dask

    from cavitas.segment._chunked_split import class_split_in_chunks

    rng = np.random.default_rng(18)
    cases = [((70, 50), (13, 1)), ((30, 41, 29), (1, 17, 5)), ((730, 720), (300, 257))]
    with dask.config.set(scheduler="synchronous"):
        for shape, chunks in cases:
            image = rng.random(shape).astype(np.float32)
            image[::9] += 1.0
            image[..., ::13] += 0.5
            got = class_split_in_chunks(da.from_array(image, chunks=chunks))
            want = class_split(image)
            assert got.block == want.block and got.grid.shape == want.grid.shape
            np.testing.assert_array_equal(got.grid, want.grid)
            assert (got.whole, got.low, got.high) == (want.whole, want.low, want.high)
    assert sample_step(730 * 720) == 2  # the last case subsamples


CASES = [  # (shape, pitch, noise, correlated, walls, smooth, chunks, rule in memory)
    ((48, 50), 6, 8.0, 0.0, "bright", 1.0, ((1, 20, 27), (50,)), "gap"),
    ((48, 50), 6, 30.0, 0.0, "dark", 0.5, (5, 50), "false discovery rate"),
    ((48, 50), 6, 40.0, 0.0, "bright", 0.5, (48, 7), "empty stretch"),
    ((50, 46), 6, 5.0, 0.7, "dark", 1.0, ((50,), (1, 22, 23)), "gap"),  # not white noise
    ((18, 19, 20), 6, 10.0, 0.0, "bright", 0.5, (7, 7, 20), "noise null"),
    ((20, 21, 22), 5, 10.0, 0.0, "dark", 0.5, ((1, 19), (4, 4, 13), (2, 20)), "noise null"),
    # no --smooth: the scale chosen among the automatic ones (here 1 voxel), and with
    # correlated noise the textured choice among the scales within its grain
    ((48, 50), 8, 60.0, 0.0, "dark", None, (13, (20, 30)), "false discovery rate"),
    ((60, 64), 8, 20.0, 1.0, "bright", None, ((1, 59), 16), "noise null"),
]


@pytest.mark.cluster
@pytest.mark.parametrize("shape, pitch, noise, correlated, walls, smooth, chunks, rule", CASES)
def test_automatic_threshold_equals_in_memory(client, shape, pitch, noise, correlated, walls,
                                              smooth, chunks, rule):
    from cavitas.segment._chunked_segment import segment_in_chunks

    image = _cells(shape, pitch, seed=len(shape), noise=noise, correlated=correlated)
    if walls == "dark":
        image = image.max() - image
    params = SegmentParams(region="component", smooth=smooth, walls=walls)
    seg = segment_in_chunks(da.from_array(image, chunks=chunks), params=params,
                            spacing=np.ones(image.ndim), unit="voxel")
    memory = segment(image, params=params)
    chosen = memory.params
    assert chosen["threshold_rule"] == rule  # the rule this case is here for
    assert seg.threshold == chosen["threshold"]
    assert seg.smooth_sigma == chosen["smooth_sigma"]
    assert seg.choice.rule == chosen["threshold_rule"] and seg.choice.gap == chosen["gap"]
    assert seg.choice.scales_tried == chosen["scales_tried"]
    assert seg.choice.splits_joined == chosen["splits_joined"]
    assert seg.choice.texture_joined == chosen["texture_pieces_joined"]
    assert seg.choice.cell_sized == chosen["cell_sized_splits"]
    assert seg.choice.polarity_hint == chosen["polarity_hint"]
    labels = seg.labels.compute()
    assert labels.max() >= 1
    np.testing.assert_array_equal(labels, memory.labels)
    assert seg.table.names == memory.regions.names
    for name in seg.table.names:
        np.testing.assert_array_equal(seg.table[name], memory.regions[name], err_msg=name)


@pytest.mark.cluster
@pytest.mark.parametrize("walls", ["bright", "dark"])
def test_polarity_check_equals_in_memory(client, walls):
    # dark walls given as bright (and the reverse): the in-memory run's hint names the
    # other polarity; the chunked route's is the same sentence
    from cavitas.segment._chunked_segment import segment_in_chunks

    image = _cells((48, 50), 6, seed=2, noise=8.0)
    if walls == "bright":
        image = image.max() - image  # the walls are dark, the run is told bright
    params = SegmentParams(region="component", smooth=1.0, walls=walls)
    hint = segment(image, params=params).params["polarity_hint"]
    assert hint is not None and hint.startswith("The walls may be")
    seg = segment_in_chunks(da.from_array(image, chunks=(13, 20)), params=params,
                            spacing=np.ones(2), unit="voxel")
    assert seg.choice.polarity_hint == hint


@pytest.mark.cluster
@pytest.mark.parametrize("image, scale, rule", [
    (_cells((48, 50), 6, seed=2, noise=8.0), ["--smooth", "1"], "gap"),
    (_cells((48, 50), 8, seed=2, noise=60.0), [], "false discovery rate"),  # scale chosen
])
def test_command_line_automatic_threshold(client, tmp_path, image, scale, rule):
    from tests.test_segment_chunked_cli import _compare_runs, _store

    source = _store(tmp_path / "v.zarr", image, (7, 25))
    common = ["--region", "component", *scale, "--no-report"]
    _compare_runs(tmp_path, source, common, client.scheduler.address)
    record, memory = (json.loads((tmp_path / run / "run.json").read_text(encoding="utf-8"))
                      for run in ("big", "mem"))
    assert memory["parameters"]["threshold_rule"] == rule
    for name in ("threshold", "threshold_rule", "gap", "automatic", "scales_tried",
                 "smooth_sigma", "scale_basis", "noise_sigma", "polarity_hint"):
        assert record["parameters"][name] == memory["parameters"][name], name
