"""Bottleneck and Wasserstein distances against plainly written references.

Definitions: bottleneck distance as in Cohen-Steiner, Edelsbrunner & Harer (2007), each
diagram augmented with the diagonal projections of the other's points, L∞ ground distance,
diagonal-to-diagonal cost 0; q-Wasserstein distance as in Mileyko, Mukherjee & Harer (2011)
and Turner et al. (2014) with the same augmentation.
"""

import itertools
import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy.optimize import linear_sum_assignment

from cavitas import ParameterError
from cavitas.cubical import (
    PAIR_DTYPE,
    Diagram,
    bottleneck,
    bottleneck_matching,
    wasserstein,
    wasserstein_matching,
)
from tests.bottleneck_bisection import bisection_bottleneck


def _augmented_costs(a, b):
    """Full augmented cost matrix with the actual projection points (reference, by definition).

    Rows: points of A, then projections of B; columns: points of B, then projections of A.
    """
    a = np.asarray(a, float).reshape(-1, 2)
    b = np.asarray(b, float).reshape(-1, 2)
    proj_a = np.repeat(a.mean(axis=1, keepdims=True), 2, axis=1)
    proj_b = np.repeat(b.mean(axis=1, keepdims=True), 2, axis=1)
    left = list(a) + list(proj_b)
    right = list(b) + list(proj_a)
    n_a, n_b = len(a), len(b)
    size = n_a + n_b
    cost = np.zeros((size, size))
    for i in range(size):
        for j in range(size):
            if i >= n_a and j >= n_b:
                cost[i, j] = 0.0  # diagonal to diagonal
            else:
                cost[i, j] = np.max(np.abs(left[i] - right[j]))
    return cost


def brute_bottleneck(a, b):
    """Minimum over all perfect matchings of the largest cost (every permutation)."""
    cost = _augmented_costs(a, b)
    size = len(cost)
    if size == 0:
        return 0.0
    return min(max(cost[i, p[i]] for i in range(size))
               for p in itertools.permutations(range(size)))


def brute_wasserstein(a, b, q):
    """Minimum over all perfect matchings of (sum of cost**q)**(1/q) (every permutation)."""
    cost = _augmented_costs(a, b)
    size = len(cost)
    if size == 0:
        return 0.0
    best = min(sum(cost[i, p[i]] ** q for i in range(size))
               for p in itertools.permutations(range(size)))
    return best ** (1.0 / q)


def threshold_bottleneck(a, b):
    """Bottleneck via scipy's assignment solver: smallest c with a zero-cost assignment of
    the 0/1 matrix [cost > c] (an independent route for diagrams too big to enumerate)."""
    cost = _augmented_costs(a, b)

    def zero_cost(c):
        over = (cost > c).astype(float)
        rows, cols = linear_sum_assignment(over)
        return over[rows, cols].sum() == 0

    values = np.unique(cost)  # feasibility is monotone in c: bisect over the values
    lo, hi = 0, len(values) - 1
    while lo < hi:
        mid = (lo + hi) // 2
        if zero_cost(values[mid]):
            hi = mid
        else:
            lo = mid + 1
    return float(values[lo]) if len(values) else 0.0


# tiny diagrams with many ties: small integer (half-integer) coordinates, birth >= death
_point = st.tuples(st.integers(0, 6), st.integers(0, 6)).map(
    lambda p: (max(p) / 2.0, min(p) / 2.0))
_tiny = st.lists(_point, min_size=0, max_size=3)


