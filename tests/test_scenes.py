"""Regression checks of the synthetic scenes and the bundled sample volumes.

Everything here runs on **invented data** (cavitas.scenes): these tests check that the
generators keep their stated semantics and that the bundled samples regenerate bit for bit.
They are regression checks, not check values for the segmentation. Where a measurement
uses an outside method, the source is named beside it.
"""

from __future__ import annotations

import gzip
import hashlib
import importlib.util
import sys
from pathlib import Path

import numpy as np
import pytest
import tifffile
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import ndimage as ndi
from skimage.segmentation import clear_border

from cavitas import ParameterError
from cavitas.scenes import Scene, capsules, cell_sheet, foam
from cavitas.scenes._common import illumination

SAMPLES = Path(__file__).resolve().parents[1] / "sample_volumes"

#: Small scenes of each kind, quick to make.
SMALL = {
    "foam3d": lambda **kw: foam((40, 40, 40), cells=20, **kw),
    "foam2d": lambda **kw: foam((96, 96), cells=20, **kw),
    "capsules": lambda **kw: capsules((40, 64, 64), count=4, nested=1, touching=1, **kw),
    "cell_sheet": lambda **kw: cell_sheet((128, 128), cells=30, **kw),
}
VORONOI = ("foam3d", "foam2d", "cell_sheet")


def _touching_pairs(truth: np.ndarray) -> set[tuple[int, int]]:
    """Pairs of different labels > 0 that touch, with full connectivity."""
    pairs = set()
    for offset in np.ndindex(*(3,) * truth.ndim):
        shift = [o - 1 for o in offset]
        if all(s == 0 for s in shift):
            continue
        src = tuple(slice(max(-s, 0), n - max(s, 0)) for s, n in zip(shift, truth.shape,
                                                                        strict=True))
        dst = tuple(slice(max(s, 0), n - max(-s, 0)) for s, n in zip(shift, truth.shape,
                                                                        strict=True))
        a, b = truth[src], truth[dst]
        hit = (a > 0) & (b > 0) & (a != b)
        pairs.update(zip(a[hit].tolist(), b[hit].tolist(), strict=True))
    return {(min(p), max(p)) for p in pairs}


# -- determinism and types --------------------------------------------------------------

@pytest.mark.parametrize("kind", sorted(SMALL))
def test_same_seed_same_scene(kind):
    # common practice: a seeded numpy Generator makes the scene reproducible
    a, b, c = SMALL[kind](seed=3), SMALL[kind](seed=3), SMALL[kind](seed=4)
    assert isinstance(a, Scene)
    assert a.image.dtype == np.float32 and a.truth.dtype == np.int32
    assert a.image.shape == a.truth.shape
    np.testing.assert_array_equal(a.image, b.image)
    np.testing.assert_array_equal(a.truth, b.truth)
    assert a.border_labels == b.border_labels and a.description == b.description
    assert not np.array_equal(a.image, c.image)
    assert a.unit == "µm" and len(a.spacing) == a.image.ndim
    assert a.volume.spacing == a.spacing and a.volume.shape == a.image.shape
    assert "invented data" in a.description


@pytest.mark.parametrize("kind", sorted(SMALL))
def test_labels_are_consecutive(kind):
    truth = SMALL[kind](seed=1).truth
    assert np.array_equal(np.unique(truth), np.arange(truth.max() + 1))


# -- truth semantics --------------------------------------------------------------------

@pytest.mark.parametrize("kind", sorted(SMALL))
def test_walls_are_zero_in_truth(kind):
    # With no blur, noise or ramp the image is the clean wall profile, whose 0.5 level is
    # the wall surface by construction (regression of the generators' own definition).
    scene = SMALL[kind](seed=2, blur=0.0, noise=0.0)
    wall = scene.image > 0.5
    # only a host capsule's label may cover wall voxels: those of the capsule inside it
    hosts = {max(pair, key=lambda label: np.sum(scene.truth == label))
             for pair in _touching_pairs(scene.truth)}
    assert set(np.unique(scene.truth[wall]).tolist()) <= {0} | hosts
    assert np.all(scene.truth[wall & ~np.isin(scene.truth, list(hosts))] == 0)
    if kind in VORONOI:  # the cells fill the scan: everything not wall is a chamber
        assert not hosts
        assert np.all(scene.truth[scene.image < 0.5] > 0)
    else:
        assert len(hosts) == 1


