"""The split rule: an inner wall with a wide opening leaves one region, a complete one two.

Phantoms are built here from simple geometry (a box with a dividing wall, with or without a
window; a ring inside a ring), common practice with no published source: two chambers joined
by an opening half as wide as the wall form one connected pore (the expected answer is
``scipy.ndimage.label`` of the interior, a general-purpose reference library), two chambers
separated by a complete wall are two components. Each chamber has a shallow bowl of
staining (darkest at its centre, 0.07 of the wall contrast at the opening, like the
holes of the bundled foam), so each side
has its own core and the opening stands above the noise threshold: without the rule the
two sides would be two chambers.
"""

import numpy as np
import pytest
from scipy import ndimage as ndi

from cavitas import ParameterError
from cavitas.cli import main
from cavitas.cubical._tree import CavityTree
from cavitas.segment import SegmentParams, segment
from cavitas.segment._select import split_rule
from cavitas.segment._tree import prune


def _divided_box(ndim: int, window: bool, dtype=np.float64, inner: float = 1.0) -> np.ndarray:
    """A box (wall 1, three voxels thick) split in two along the last axis by a wall of
    brightness ``inner``, with a window over the middle half of it when ``window``."""
    shape = (48, 80) if ndim == 2 else (24, 40, 80)
    grid = np.indices(shape).astype(float)
    img = np.zeros(shape)
    rim = np.ones(shape, bool)
    rim[(slice(3, -3),) * ndim] = False
    img[rim] = 1.0
    wall = (slice(3, -3),) * (ndim - 1) + (slice(38, 41),)
    img[wall] = inner
    if window:
        quarter = [s // 4 for s in shape[:-1]]
        hole = tuple(slice(q, s - q) for q, s in zip(quarter, shape[:-1], strict=True))
        img[hole + (slice(38, 41),)] = 0.0
    centre = [s / 2 for s in shape[:-1]]
    d2 = np.minimum(*(sum((g - c) ** 2 for g, c in zip(grid, [*centre, cx], strict=True))
                      for cx in (21.0, 58.0)))
    interior = img == 0  # bowls: 0.0002 * squared distance to the nearer side's centre
    img[interior] = 0.0002 * d2[interior]
    if np.issubdtype(dtype, np.integer):
        return np.rint(img * 1000).astype(dtype)
    return img.astype(dtype)


def _scale(dtype) -> float:
    return 1000.0 if np.issubdtype(dtype, np.integer) else 1.0


@pytest.mark.parametrize("ndim", [2, 3])
@pytest.mark.parametrize("dtype", [np.float32, np.uint16])
def test_wall_with_a_window_leaves_one_region(ndim, dtype):
    img = _divided_box(ndim, window=True, dtype=dtype)
    # Reference: the voxels below 0.9 of the wall form one connected component
    # (scipy.ndimage.label), so a user expects one region.
    _, n_ref = ndi.label(img < 0.9 * _scale(dtype))
    assert n_ref == 1
    seg = segment(img, min_persistence=0.03 * _scale(dtype))
    assert seg.labels.max() == 1
    left = (img.shape[0] // 2,) * (ndim - 1) + (21,)
    right = left[:-1] + (58,)
    assert seg.labels[left] == seg.labels[right] == 1
    assert seg.params["splits_joined"] == 1
    # Without the rule the same image gives two chambers: the rule is what joins them.
    assert segment(img, min_persistence=0.03 * _scale(dtype), split_fraction=0).labels.max() == 2


@pytest.mark.parametrize("ndim", [2, 3])
@pytest.mark.parametrize("dtype", [np.float32, np.uint16])
@pytest.mark.parametrize("inner", [1.0, 0.2])
def test_complete_wall_keeps_two_regions(ndim, dtype, inner):
    # A complete inner wall, as bright as the rim or at 0.2 of it (the Shepp-Logan
    # ventricles' ratio), separates two components
    # (common practice: scipy.ndimage.label of the interior gives two).
    img = _divided_box(ndim, window=False, dtype=dtype, inner=inner)
    _, n_ref = ndi.label(img < 0.9 * inner * _scale(dtype))
    assert n_ref == 2
    seg = segment(img, min_persistence=0.03 * _scale(dtype))
    left = (img.shape[0] // 2,) * (ndim - 1) + (21,)
    right = left[:-1] + (58,)
    assert seg.labels.max() == 2
    assert {int(seg.labels[left]), int(seg.labels[right])} == {1, 2}
    assert seg.params["splits_joined"] == 0


def test_thin_noisy_unevenly_lit_wall_keeps_two_regions(rng):
    # Regression on an invented scene (box phantom, inner wall 2 pixels thick, noise 0.3 of
    # the contrast, illumination ramp 3x, automatic mode, fixed seed): the complete wall
    # stays, and the rule joins nothing.
    img = np.zeros((64, 96))
    img[:4], img[-4:], img[:, :4], img[:, -4:] = 1, 1, 1, 1
    img[4:-4, 47:49] = 1
    img = img * np.linspace(1, 3, 96)[None, :] + rng.normal(0, 0.3, img.shape)
    seg = segment(img)
    assert seg.params["splits_joined"] == 0
    assert seg.labels.max() == 2 and seg.labels[32, 24] != seg.labels[32, 72]


def test_ring_inside_a_ring_stays_two():
    # A capsule inside a capsule: the inner one has its own complete (dimmer) wall.
    img = np.zeros((40, 40))
    img[3:37, 3:37] = 1.0
    img[6:34, 6:34] = 0.0
    img[12:28, 12:28] = 0.7
    img[15:25, 15:25] = 0.0
    yy, xx = np.indices(img.shape)
    img += np.where(img == 0, 0.0002 * ((yy - 20) ** 2 + (xx - 20) ** 2), 0)
    seg = segment(img, min_persistence=0.03)
    assert seg.labels.max() == 2 and seg.labels[20, 20] != seg.labels[8, 8]


def _tree(parent, core_level, breach_level):
    n = len(parent)
    return CavityTree(shape=(n,), walls="bright", connectivity=1,
                      core=np.arange(n) - (np.arange(n) == 0),
                      core_level=np.asarray(core_level, float),
                      breach=np.asarray([-1, *range(10, 10 + n - 1)]),
                      breach_level=np.asarray(breach_level, float),
                      parent=np.asarray(parent))


def test_split_rule_decides_parents_first():
    # Hand-calculated: node 1 opens to the outside at 10 (core 0); node 2 is a lobe of 1
    # (opening at 1, core 0.5: 0.5 < 0.5 * 9.5); node 3 is a lobe of node 2 (opening at
    # 0.9, core 0.6): tested against node 1's level 10, not node 2's 1, so it is dropped
    # too (0.3 < 0.5 * 9.4); node 4 splits from 2 through a wall at 8 (7.2 >= 0.5 * 9.2)
    # and is kept, attached to node 1.
    tree = _tree([-1, 0, 1, 2, 2], [-np.inf, 0.0, 0.5, 0.6, 0.8],
                 [np.nan, 10.0, 1.0, 0.9, 8.0])
    keep = split_rule(tree, np.ones(5, bool), 0.5)
    assert keep.tolist() == [True, True, False, False, True]
    assert split_rule(tree, np.ones(5, bool), 0.0).all()


def test_prune_attaches_kept_children_of_dropped_nodes():
    # Hand-calculated on a chain 1 <- 2 <- 3 with node 2 dropped (ranks = voxel indices):
    # node 3 reaches node 1 where node 2 merged (rank 11), so both chambers close there;
    # their enclosure forms at 11 and lasts until node 1 merges at rank 19.
    tree = CavityTree(shape=(20,), walls="bright", connectivity=1,
                      core=np.array([-1, 0, 1, 2]), core_level=np.array([-np.inf, 0, 1, 2.0]),
                      breach=np.array([-1, 19, 11, 5]),
                      breach_level=np.array([np.nan, 19, 11, 5.0]),
                      parent=np.array([-1, 0, 1, 2]))
    hier = prune(tree, np.array([True, True, False, True]), np.arange(20),
                 lambda r: np.asarray(r, float), 1.0)
    assert hier.node.tolist() == [1, 3, 1]
    assert hier.close_rank.tolist() == [11, 11, 19]
    assert hier.formed_rank.tolist() == [0, 2, 11]
    assert hier.parent.tolist() == [3, 3, 0]


@pytest.mark.parametrize("bad", [-0.1, 1.5, "x", True])
def test_split_fraction_is_checked(bad):
    with pytest.raises(ParameterError, match="split_fraction"):
        SegmentParams(split_fraction=bad)


def test_split_fraction_option_reaches_the_parameters(tmp_path):
    from cavitas.io import read, write

    path = tmp_path / "box.tif"
    write(path, _divided_box(2, window=True, dtype=np.uint16), spacing=(1.0, 1.0))
    out = tmp_path / "out"
    assert main(["segment", str(path), "-o", str(out), "--min-persistence", "50",
                 "--split-fraction", "0", "--no-report", "-q"]) == 0
    assert int(np.asarray(read(out / "labels.tif").data).max()) == 2


def _two_cells(radius: float, noise: float, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Two 12-voxel cubic cells (walls 3 voxels, value 1; interiors 0) sharing a wall with a
    round hole of ``radius``, plus Gaussian noise; returns (noise-free, noisy float32)."""
    t, inner = 3, 12
    side = inner + 2 * t
    img = np.ones((side, side, 2 * inner + 3 * t))
    img[t:-t, t:-t, t:t + inner] = 0
    img[t:-t, t:-t, 2 * t + inner:2 * t + 2 * inner] = 0
    zz, yy = np.indices((side, side))
    hole = np.hypot(zz - (side - 1) / 2, yy - (side - 1) / 2) <= radius
    img[:, :, t + inner:2 * t + inner][hole] = 0.0
    img = np.pad(img, 4)
    noisy = img + np.random.default_rng(seed).normal(0, noise, img.shape)
    return img, noisy.astype(np.float32)


@pytest.mark.parametrize("seed", [0, 1])
def test_hole_closed_by_detection_smoothing_leaves_one_region(seed):
    # Reference: scipy.ndimage.label of the noise-free interior gives one cell (plus the
    # medium around the box): the two halves are one pore through a hole of radius 5.
    clean, img = _two_cells(radius=5, noise=0.3, seed=seed)
    _, n_ref = ndi.label(clean < 0.5)
    assert n_ref == 2
    # One region whatever the detection scale: at fine scales the detection sees the hole,
    # at coarse ones the fine-scale contact (or the evidence rules) joins the halves.
    for smooth in (None, 1.0, 2.0, 3.0):
        assert segment(img, smooth=smooth).labels.max() == 1


def test_complete_wall_between_two_noisy_cells_stays():
    # Reference: scipy.ndimage.label of the noise-free interior gives two cells.
    clean, img = _two_cells(radius=0, noise=0.3, seed=0)
    _, n_ref = ndi.label(clean < 0.5)
    assert n_ref == 3
    seg = segment(img)
    assert seg.labels.max() == 2 and seg.params["perforated_walls"] == 0


def test_chamber_contacts_match_plain_counting(rng):
    # Reference: counting face-adjacent label pairs one axis at a time with numpy (common
    # practice), on maps taller than one slab.
    from collections import Counter

    from cavitas.segment._perforation import chamber_contacts

    for shape in [(70, 9, 8), (5, 6), (40, 3)]:
        labels = rng.integers(0, 6, shape)
        image = rng.random(shape)
        pairs, faces, _ = chamber_contacts(labels, 4, image)
        expected = Counter()
        for axis in range(labels.ndim):
            a = np.moveaxis(labels, axis, 0)
            x, y = a[:-1].ravel(), a[1:].ravel()
            ok = (x != y) & (x > 0) & (y > 0) & (x <= 4) & (y <= 4)
            expected.update(zip(np.minimum(x[ok], y[ok]).tolist(),
                                np.maximum(x[ok], y[ok]).tolist(), strict=True))
        assert dict(zip(map(tuple, pairs.tolist()), faces.tolist(), strict=True)) == expected
