"""The bottleneck distance as cavitas computed it before the geometric matching.

Kept as a reference for tests (equality on medium random diagrams) and for the benchmark
(``bench/distance.py``): bisection over candidate costs, each test a Hopcroft–Karp
matching (``scipy.sparse.csgraph.maximum_bipartite_matching``) on an explicitly listed
graph of point pairs.
"""

from __future__ import annotations

import itertools
from typing import Any

import numpy as np
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import maximum_bipartite_matching
from scipy.spatial import cKDTree

from cavitas.cubical._distance import _half_persistence, _lower_bound, _split


def _perfect_matching_exists(n: int, m: int, ia: np.ndarray, jb: np.ndarray,
                             light_a: np.ndarray, light_b: np.ndarray) -> bool:
    """Whether the augmented graph with the given edges has a perfect matching.

    Rows: ``n`` points of A, then ``m`` diagonal slots of B. Columns: ``m`` points of B,
    then ``n`` diagonal slots of A. Edges: A_i–B_j (given), A_i–diag(A_i) if ``light_a[i]``,
    diag(B_j)–B_j if ``light_b[j]``, and diag(B_j)–diag(A_i) mirroring every A_i–B_j edge
    (enough: the two diagonal slots are free exactly when A_i and B_j are matched together).

    A light point with no A–B edge can only take its own diagonal slot, which nothing else
    can take, so both leave the graph; what remains is usually a small part of the points.
    """
    keep_a = ~light_a
    keep_a[ia] = True
    keep_b = ~light_b
    keep_b[jb] = True
    new_a = np.cumsum(keep_a) - 1
    new_b = np.cumsum(keep_b) - 1
    n, m = int(keep_a.sum()), int(keep_b.sum())
    if n + m == 0:
        return True
    ia, jb = new_a[ia], new_b[jb]
    la = new_a[np.flatnonzero(light_a & keep_a)]
    lb = new_b[np.flatnonzero(light_b & keep_b)]
    rows = np.concatenate([ia, la, n + lb, n + jb])
    cols = np.concatenate([jb, m + la, lb, m + ia])
    degree = np.bincount(rows, minlength=n + m)
    if degree.min() == 0:  # a heavy point with no partner within reach
        return False
    graph = csr_matrix((np.ones(len(rows), np.int8), (rows, cols)), shape=(n + m, n + m))
    match = maximum_bipartite_matching(graph, perm_type="column")
    return bool(np.all(match >= 0))


def bisection_bottleneck(dgm_a: Any, dgm_b: Any, dim: int) -> float:
    """Exact bottleneck distance (the previous implementation; see the module)."""
    split = _split(dgm_a, dgm_b, dim)
    if split.essential is None:
        return float("inf")
    fin_a, fin_b = split.rows_a[split.finite_a], split.rows_b[split.finite_b]
    ess = np.abs(split.rows_a[split.essential[:, 0], 0]
                 - split.rows_b[split.essential[:, 1], 0])
    ess_cost = float(ess.max()) if len(ess) else 0.0
    n, m = len(fin_a), len(fin_b)
    if n + m == 0:
        return ess_cost
    half_a, half_b = _half_persistence(fin_a), _half_persistence(fin_b)
    tree_a = cKDTree(fin_a) if n else None
    tree_b = cKDTree(fin_b) if m else None

    def edges(delta: float, heavy_above: float) -> tuple[np.ndarray, ...]:
        """Pairs within ``delta`` with a point heavier than ``heavy_above``, and their
        exact L-infinity distances (a few ulps of slack only widen the superset)."""
        reach = delta + 4 * np.spacing(delta)
        ia, jb = _heavy_edges(fin_a, fin_b, tree_a, tree_b, half_a > heavy_above,
                              half_b > heavy_above, reach)
        dist = np.maximum(np.abs(fin_a[ia, 0] - fin_b[jb, 0]),
                          np.abs(fin_a[ia, 1] - fin_b[jb, 1]))
        return ia, jb, dist

    listed = 0  # pairs listed by the last test that listed its own

    def feasible(delta: float, graph: tuple[np.ndarray, ...] | None = None) -> bool:
        nonlocal listed
        if graph is None:
            graph = edges(delta, delta)
            listed = len(graph[0])
        ia, jb, dist = graph
        use = (dist <= delta) & ((half_a[ia] > delta) | (half_b[jb] > delta))
        return _perfect_matching_exists(n, m, ia[use], jb[use], half_a <= delta,
                                        half_b <= delta)

    # The answer is a candidate cost: a half persistence or a point distance (computed
    # exactly as in the test), between a lower bound (some point has neither the diagonal
    # nor a partner closer) and ``upper`` (every point to the diagonal). Halve the interval
    # until the pairs it may need are few, then list the candidates inside and bisect
    # over them, testing each on that one list of pairs.
    upper = float(max(half_a.max(initial=0.0), half_b.max(initial=0.0)))
    bound = _lower_bound(fin_a, fin_b, tree_a, tree_b, half_a, half_b)
    lo = max(0.0, bound - 4 * np.spacing(bound))  # below it, no cost can pass the test
    if lo == 0.0 and feasible(0.0):
        return ess_cost
    hi = upper
    while (_pairs_within(fin_a, fin_b, tree_a, tree_b, half_a > lo, half_b > lo, hi)
           > max(_MAX_CANDIDATE_PAIRS, 2 * listed)
           and lo < (mid := lo + (hi - lo) / 2) < hi):
        if feasible(mid):
            hi = mid
        else:
            lo = mid
    graph = edges(hi, lo)
    within = (graph[2] > lo) & (graph[2] <= hi)
    cands = np.unique(np.concatenate([graph[2][within], half_a[(half_a > lo) & (half_a <= hi)],
                                      half_b[(half_b > lo) & (half_b <= hi)]]))
    first, last = 0, len(cands)  # the answer is cands[first:last][0] once first == last - 1
    while last - first > 1:
        mid_at = (first + last - 1) // 2
        if feasible(float(cands[mid_at]), graph):
            last = mid_at + 1
        else:
            first = mid_at + 1
    return max(float(cands[first]) if len(cands) else hi, ess_cost)


