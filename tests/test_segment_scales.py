"""Scale per region (cavitas.segment._scales): what another detection scale may change.

Constructed cases (hand-made label maps of a base scale and of other scales), checked
against the rule's statement: a base region holding two clear cells of a finer scale is
replaced by them with their own scale's values; a weak piece, a coarser scale or a region
mostly covered already changes nothing; ids above the chambers move up.
"""

import numpy as np

from cavitas.segment._result import ChamberValues
from cavitas.segment._scales import (
    MIN_CLARITY,
    Contribution,
    Plan,
    ScaleSeeds,
    merge,
    plan,
)


def _values(cores, persistence, scale, threshold=1.0):
    n = len(cores)
    return ChamberValues(birth=np.asarray(persistence, float), death=np.zeros(n),
                         breach_voxel=np.asarray(cores), core_voxel=np.asarray(cores),
                         threshold=np.full(n, threshold), scale=np.full(n, scale),
                         node=np.full(n, -1))


def _two_cells():
    """Base: chamber 1 covers two cells (columns 1-3 and 5-7) and the wall between them
    (column 4); chamber 2 is a third cell; 3 is a border-cut piece."""
    base = np.zeros((5, 14), np.int64)
    base[1:4, 1:8] = 1
    base[1:4, 9:12] = 2
    base[:, 13] = 3
    finer = np.zeros_like(base)
    finer[1:4, 1:4] = 1
    finer[1:4, 5:8] = 2
    finer[1:4, 9:12] = 3
    return base, finer


def test_two_cells_only_a_finer_scale_separates_become_two_regions():
    base, finer = _two_cells()
    cores = [np.ravel_multi_index(p, base.shape) for p in [(2, 2), (2, 6), (2, 10)]]
    other = Contribution(Plan(np.array([0.5, 0.5]), [1]), finer,
                         _values(cores, [3.0, 2.0, 4.0], 0.1), np.array([7.0, 8.0, 9.0]))
    base_values = _values(cores[::2], [5.0, 5.0], 0.4)
    merged = merge(base, base_values, np.array([1.0, 2.0]), np.array([0, 0]), None, [other])
    # the first piece keeps id 1, the second gets the first free chamber id (3); the cut
    # piece moves from 3 to 4
    assert merged.summary == {"split": 1, "pieces": 2, "added": 0}
    assert merged.shift == 1
    assert set(np.unique(merged.labels[1:4, 1:4])) == {1}
    assert set(np.unique(merged.labels[1:4, 5:8])) == {3}
    assert not merged.labels[:, 4].any()          # the wall between them
    assert set(np.unique(merged.labels[1:4, 9:12])) == {2}
    assert set(np.unique(merged.labels[:, 13])) == {4}
    # each piece carries its own scale's values; the untouched chamber keeps the base's
    assert merged.chambers.scale.tolist() == [0.1, 0.4, 0.1]
    assert merged.chambers.birth.tolist() == [3.0, 5.0, 2.0]
    assert merged.level.tolist() == [7.0, 2.0, 8.0]


def test_a_piece_barely_above_its_threshold_separates_nothing():
    base, finer = _two_cells()
    cores = [np.ravel_multi_index(p, base.shape) for p in [(2, 2), (2, 6)]]
    weak = 0.99 * MIN_CLARITY
    other = Contribution(Plan(np.array([0.5, 0.5]), [1]), finer,
                         _values(cores, [3.0, weak], 0.1), np.ones(2))
    merged = merge(base, _values(cores[:1] * 2, [5.0, 5.0], 0.4), np.ones(2),
                   np.array([0, 0]), None, [other])
    assert np.array_equal(merged.labels, base)
    assert merged.summary["split"] == 0


def test_plan_asks_the_next_finer_scale_for_separations():
    base, _ = _two_cells()
    two = np.array([np.ravel_multi_index(p, base.shape) for p in [(2, 2), (2, 6)]])
    clear = np.full(2, 2.0)
    size = np.full(2, 9)
    finest = ScaleSeeds(np.array([0.0, 0.0]), two, clear, size)
    finer = ScaleSeeds(np.array([0.5, 0.5]), two, clear, size)
    coarser = ScaleSeeds(np.array([2.0, 2.0]), two, clear, size)
    plans = plan(base, 2, np.array([1.0, 1.0]), [finest, finer, coarser])
    assert [(float(p.sigma[0]), p.separates) for p in plans] == [(0.5, [1])]
    # unclear seeds, and seeds of cavities too small to be a region, count for nothing
    assert plan(base, 2, np.array([1.0, 1.0]),
                [ScaleSeeds(np.array([0.5, 0.5]), two, np.full(2, 1.0), size)]) == []
    assert plan(base, 2, np.array([1.0, 1.0]), [finer], min_voxels=10) == []


def test_a_region_seen_only_at_another_scale_is_added_where_it_is_free():
    base = np.zeros((6, 12), np.int64)
    base[1:5, 1:5] = 1
    other_labels = np.zeros_like(base)
    other_labels[1:5, 1:5] = 1          # the base's own cell
    other_labels[1:5, 7:11] = 2         # a cell the base missed
    other_labels[1:4, 2:6] = 3          # three quarters on the base's cell: not added
    cores = [np.ravel_multi_index(p, base.shape) for p in [(2, 2), (2, 8), (2, 5)]]
    other = Contribution(Plan(np.array([2.0, 2.0]), [], adds=True), other_labels,
                         _values(cores, [3.0, 3.0, 3.0], 0.6), np.ones(3))
    merged = merge(base, _values(cores[:1], [4.0], 0.3), np.ones(1), np.array([0]), None,
                   [other], min_voxels=4)
    assert merged.summary == {"split": 0, "pieces": 0, "added": 1}
    assert set(np.unique(merged.labels[1:5, 7:11])) == {2}
    assert merged.added.sum() == 16
    assert merged.chambers.scale.tolist() == [0.3, 0.6]
    # too small for the base's typical region: not added
    small = merge(base, _values(cores[:1], [4.0], 0.3), np.ones(1), np.array([0]), None,
                  [other], min_voxels=17)
    assert small.summary["added"] == 0
