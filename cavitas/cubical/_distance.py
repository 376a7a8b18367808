"""Exact bottleneck and Wasserstein distances between persistence diagrams.

Both distances use the L∞ ground distance between points ``(birth, death)`` and let any
point be matched to its nearest point on the diagonal, at cost half its persistence.
Essential classes (infinite death) are matched among themselves: two diagrams with a
different number of them are at infinite distance.
"""

from __future__ import annotations

import itertools
from typing import Any

import numpy as np
from scipy.optimize import linear_sum_assignment
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import maximum_bipartite_matching
from scipy.spatial import cKDTree

from .._errors import ParameterError
from ._diagram import Diagram

__all__ = ["bottleneck", "wasserstein"]

#: Largest number of finite points (both diagrams together) for the exact Wasserstein
#: distance: its dense cost matrix holds this many squared float64 values.
MAX_WASSERSTEIN_POINTS = 8000


def _points(dgm: Any, dim: int, name: str) -> tuple[np.ndarray, np.ndarray]:
    """Split one diagram's ``dim`` pairs into finite points (k, 2) and essential (birth, sign)."""
    if isinstance(dgm, Diagram):
        dgm = dgm.pairs(dim)
    try:
        arr = np.asarray(dgm)
        if arr.dtype.names is not None:
            arr = np.column_stack([arr["birth"], arr["death"]])
        pts = np.asarray(arr, dtype=np.float64)
    except (TypeError, ValueError, KeyError):
        pts = None
    if pts is not None and pts.size == 0:
        pts = pts.reshape(0, 2)
    if pts is None or pts.ndim != 2 or pts.shape[1] != 2:
        raise ParameterError(
            f"{name} must be a Diagram or an (n, 2) array of (birth, death) rows; got "
            f"{type(dgm).__name__} of shape {np.shape(dgm) if pts is not None else '?'}."
        )
    if not np.all(np.isfinite(pts[:, 0])):
        raise ParameterError(f"{name} has a birth that is not a finite number.")
    if np.any(np.isnan(pts[:, 1])):
        raise ParameterError(f"{name} has a death that is NaN.")
    finite = np.isfinite(pts[:, 1])
    return pts[finite], pts[~finite]


def _split(dgm_a: Any, dgm_b: Any, dim: int) -> tuple[np.ndarray, ...]:
    if isinstance(dgm_a, Diagram) and isinstance(dgm_b, Diagram) and dgm_a.walls != dgm_b.walls:
        raise ParameterError(
            f"Cannot compare diagrams of different wall polarity: {dgm_a.walls!r} and "
            f"{dgm_b.walls!r}."
        )
    fin_a, ess_a = _points(dgm_a, dim, "dgm_a")
    fin_b, ess_b = _points(dgm_b, dim, "dgm_b")
    return fin_a, ess_a, fin_b, ess_b


def _essential_costs(ess_a: np.ndarray, ess_b: np.ndarray) -> np.ndarray | None:
    """Birth differences of the optimal essential matching, or ``None`` if counts differ.

    Essential classes of equal death (``+inf`` or ``-inf``) are matched in birth order,
    which is optimal for every order of the Wasserstein distance and for the bottleneck
    distance (on a line, the sorted matching minimises any convex cost).
    """
    costs = []
    for sign in (-np.inf, np.inf):
        births_a = np.sort(ess_a[ess_a[:, 1] == sign, 0])
        births_b = np.sort(ess_b[ess_b[:, 1] == sign, 0])
        if len(births_a) != len(births_b):
            return None
        costs.append(np.abs(births_a - births_b))
    return np.concatenate(costs)


def _half_persistence(pts: np.ndarray) -> np.ndarray:
    return np.abs(pts[:, 0] - pts[:, 1]) / 2.0


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


def bottleneck(dgm_a: Any, dgm_b: Any, dim: int) -> float:
    """Exact bottleneck distance between the ``dim`` pairs of two diagrams.

    Parameters
    ----------
    dgm_a, dgm_b : Diagram or (n, 2) array_like
        Diagrams, or plain arrays of ``(birth, death)`` rows (also structured arrays with
        ``birth`` and ``death`` fields). An infinite death marks an essential class.
    dim : int
        Homology dimension to compare (ignored for plain arrays).

    Returns
    -------
    float
        The smallest ``δ`` such that a matching pairs every point of one diagram with a
        point of the other or with the diagonal, each within ``δ`` in L∞ distance;
        ``inf`` if the diagrams have a different number of essential classes.

    Notes
    -----
    Each diagram is augmented with the diagonal projections of the other's points; a
    point may be matched with the diagonal at cost half its persistence, and two diagonal
    points with each other at cost 0 (Cohen-Steiner, Edelsbrunner & Harer 2007). The answer
    is one of the candidate costs (half persistences and L∞ point distances): the smallest
    one for which the graph of cheaper edges has a perfect matching (Hopcroft–Karp), found
    by bisection over the candidates between a lower bound (the largest cost some point
    must pay to the diagonal or to its nearest partner) and the largest half persistence.
    Edges between two points that may both go to the diagonal are left out (they are
    never needed), and light points with no heavy partner leave the matching graph (they
    go to the diagonal), so memory stays proportional to the pairs within the answer of a
    point far from the diagonal. Essential classes of the same death sign are matched in
    order of birth.

    References
    ----------
    D. Cohen-Steiner, H. Edelsbrunner, J. Harer, "Stability of persistence diagrams",
    Discrete Comput. Geom. 37 (2007) 103-120. doi:10.1007/s00454-006-1276-5

    Examples
    --------
    >>> bottleneck([[3.0, 1.0]], [], dim=0)    # half of the persistence, 2 / 2
    1.0
    >>> bottleneck([[5.0, 1.0], [2.0, 1.9]], [[4.5, 1.0]], dim=0)
    0.5
    """
    fin_a, ess_a, fin_b, ess_b = _split(dgm_a, dgm_b, dim)
    ess = _essential_costs(ess_a, ess_b)
    if ess is None:
        return float("inf")
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