#: Most point pairs listed at once to draw the candidate costs from (or twice as many as
#: the last test needed, when that is more).
_MAX_CANDIDATE_PAIRS = 2_000_000


def _pairs_within(fin_a: np.ndarray, fin_b: np.ndarray, tree_a: Any, tree_b: Any,
                  heavy_a: np.ndarray, heavy_b: np.ndarray, delta: float) -> int:
    """How many pairs :func:`_heavy_edges` would list (heavy-heavy pairs counted twice),
    counted without listing them."""
    total = 0
    for tree, pts, heavy in ((tree_b, fin_a, heavy_a), (tree_a, fin_b, heavy_b)):
        if tree is not None and heavy.any():
            total += int(tree.query_ball_point(pts[heavy], r=delta, p=np.inf,
                                               return_length=True).sum())
    return total


def _heavy_edges(fin_a: np.ndarray, fin_b: np.ndarray, tree_a: Any, tree_b: Any,
                 heavy_a: np.ndarray, heavy_b: np.ndarray,
                 delta: float) -> tuple[np.ndarray, np.ndarray]:
    """Point pairs within ``delta`` (L-infinity) of which at least one point is heavy.

    A heavy point is farther than ``delta`` from the diagonal. Two light points never need
    each other: both can go to the diagonal instead, which keeps the graph small when most
    points are noise near the diagonal.
    """
    ia, jb = [np.empty(0, np.int64)], [np.empty(0, np.int64)]
    if tree_b is not None and heavy_a.any():
        rows, cols = _ball_pairs(tree_b, fin_a, np.flatnonzero(heavy_a), delta)
        ia.append(rows)
        jb.append(cols)
    if tree_a is not None and heavy_b.any():
        rows, cols = _ball_pairs(tree_a, fin_b, np.flatnonzero(heavy_b), delta)
        light = ~heavy_a[cols]  # heavy-heavy pairs were listed above
        ia.append(cols[light])
        jb.append(rows[light])
    return np.concatenate(ia), np.concatenate(jb)


def _ball_pairs(tree: Any, points: np.ndarray, idx: np.ndarray,
                delta: float) -> tuple[np.ndarray, np.ndarray]:
    """(query index, tree index) of every tree point within ``delta`` of ``points[idx]``."""
    near = tree.query_ball_point(points[idx], r=delta, p=np.inf, return_sorted=False)
    counts = np.fromiter((len(x) for x in near), np.int64, len(near))
    found = np.fromiter(itertools.chain.from_iterable(near), np.int64, int(counts.sum()))
    return np.repeat(idx, counts), found


