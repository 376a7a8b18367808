"""``measure_in_chunks``: the per-region measurements of a Dask label map, chunk by chunk.

Checks and their sources:

* scikit-image's ``regionprops_table`` (reference library): voxel counts, volumes,
  centroids, bounding boxes, intensity minimum, mean and maximum and the axis lengths of
  a random label map measured in one-voxel-thick chunks and in chunks that cut through
  every region.
* The whole-array ``measure_regions`` (``thickness=False``; itself checked against
  regionprops, analytic ellipsoids and the Crofton references in
  ``tests/test_measure_regions.py`` and ``tests/test_measure_surface.py``): every column,
  its units and meta, with and without an image and a region of interest, 2D and 3D,
  anisotropic spacing, float images (integer images on the cluster,
  ``tests/test_segment_chunked_cli.py``), on any chunking; integer columns exactly,
  float columns to 1e-12 relative (float sums over chunks are added in another order). That
  a chunked path equals its whole-array one is common practice (DEVELOPERS.md).
* The global figures from the chunked counts equal ``global_figures`` of the whole array.
* On a loopback LocalCluster: ``tests/test_segment_chunked_cli.py`` (the command line's
  tables, and the measurements of chunks measured alone).
"""

from __future__ import annotations

import numpy as np
import pytest

from cavitas.measure import global_figures, measure_regions
from cavitas.measure._chunked import measure_in_chunks
from cavitas.measure._global import figures_from_counts

da = pytest.importorskip("dask.array", reason="Dask is not installed")


def _labels(rng, shape) -> np.ndarray:
    """Random blobs: a coarse random label grid, upsampled, with holes (invented data)."""
    coarse = rng.integers(0, 7, size=tuple(max(s // 3, 1) for s in shape))
    lab = coarse
    for axis, size in enumerate(shape):
        lab = np.repeat(lab, 3, axis=axis)[(slice(None),) * axis + (slice(0, size),)]
    lab = np.pad(lab, [(0, s - n) for s, n in zip(shape, lab.shape, strict=True)], mode="edge")
    return np.where(rng.random(shape) < 0.9, lab, 0).astype(np.int32)


def _assert_same(got, expected) -> None:
    assert got.names == expected.names and got.units == expected.units
    assert got.meta == expected.meta
    for name in expected.names:
        if expected[name].dtype.kind == "f":
            np.testing.assert_allclose(got[name], expected[name], rtol=1e-12, atol=1e-12,
                                       err_msg=name)
        else:
            np.testing.assert_array_equal(got[name], expected[name], err_msg=name)


CASES = [  # (shape, label chunks, image chunks, roi chunks, spacing, image dtype)
    ((9, 11, 10), (1, 11, 10), (4, 4, 4), (9, 2, 3), (0.5, 1.0, 2.0), np.float32),
    ((21, 17), (2, 5), (5, 17), (7, 7), (2.0, 0.5), np.float64),
]


@pytest.mark.parametrize("shape, chunks, image_chunks, roi_chunks, spacing, dtype", CASES)
def test_equals_whole_array(shape, chunks, image_chunks, roi_chunks, spacing, dtype):
    import dask

    rng = np.random.default_rng(sum(shape))
    lab = _labels(rng, shape)
    image = (rng.normal(100, 20, shape) if dtype in (np.float32, np.float64)
             else rng.integers(0, 250, shape)).astype(dtype)
    roi = np.ones(shape, bool)
    roi[..., :2] = False
    roi[(rng.random(shape) < 0.05)] = False
    # one of the image and the ROI (by case), then both
    alone = [(None, image), (roi, None)][CASES.index(
        (shape, chunks, image_chunks, roi_chunks, spacing, dtype))]
    with dask.config.set(scheduler="synchronous"):
        for given_roi, given_image in (alone, (roi, image)):
            got = measure_in_chunks(
                da.from_array(lab, chunks=chunks), spacing=spacing, unit="mm",
                image=None if given_image is None else da.from_array(image, image_chunks),
                roi=None if given_roi is None else da.from_array(given_roi, roi_chunks),
                block_voxels=0)  # each chunk alone: every seam is one
            expected = measure_regions(lab, spacing=spacing, unit="mm", image=given_image,
                                       roi=given_roi, thickness=False)
            _assert_same(got.table, expected)
        # the global figures: the counts of the chunks against the whole array's
        rows = np.ones(len(got.table), bool)
        rows[::2] = False
        mask = da.from_array(roi, roi_chunks)
        figures = figures_from_counts(got.table.select(rows), got.roi_counts(rows, mask),
                                      spacing=spacing, unit="mm")
    kept = got.table["label"][rows]
    whole = global_figures(expected.select(rows), labels=np.where(np.isin(lab, kept), lab, 0),
                           spacing=spacing, unit="mm", roi=roi)
    assert figures.pop("units") == whole.pop("units")
    assert figures == pytest.approx(whole, rel=1e-12)
    assert got.roi_voxels == roi.sum()


def test_against_regionprops_in_thin_chunks():
    import dask
    from skimage.measure import regionprops_table

    rng = np.random.default_rng(7)
    shape, spacing = (12, 10, 11), (1.5, 0.5, 2.0)
    lab = _labels(rng, shape)
    image = rng.normal(100, 10, shape).astype(np.float32)
    ref = regionprops_table(lab, intensity_image=image, spacing=spacing, properties=(
        "label", "num_pixels", "area", "centroid", "bbox", "intensity_min", "intensity_mean",
        "intensity_max", "axis_major_length", "axis_minor_length"))
    for chunks in ((12, 10, 1), (5, 3, 4)):
        with dask.config.set(scheduler="synchronous"):
            table = measure_in_chunks(da.from_array(lab, chunks=chunks), spacing=spacing,
                                      image=da.from_array(image, chunks=chunks),
                                      block_voxels=0).table
        assert table["label"].tolist() == ref["label"].tolist()
        assert table["voxel_count"].tolist() == ref["num_pixels"].tolist()
        np.testing.assert_allclose(table["volume"], ref["area"], rtol=1e-12)
        for i, a in enumerate("zyx"):
            np.testing.assert_allclose(table[f"centroid_{a}"], ref[f"centroid-{i}"],
                                       rtol=1e-10)
            assert table[f"bbox_min_{a}"].tolist() == ref[f"bbox-{i}"].tolist()
            assert (table[f"bbox_max_{a}"] + 1).tolist() == ref[f"bbox-{i + 3}"].tolist()
        for ours, theirs in (("intensity_min", "intensity_min"),
                             ("intensity_mean", "intensity_mean"),
                             ("intensity_max", "intensity_max"),
                             ("major_axis", "axis_major_length"),
                             ("minor_axis", "axis_minor_length")):
            np.testing.assert_allclose(table[ours], ref[theirs], rtol=1e-5, atol=1e-9)