def _lower_bound(fin_a: np.ndarray, fin_b: np.ndarray, tree_a: Any, tree_b: Any,
                 half_a: np.ndarray, half_b: np.ndarray) -> float:
    """The largest cost some point must pay: to the diagonal or to its nearest partner
    (the tree's L-infinity distance, which may differ from the exact one in the last
    bits; the caller leaves a margin)."""
    bound = 0.0
    for pts, half, other in ((fin_a, half_a, tree_b), (fin_b, half_b, tree_a)):
        if not len(pts):
            continue
        if other is None:
            bound = max(bound, float(half.max()))
            continue
        nearest, _ = other.query(pts, k=1, p=np.inf)
        bound = max(bound, float(np.minimum(half, nearest).max()))
    return bound


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


def wasserstein(dgm_a: Any, dgm_b: Any, dim: int, *, order: float = 1.0) -> float:
    """Exact ``order``-Wasserstein distance between the ``dim`` pairs of two diagrams.

    Parameters
    ----------
    dgm_a, dgm_b : Diagram or (n, 2) array_like
        Diagrams, or plain arrays of ``(birth, death)`` rows (see :func:`bottleneck`).
    dim : int
        Homology dimension to compare (ignored for plain arrays).
    order : float, optional
        The exponent ``q >= 1``.

    Returns
    -------
    float
        ``(min over matchings of the sum of cost**q) ** (1/q)`` with L∞ costs between
        points and half the persistence to the diagonal; ``inf`` if the numbers of
        essential classes differ.

    Raises
    ------
    ParameterError
        If ``order`` is not a finite number >= 1, or the diagrams together hold more than
        :data:`MAX_WASSERSTEIN_POINTS` finite points.

    Notes
    -----
    The optimal matching is an assignment problem on the ``(n + m) x (n + m)`` augmented
    cost matrix (each diagram plus the diagonal projections of the other's points),
    solved exactly by :func:`scipy.optimize.linear_sum_assignment` in ``O((n + m)^3)``
    time and ``O((n + m)^2)`` memory. Essential classes are matched in birth order.

    References
    ----------
    Y. Mileyko, S. Mukherjee, J. Harer, "Probability measures on the space of persistence
    diagrams", Inverse Problems 27 (2011) 124007. doi:10.1088/0266-5611/27/12/124007

    Examples
    --------
    >>> wasserstein([[3.0, 1.0], [6.0, 2.0]], [], dim=0)   # 1 + 2
    3.0
    >>> round(wasserstein([[3.0, 1.0], [6.0, 2.0]], [], dim=0, order=2), 6)  # sqrt(1 + 4)
    2.236068
    """
    order = float(order)
    if not (np.isfinite(order) and order >= 1.0):
        raise ParameterError(f"order must be a finite number >= 1; got {order}.")
    fin_a, ess_a, fin_b, ess_b = _split(dgm_a, dgm_b, dim)
    ess = _essential_costs(ess_a, ess_b)
    if ess is None:
        return float("inf")
    n, m = len(fin_a), len(fin_b)
    if n + m > MAX_WASSERSTEIN_POINTS:
        raise ParameterError(
            f"The two diagrams hold {n + m} finite points in H{dim}; the exact Wasserstein "
            f"distance is limited to {MAX_WASSERSTEIN_POINTS}. Drop low-persistence pairs first."
        )
    total = float(np.sum(ess**order))
    if n + m:
        cost = np.zeros((n + m, n + m))
        cost[:n, :m] = np.max(np.abs(fin_a[:, None, :] - fin_b[None, :, :]), axis=2)
        cost[:n, m:] = _half_persistence(fin_a)[:, None]
        cost[n:, :m] = _half_persistence(fin_b)[None, :]
        cost **= order
        rows, cols = linear_sum_assignment(cost)
        total += float(cost[rows, cols].sum())
    return total ** (1.0 / order)