def matching_costs(a, b, found):
    """Cost of every edge of a returned matching, after checking that it is one: every row
    of each diagram used exactly once, finite with finite and essential with essential."""
    a = np.asarray(a, float).reshape(-1, 2)
    b = np.asarray(b, float).reshape(-1, 2)
    rows_a = np.concatenate([found.pairs[:, 0], found.diagonal_a])
    rows_b = np.concatenate([found.pairs[:, 1], found.diagonal_b])
    assert sorted(rows_a.tolist()) == list(range(len(a)))
    assert sorted(rows_b.tolist()) == list(range(len(b)))
    assert np.all(np.isfinite(a[found.diagonal_a, 1]))
    assert np.all(np.isfinite(b[found.diagonal_b, 1]))
    pa, pb = a[found.pairs[:, 0]], b[found.pairs[:, 1]]
    assert np.array_equal(np.isfinite(pa[:, 1]), np.isfinite(pb[:, 1]))
    gap = np.abs(pa - pb)
    gap[~np.isfinite(pa[:, 1]), 1] = 0.0  # essential: only the births count
    return np.concatenate([gap.max(axis=1, initial=0.0),
                           np.abs(a[found.diagonal_a, 0] - a[found.diagonal_a, 1]) / 2,
                           np.abs(b[found.diagonal_b, 0] - b[found.diagonal_b, 1]) / 2])


def matching_cost(a, b, found):
    """Largest cost of a returned matching (what a bottleneck matching attains)."""
    return float(matching_costs(a, b, found).max(initial=0.0))


def power_cost(a, b, found, q):
    """(sum of cost**q)**(1/q) of a returned matching (what a Wasserstein matching attains)."""
    return float(np.sum(matching_costs(a, b, found) ** q)) ** (1.0 / q)


@given(_tiny, _tiny)
def test_bottleneck_matches_permutation_brute_force(a, b):
    # reference: definition, Cohen-Steiner, Edelsbrunner & Harer 2007 (all permutations)
    assert bottleneck(a, b, 0) == pytest.approx(brute_bottleneck(a, b), rel=1e-12, abs=1e-12)
    found = bottleneck_matching(a, b, 0)
    assert matching_cost(a, b, found) == found.distance  # the matching attains it


@pytest.mark.parametrize("a, b, distance, pairs, diagonal_a, diagonal_b", [
    # hand-worked from the definition (L-infinity costs, half persistence to the diagonal)
    ([[3.0, 1.0]], [], 1.0, [], [0], []),                      # (3 - 1) / 2
    ([[3.0, 1.0]], [[3.5, 1.0]], 0.5, [[0, 0]], [], []),        # max(0.5, 0) < 1 and 1.25
    ([[10.0, 0.0]], [[4.0, 3.0]], 5.0, [], [0], [0]),           # 5 and 0.5 beat max(6, 3)
    ([[10.0, 0.0]], [[7.0, 1.0]], 3.0, [[0, 0]], [], []),       # max(3, 1) beats 5 and 3
    ([[5.0, -np.inf]], [[3.0, -np.inf]], 2.0, [[0, 0]], [], []),  # essential: |5 - 3|
    ([[5.0, -np.inf], [4.0, 3.0]], [[4.5, -np.inf]], 0.5, [[0, 0]], [1], []),
])
def test_single_bar_cases_by_hand(a, b, distance, pairs, diagonal_a, diagonal_b):
    found = bottleneck_matching(a, b, 0)
    assert found.distance == distance
    assert found.pairs.tolist() == pairs
    assert found.diagonal_a.tolist() == diagonal_a and found.diagonal_b.tolist() == diagonal_b


def test_different_numbers_of_essential_classes_are_infinitely_apart():
    # definition: essential classes can only be matched with each other
    found = bottleneck_matching([[5.0, -np.inf]], [[5.0, 1.0]], 0)
    assert found.distance == np.inf and found.pairs.shape == (0, 2)


