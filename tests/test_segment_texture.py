"""A split must stand out from the texture of its own region (cavitas.segment._texture).

Reference: the definitions, computed the slow way on random elder-rule trees (every node's
insignificant descendants found by walking each node's ancestor chain); the real-scan
figures that set the factor are in the module notes and ``bench/real_scans.py``.
"""

import numpy as np
import pytest

from cavitas.segment._texture import SPLIT_OVER_CROWD, local_crowd, texture_splits


def _random_tree(rng, n):
    """An elder-rule tree: node 0 the outside, ``parent[i] < i``."""
    parent = np.r_[-1, [rng.integers(0, i) for i in range(1, n)]]
    persistence = np.r_[np.inf, rng.exponential(1.0, n - 1)]
    significant = np.r_[False, rng.random(n - 1) < 0.3]
    return parent, persistence, significant


def _crowd_by_definition(parent, persistence, significant):
    """Largest persistence of the insignificant nodes whose ancestor chain reaches each
    node before any significant node."""
    crowd = np.zeros(parent.size)
    for i in range(1, parent.size):
        if significant[i]:
            continue
        node = parent[i]
        while True:
            crowd[node] = max(crowd[node], persistence[i])
            if node <= 0 or significant[node]:
                break
            node = parent[node]
    return crowd


@pytest.mark.parametrize("seed", range(5))
def test_crowd_matches_its_definition(seed):
    rng = np.random.default_rng(seed)
    parent, persistence, significant = _random_tree(rng, 300)
    assert np.array_equal(local_crowd(parent, persistence, significant),
                          _crowd_by_definition(parent, persistence, significant))


@pytest.mark.parametrize("seed", range(5))
def test_texture_splits_match_their_definition(seed):
    rng = np.random.default_rng(seed)
    parent, persistence, significant = _random_tree(rng, 300)
    crowd = _crowd_by_definition(parent, persistence, significant)
    expected = np.zeros(parent.size, bool)
    for i in range(1, parent.size):
        p = parent[i]
        if significant[i] and p > 0 and significant[p]:
            expected[i] = persistence[i] < SPLIT_OVER_CROWD * max(crowd[i], crowd[p])
    assert np.array_equal(texture_splits(parent, persistence, significant), expected)


def test_a_cell_and_its_textured_pieces():
    # A cell (node 1, persistence 4) holds texture reaching 0.6 (node 5, insignificant). A
    # piece of it closed by texture (node 2, 0.8) does not stand out; a neighbouring cell
    # split off at a real wall (node 3, 2.0) does; a region inside the outside (node 4)
    # is never a split; the piece's own texture (node 6, 1.5 inside node 3) raises node 3's
    # bar to 2.25, so node 3 then falls too.
    parent = np.array([-1, 0, 1, 1, 0, 1])
    significant = np.array([False, True, True, True, True, False])
    persistence = np.array([np.inf, 4.0, 0.8, 2.0, 0.3, 0.6])
    assert texture_splits(parent, persistence, significant).tolist() == [
        False, False, True, False, False, False]
    parent = np.r_[parent, 3]
    significant = np.r_[significant, False]
    persistence = np.r_[persistence, 1.5]
    assert texture_splits(parent, persistence, significant)[3]