@pytest.mark.parametrize("kind", VORONOI)
def test_chambers_never_touch(kind):
    scene = SMALL[kind](seed=5)
    assert _touching_pairs(scene.truth) == set()
    # each chamber is one piece (full connectivity, the cavity side of faces-only walls)
    pieces = ndi.label(scene.truth > 0, structure=np.ones((3,) * scene.truth.ndim))[1]
    assert pieces == scene.n_labels


def test_foam_fills_the_scan_and_flags_border_cells():
    scene = foam((64, 64, 64), cells=60, seed=6)
    # reference: skimage.segmentation.clear_border removes exactly the labels on the border
    kept = np.unique(clear_border(scene.truth))
    cut = sorted(set(range(1, scene.n_labels + 1)) - set(kept.tolist()))
    assert list(scene.border_labels) == cut
    assert 0 < len(cut) < scene.n_labels
    assert scene.n_labels <= 60


@pytest.mark.parametrize("shape", [(48, 48, 48), (128, 128)])
@pytest.mark.parametrize("broken", [1, 3])
def test_broken_walls_merge_two_cells_each(shape, broken):
    whole = foam(shape, cells=30, seed=8)
    holed = foam(shape, cells=30, seed=8, broken_walls=broken)
    assert whole.n_labels - holed.n_labels == broken
    # every chamber of the holed foam is the union of whole chambers (merges only)
    pairs = {(int(a), int(b)) for a, b in zip(holed.truth[holed.truth > 0],
                                                whole.truth[holed.truth > 0], strict=True)
             if b > 0}
    parents = {}
    for new, old in pairs:
        parents.setdefault(old, set()).add(new)
    assert all(len(v) == 1 for v in parents.values())
    merged = [k for k in set(n for n, _ in pairs)
              if sum(1 for n, _ in pairs if n == k) == 2]
    assert len(merged) == broken
    assert _touching_pairs(holed.truth) == set()


def test_broken_walls_too_many():
    with pytest.raises(ParameterError, match="broken_walls"):
        foam((32, 32, 32), cells=6, broken_walls=10)


def test_nested_capsules_follow_the_innermost_convention():
    count, nested = 6, 2
    scene = capsules((48, 96, 96), count=count, nested=nested, touching=1, seed=9)
    truth = scene.truth
    assert scene.n_labels == count + nested
    assert scene.border_labels == ()
    pairs = _touching_pairs(truth)
    # the only labels that touch are inner capsules and their hosts
    assert len(pairs) == nested
    for a, b in pairs:
        fill_a = ndi.binary_fill_holes(truth == a)
        fill_b = ndi.binary_fill_holes(truth == b)
        outer, inner = (a, b) if fill_a.sum() > fill_b.sum() else (b, a)
        # the host's label fills the space between the shells, inner shell included: its
        # only hole is the inner capsule's interior (reference: scipy.ndimage hole filling)
        np.testing.assert_array_equal(ndi.binary_fill_holes(truth == outer),
                                      (truth == outer) | (truth == inner))
        # the inner interior borders only the host's label (its shell carries that label)
        ring = ndi.binary_dilation(truth == inner, np.ones((3, 3, 3))) & (truth != inner)
        assert set(np.unique(truth[ring]).tolist()) == {outer}
        # the host's own shell is 0
        ring = ndi.binary_dilation(fill_a | fill_b, np.ones((3, 3, 3))) & ~(fill_a | fill_b)
        assert np.all(truth[ring] == 0)


def test_touching_capsules_share_a_fused_wall():
    scene = capsules((40, 64, 64), count=2, nested=0, touching=1, noise=0.0, blur=0.0,
                     seed=1)
    wall = scene.image > 0.5
    # the two shells are one connected wall (reference: scipy.ndimage.label)
    assert ndi.label(wall, structure=np.ones((3, 3, 3)))[1] == 1
    assert scene.n_labels == 2 and _touching_pairs(scene.truth) == set()


@pytest.mark.parametrize("kind", ["foam3d", "capsules"])
def test_wall_thickness_in_voxels(kind):
    # A flat wall of thickness T has T voxels across it; along a random line the count is
    # >= T. Check the median wall run along x is within a voxel of the requested 2.5 to 3.
    scene = SMALL[kind](seed=4, blur=0.0, noise=0.0)
    wall = scene.image > 0.5
    runs = []
    for row in wall.reshape(-1, wall.shape[-1]):
        edges = np.flatnonzero(np.diff(np.concatenate([[0], row.astype(np.int8), [0]])))
        runs.extend((edges[1::2] - edges[::2])[(edges[::2] > 0) & (edges[1::2] < row.size)])
    assert 2 <= np.median(runs) <= 4