@pytest.mark.parametrize("size, levels", [(300, 12), (800, 40), (600, 1000)])
def test_bottleneck_equals_the_previous_bisection_on_medium_diagrams(rng, size, levels):
    # reference: the previous implementation (bisection over candidate costs, each test a
    # scipy Hopcroft-Karp matching on explicitly listed pairs; tests/bottleneck_bisection.py).
    # Few distinct levels give many ties, many give a spread of distances.
    def diagram(count):
        births = rng.integers(0, levels, count).astype(float)
        return np.column_stack([births, births - rng.integers(0, levels // 4 + 1, count)])

    for _ in range(3):
        a, b = diagram(size), diagram(size + int(rng.integers(0, 30)))
        found = bottleneck_matching(a, b, 0)
        assert found.distance == bisection_bottleneck(a, b, 0)
        assert matching_cost(a, b, found) == found.distance


@given(_tiny, _tiny, st.sampled_from([1.0, 2.0, 3.5]))
def test_wasserstein_matching_attains_the_brute_force_optimum(a, b, q):
    # reference: definition (all permutations of the augmented matrix; Mileyko,
    # Mukherjee & Harer 2011; Turner et al. 2014); the
    # returned matching is a matching and its own cost is the distance
    found = wasserstein_matching(a, b, 0, order=q)
    assert found.order == q
    assert found.distance == pytest.approx(brute_wasserstein(a, b, q), rel=1e-9, abs=1e-12)
    assert power_cost(a, b, found, q) == pytest.approx(found.distance, rel=1e-12, abs=1e-12)


@pytest.mark.parametrize("a, b, q, distance, pairs, diagonal_a, diagonal_b", [
    # hand-worked from the definition: L∞ between points, half persistence to the diagonal
    ([[3.0, 1.0]], [], 1, 1.0, [], [0], []),                       # (3 - 1) / 2
    ([[3.0, 1.0]], [[3.5, 1.0]], 2, 0.5, [[0, 0]], [], []),         # 0.5 < sqrt(1 + 1.25²)
    ([[10.0, 0.0]], [[4.0, 3.0]], 1, 5.5, [], [0], [0]),            # 5 + 0.5 beats max(6, 3)
    ([[10.0, 0.0]], [[7.0, 1.0]], 1, 3.0, [[0, 0]], [], []),        # max(3, 1) beats 5 + 3
    ([[10.0, 0.0]], [[7.0, 1.0]], 2, 3.0, [[0, 0]], [], []),        # 3 beats sqrt(25 + 9)
    ([[5.0, -np.inf]], [[3.0, -np.inf]], 2, 2.0, [[0, 0]], [], []),  # essential: |5 - 3|
    ([[5.0, -np.inf], [4.0, 3.0]], [[4.5, -np.inf]], 1, 1.0, [[0, 0]], [1], []),  # .5 + .5
])
def test_wasserstein_single_bar_cases_by_hand(a, b, q, distance, pairs, diagonal_a,
                                              diagonal_b):
    found = wasserstein_matching(a, b, 0, order=q)
    assert found.distance == pytest.approx(distance, rel=1e-15)
    assert found.pairs.tolist() == pairs
    assert found.diagonal_a.tolist() == diagonal_a and found.diagonal_b.tolist() == diagonal_b


def test_wasserstein_matches_assignment_on_the_full_augmented_matrix(rng):
    # reference: scipy.optimize.linear_sum_assignment on the standard augmented matrix
    # (each diagram plus the diagonal projections of the other's points, L∞ costs to the
    # actual projection points; Cohen-Steiner, Edelsbrunner, Harer & Mileyko 2010)
    for size, q in ((20, 1.0), (45, 2.0), (60, 1.5)):
        births = rng.uniform(0, 50, size=(2, size))
        a = np.column_stack([births[0], births[0] - rng.exponential(4.0, size)])
        b = np.column_stack([births[1], births[1] - rng.exponential(4.0, size)])[: size - 7]
        cost = _augmented_costs(a, b) ** q
        rows, cols = linear_sum_assignment(cost)
        expected = float(cost[rows, cols].sum()) ** (1 / q)
        found = wasserstein_matching(a, b, 0, order=q)
        assert found.distance == pytest.approx(expected, rel=1e-12)
        assert power_cost(a, b, found, q) == pytest.approx(expected, rel=1e-12)


def test_distances_agree_with_gudhi(rng):
    # reference: gudhi (a general-purpose topology library, optional): bottleneck_distance
    # with e=0 is exact; gudhi.wasserstein (needs POT) with the L∞ ground metric
    gudhi = pytest.importorskip("gudhi")
    for size in (15, 80):
        births = rng.uniform(0, 30, size=(2, size))
        a = np.column_stack([births[0] - rng.exponential(3.0, size), births[0]])
        b = np.column_stack([births[1] - rng.exponential(3.0, size), births[1]])[:-3]
        assert bottleneck(a, b, 0) == pytest.approx(gudhi.bottleneck_distance(a, b, 0.0),
                                                    rel=1e-12)
        pytest.importorskip("ot")
        from gudhi.wasserstein import wasserstein_distance

        for q in (1.0, 2.0):
            theirs = wasserstein_distance(a, b, order=q, internal_p=np.inf)
            assert wasserstein(a, b, 0, order=q) == pytest.approx(theirs, rel=1e-9)


def test_bottleneck_matches_assignment_reference_on_larger_diagrams(rng):
    # reference: scipy.optimize.linear_sum_assignment on the full augmented matrix
    for size in (5, 12, 25):
        births = rng.integers(0, 20, size=(2, size)).astype(float)
        a = np.column_stack([births[0], births[0] - rng.integers(0, 8, size)])
        b = np.column_stack([births[1], births[1] - rng.integers(0, 8, size + 3)[:size]])
        assert bottleneck(a, b, 0) == pytest.approx(threshold_bottleneck(a, b), abs=1e-12)



def test_bottleneck_with_many_noise_points_matches_the_reference(rng):
    # reference: as above. Mostly noise near the diagonal around a few far points: most
    # points may go to the diagonal, the grid cells are crowded.
    def diagram(count, n_far):
        births = rng.uniform(0, 100, count + n_far)
        gaps = np.concatenate([rng.exponential(1.0, count), rng.uniform(20, 60, n_far)])
        return np.column_stack([births, births - gaps])

    for n_noise, n_far in ((150, 3), (240, 10)):
        a, b = diagram(n_noise, n_far), diagram(n_noise + 17, n_far)
        found = bottleneck_matching(a, b, 0)
        assert found.distance == pytest.approx(threshold_bottleneck(a, b), abs=1e-12)
        assert matching_cost(a, b, found) == found.distance
        assert bottleneck(a, a[::-1] + 1e-3, 0) == pytest.approx(1e-3, abs=1e-9)


_small = st.lists(_point, min_size=0, max_size=5)


@given(_small, _small, _small)
def test_metric_properties(a, b, c):
    # common practice: a distance is symmetric, zero on equal inputs, obeys the triangle rule
    for dist in (lambda x, y: bottleneck(x, y, 0),
                 lambda x, y: wasserstein(x, y, 0, order=1),
                 lambda x, y: wasserstein(x, y, 0, order=2)):
        assert dist(a, b) == pytest.approx(dist(b, a), abs=1e-12)
        assert dist(a, a) == 0.0
        assert dist(a, c) <= dist(a, b) + dist(b, c) + 1e-9


@given(_small, _small)
def test_bottleneck_is_the_limit_of_wasserstein(a, b):
    # definition: the bottleneck cost of the optimal W_q matching bounds d_B, so d_B <= W_q,
    # and W_q is non-increasing in q (power mean inequality)
    d_b = bottleneck(a, b, 0)
    w = [wasserstein(a, b, 0, order=q) for q in (1, 2, 8)]
    assert d_b <= w[2] + 1e-9
    assert w[0] + 1e-9 >= w[1] >= w[2] - 1e-9


def test_hand_computed_examples():
    # hand-computed: a point (3, 1) is 2/2 = 1 from the diagonal in L∞
    assert bottleneck([[3.0, 1.0]], [], 0) == 1.0
    assert wasserstein([[3.0, 1.0]], [], 0) == 1.0
    # hand-computed: (5,1)<->(4.5,1) costs 0.5, (2,1.9) to the diagonal 0.05
    assert bottleneck([[5.0, 1.0], [2.0, 1.9]], [[4.5, 1.0]], 0) == 0.5
    assert wasserstein([[5.0, 1.0], [2.0, 1.9]], [[4.5, 1.0]], 0) == pytest.approx(0.55)
    # hand-computed: matching (4,0)<->(4,3) costs 3, both to the diagonal max(2, 0.5) = 2
    assert bottleneck([[4.0, 0.0]], [[4.0, 3.0]], 0) == 2.0
    assert wasserstein([[4.0, 0.0]], [[4.0, 3.0]], 0) == 2.5
    # hand-computed: sublevel (dark walls) diagrams, death above birth
    assert bottleneck([[1.0, 3.0]], [[1.5, 3.0]], 0) == 0.5
    assert bottleneck([], [], 0) == 0.0


def test_essential_classes():
    # hand-computed: essentials matched in birth order: |3-5|, |10-9| -> max 2, sum 3
    a = [[10.0, -np.inf], [3.0, -np.inf], [4.0, 2.0]]
    b = [[9.0, -np.inf], [5.0, -np.inf], [4.0, 2.0]]
    assert bottleneck(a, b, 0) == 2.0
    assert wasserstein(a, b, 0) == 3.0
    assert wasserstein(a, b, 0, order=2) == pytest.approx(math.sqrt(5.0))
    # definition: different essential counts (or signs) -> infinite distance
    # hand-computed: (4,2) vs (7,1) costs 3 either matched or both to the diagonal
    assert bottleneck(a, b[:2] + [[7.0, 1.0]], 0) == 3.0
    assert bottleneck(a, b[1:], 0) == math.inf
    assert wasserstein(a, b[1:], 0) == math.inf
    unmatched = wasserstein_matching(a, b[1:], 0, order=2)
    assert unmatched.pairs.shape == (0, 2) and unmatched.diagonal_a.size == 0
    assert bottleneck([[1.0, np.inf]], [[1.0, -np.inf]], 0) == math.inf


def _diagram(rows, walls="bright"):
    pairs = np.array([(b, d, 0, -1 if np.isinf(d) else 1) for b, d in rows], dtype=PAIR_DTYPE)
    return Diagram({0: pairs, 1: pairs[:0]}, shape=(3, 3), walls=walls, connectivity=1)


def test_diagram_and_array_inputs_agree():
    # consistency: a Diagram and its (birth, death) array give the same value
    rows = [(6.0, 1.0), (5.0, 4.0), (9.0, -np.inf)]
    other = [(5.5, 1.5), (9.5, -np.inf)]
    expected = bottleneck(rows, other, 0)
    assert bottleneck(_diagram(rows), _diagram(other), 0) == expected
    assert bottleneck(_diagram(rows).pairs(0), other, 0) == expected
    assert wasserstein(_diagram(rows), other, 0) == wasserstein(rows, other, 0)
    assert bottleneck(_diagram(rows), _diagram(other), 1) == 0.0


def test_bad_inputs_raise_parameter_error():
    with pytest.raises(ParameterError, match="wall polarity"):
        bottleneck(_diagram([(2.0, 1.0)]), _diagram([(1.0, 2.0)], walls="dark"), 0)
    with pytest.raises(ParameterError, match="dgm_a"):
        bottleneck(np.zeros((3, 3)), [], 0)
    with pytest.raises(ParameterError, match="dgm_b"):
        wasserstein([], [[1.0, 2.0], [3.0]], 0)
    with pytest.raises(ParameterError, match="birth"):
        bottleneck([[np.nan, 1.0]], [], 0)
    with pytest.raises(ParameterError, match="order"):
        wasserstein([], [], 0, order=0.5)
    with pytest.raises(ParameterError, match="dim must be"):
        bottleneck(_diagram([(2.0, 1.0)]), [], 2)