# -- noise and illumination --------------------------------------------------------------

def _donoho_johnstone_sigma(image: np.ndarray) -> float:
    """Noise σ from the finest diagonal Haar wavelet coefficients: median(|d|) / 0.6745
    (Donoho & Johnstone 1994, Biometrika 81:425, the MAD estimator that
    skimage.restoration.estimate_sigma also uses, written plainly here with the Haar
    wavelet so no wavelet package is needed)."""
    d = image.astype(np.float64)
    for axis in range(d.ndim):
        n = d.shape[axis] // 2 * 2
        even = np.take(d, np.arange(0, n, 2), axis=axis)
        odd = np.take(d, np.arange(1, n, 2), axis=axis)
        d = (even - odd) / np.sqrt(2.0)
    return float(np.median(np.abs(d)) / 0.6744897501960817)


@pytest.mark.parametrize("ramp", [1.0, 3.0])
@pytest.mark.parametrize("noise", [0.1, 0.3])
@pytest.mark.parametrize("kind", sorted(SMALL))
def test_noise_level_is_measured_back(kind, noise, ramp):
    scene = SMALL[kind](seed=7, noise=noise, ramp=ramp)
    # exact: the noise is added last, so the difference to the noise-free scene is pure
    # noise; its standard deviation has relative standard error 1/sqrt(2n) < 0.5 % here
    clean = SMALL[kind](seed=7, noise=0.0, ramp=ramp)
    assert np.std(scene.image - clean.image) == pytest.approx(noise, rel=0.02)
    # blind: the wavelet MAD estimate on the image alone. Its sampling error is ~1 % for
    # these sizes; the image's own structure (blurred walls) leaks into the finest band
    # and can only raise the estimate, most for thin 2D membranes at low noise: allow
    # -3 % / +10 % (the bias measured on these scenes is at most +6 %).
    assert 0.97 * noise <= _donoho_johnstone_sigma(scene.image) <= 1.10 * noise


@pytest.mark.parametrize("ramp", [0.5, 3.0])
@pytest.mark.parametrize("kind", sorted(SMALL))
def test_ramp_ratio_is_measured_back(kind, ramp):
    flat = SMALL[kind](seed=2, noise=0.0)
    walls = flat.image > 0.7
    # position along the main diagonal, 0 at the first corner, 1 at the opposite one
    t = sum(np.indices(flat.image.shape)[a] / (n - 1)
            for a, n in enumerate(flat.image.shape)) / flat.image.ndim
    for noise, tolerance in ((0.0, 1e-4), (0.05, 0.05)):
        lit = SMALL[kind](seed=2, noise=noise, ramp=ramp)
        gain = lit.image[walls] / flat.image[walls]
        slope, intercept = np.polyfit(t[walls], gain, 1)  # least squares (numpy.polyfit)
        # with noise: the fit's standard error on ~1500 wall pixels (smallest scene) is
        # about 2 %; 5 % is 2.5 standard errors
        assert intercept == pytest.approx(1.0, abs=tolerance)
        assert (intercept + slope) / intercept == pytest.approx(ramp, rel=tolerance)


@pytest.mark.parametrize("kind", sorted(SMALL))
def test_dark_walls_are_the_inverse(kind):
    bright = SMALL[kind](seed=3, noise=0.0, ramp=2.0)
    dark = SMALL[kind](seed=3, noise=0.0, ramp=2.0, walls="dark")
    gain = illumination(bright.image.shape, 2.0)
    np.testing.assert_allclose(bright.image + dark.image, gain, atol=1e-5)
    np.testing.assert_array_equal(bright.truth, dark.truth)


@settings(max_examples=8)
@given(seed=st.integers(0, 2**32 - 1), cells=st.integers(3, 25),
       thickness=st.floats(2.0, 3.5), spread=st.floats(0.0, 0.1))
def test_foam_truth_properties(seed, cells, thickness, spread):
    # walls at least sqrt(3) voxels thick separate the chambers even diagonally (a digital
    # plane of normal n needs thickness >= |n|_1 <= sqrt(3) to be 26-separating; common
    # digital-geometry fact, from memory)
    scene = foam((32, 40, 36), cells=cells, wall_thickness=thickness,
                 thickness_spread=spread, noise=0.0, blur=0.0, seed=seed)
    assert 1 <= scene.n_labels <= cells
    assert _touching_pairs(scene.truth) == set()
    assert np.all(scene.truth[scene.image > 0.5] == 0)


@pytest.mark.parametrize("call, match", [
    (lambda: foam((32, 32, 32), walls="grey"), "walls"),
    (lambda: foam((32, 32, 32), noise=-1), "noise"),
    (lambda: foam((4, 32, 32)), "shape"),
    (lambda: foam((32, 32, 32), spacing=(1.0, 1.0)), "spacing"),
    (lambda: foam((32, 32, 32), cells=2.5), "cells"),
    (lambda: capsules((32, 64, 64), count=2, nested=3), "nested"),
    (lambda: capsules((32, 64, 64), count=3, touching=2), "touching"),
    (lambda: capsules((16, 16, 16), count=40, nested=0, touching=0), "capsule"),
    (lambda: cell_sheet((64, 64, 64)), "shape"),
])
def test_bad_parameters_raise(call, match):
    with pytest.raises(ParameterError, match=match):
        call()


# -- the bundled samples ----------------------------------------------------------------

def _generate_module():
    name = "cavitas_sample_generate"
    if name not in sys.modules:  # dataclasses need their module registered
        spec = importlib.util.spec_from_file_location(name, SAMPLES / "generate.py")
        sys.modules[name] = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(sys.modules[name])
    return sys.modules[name]


@pytest.mark.slow
def test_samples_regenerate_bit_for_bit(tmp_path):
    generate = _generate_module()
    assert generate.main(["--out", str(tmp_path)]) == 0
    for sample in generate.SAMPLES:
        for name in sample.files:
            # digests, so that a failure reports quickly instead of diffing megabytes
            made = hashlib.sha256((tmp_path / name).read_bytes()).hexdigest()
            shipped = hashlib.sha256((SAMPLES / name).read_bytes()).hexdigest()
            assert made == shipped, name


def test_sample_files_carry_no_time_stamp():
    # gzip header (RFC 1952): bytes 4..7 are MTIME, 0 = none; TIFF tag 306 is DateTime
    for name in ("foam.nii.gz", "foam_truth.nii.gz"):
        header = (SAMPLES / name).read_bytes()[:10]
        assert header[:2] == b"\x1f\x8b" and header[4:8] == b"\x00\x00\x00\x00", name
        with gzip.open(SAMPLES / name) as stream:
            assert stream.read(4) == (348).to_bytes(4, "little")  # NIfTI-1 sizeof_hdr
    for name in ("capsules.tif", "capsules_truth.tif", "cell_sheet.tif",
                 "cell_sheet_truth.tif"):
        with tifffile.TiffFile(SAMPLES / name) as tif:
            assert all("DateTime" not in page.tags for page in tif.pages), name


def test_sample_geometry_and_truth():
    generate = _generate_module()
    nib = pytest.importorskip("nibabel")
    image = nib.load(SAMPLES / "foam.nii.gz")
    truth = np.asarray(nib.load(SAMPLES / "foam_truth.nii.gz").dataobj).T
    # NIfTI stores (x, y, z): zooms reversed (nibabel)
    assert image.header.get_zooms()[:3] == tuple(reversed(generate.FOAM["spacing"]))
    assert image.get_data_dtype() == np.uint16 and image.shape[::-1] == truth.shape
    for stem, spacing in (("capsules", generate.CAPSULES["spacing"]),
                          ("cell_sheet", generate.SHEET["spacing"])):
        with tifffile.TiffFile(SAMPLES / f"{stem}.tif") as tif:
            ij = tif.imagej_metadata
            xres = tif.pages[0].tags["XResolution"].value
            assert xres[1] / xres[0] == pytest.approx(spacing[-1])  # ImageJ: pixels per unit
            assert ij["unit"] == "um"
            if len(spacing) == 3:
                assert ij["spacing"] == pytest.approx(spacing[0])
            data = tif.asarray()
        labels = tifffile.imread(SAMPLES / f"{stem}_truth.tif")
        assert data.dtype == np.uint8 and labels.dtype == np.uint16
        assert data.shape == labels.shape
    for path in SAMPLES.iterdir():
        if path.suffix in (".tif", ".gz"):
            assert path.stat().st_size < 2_000_000, path.name
