"""Exact bottleneck and Wasserstein distances between persistence diagrams.

Both distances use the L∞ ground distance between points ``(birth, death)`` and let any
point be matched to its nearest point on the diagonal, at cost half its persistence.
Essential classes (infinite death) are matched among themselves: two diagrams with a
different number of them are at infinite distance.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .._checks import number
from .._errors import ParameterError
from ._diagram import Diagram
from ._geometric_matching import merge_matchings, saturate_heavy

__all__ = ["BottleneckMatching", "Matching", "WassersteinMatching", "bottleneck",
           "bottleneck_matching", "wasserstein", "wasserstein_matching"]

#: Largest number of finite points (both diagrams together) for the exact Wasserstein
#: distance: its dense cost matrix holds this many squared float64 values.
MAX_WASSERSTEIN_POINTS = 8000


def _rows(dgm: Any, dim: int, name: str) -> np.ndarray:
    """One diagram's ``dim`` pairs as checked float64 ``(birth, death)`` rows (k, 2)."""
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
    return pts


def _check_polarity(dgm_a: Any, dgm_b: Any) -> None:
    if isinstance(dgm_a, Diagram) and isinstance(dgm_b, Diagram) and dgm_a.walls != dgm_b.walls:
        raise ParameterError(
            f"Cannot compare diagrams of different wall polarity: {dgm_a.walls!r} and "
            f"{dgm_b.walls!r}."
        )


@dataclass(frozen=True)
class _Split:
    """Two diagrams' ``dim`` rows, which of them are finite, and the essential matching:
    rows ``(i, j)`` into ``rows_a`` and ``rows_b``, or ``None`` when the counts differ."""

    rows_a: np.ndarray
    rows_b: np.ndarray
    finite_a: np.ndarray
    finite_b: np.ndarray
    essential: np.ndarray | None


def _split(dgm_a: Any, dgm_b: Any, dim: int) -> _Split:
    _check_polarity(dgm_a, dgm_b)
    rows_a, rows_b = _rows(dgm_a, dim, "dgm_a"), _rows(dgm_b, dim, "dgm_b")
    finite_a, finite_b = np.isfinite(rows_a[:, 1]), np.isfinite(rows_b[:, 1])
    ess_a, ess_b = np.flatnonzero(~finite_a), np.flatnonzero(~finite_b)
    pairs = _essential_pairs(rows_a[ess_a], rows_b[ess_b])
    essential = None if pairs is None else np.column_stack(
        [ess_a[pairs[:, 0]], ess_b[pairs[:, 1]]]).reshape(-1, 2)
    return _Split(rows_a, rows_b, np.flatnonzero(finite_a), np.flatnonzero(finite_b),
                  essential)


def _essential_pairs(ess_a: np.ndarray, ess_b: np.ndarray) -> np.ndarray | None:
    """Rows ``(i, j)`` of the optimal essential matching (indices into ``ess_a`` and
    ``ess_b``), or ``None`` if the counts differ.

    Essential classes of equal death (``+inf`` or ``-inf``) are matched in birth order,
    which is optimal for every order of the Wasserstein distance and for the bottleneck
    distance (on a line, the sorted matching minimises any convex cost).
    """
    pairs = []
    for sign in (-np.inf, np.inf):
        at_a = np.flatnonzero(ess_a[:, 1] == sign)
        at_b = np.flatnonzero(ess_b[:, 1] == sign)
        if len(at_a) != len(at_b):
            return None
        pairs.append(np.column_stack([at_a[np.argsort(ess_a[at_a, 0], kind="stable")],
                                      at_b[np.argsort(ess_b[at_b, 0], kind="stable")]]))
    return np.concatenate(pairs)


def _half_persistence(pts: np.ndarray) -> np.ndarray:
    return np.abs(pts[:, 0] - pts[:, 1]) / 2.0


@dataclass(frozen=True)
class Matching:
    """An optimal matching of two diagrams' ``dim`` pairs and its cost.

    Attributes
    ----------
    distance : float
        The distance the matching attains (``inf`` if the numbers of essential classes
        differ; the matching is then empty).
    pairs : ndarray of int64, shape (k, 2)
        Rows ``(i, j)``: row ``i`` of the first diagram's ``dim`` pairs is matched with row
        ``j`` of the second's (finite with finite, essential with essential).
    diagonal_a, diagonal_b : ndarray of int64
        Rows of each diagram matched with the diagonal (at cost half their persistence).
    """

    distance: float
    pairs: np.ndarray
    diagonal_a: np.ndarray
    diagonal_b: np.ndarray


@dataclass(frozen=True)
class BottleneckMatching(Matching):
    """A matching whose largest cost is the bottleneck distance (see :class:`Matching`)."""


@dataclass(frozen=True)
class WassersteinMatching(Matching):
    """A matching whose costs give the ``order``-Wasserstein distance (see :class:`Matching`).

    Attributes
    ----------
    order : float
        The exponent ``q``: ``distance = (sum of cost**q) ** (1/q)``.
    """

    order: float = 1.0


def _no_matching() -> tuple[float, np.ndarray, np.ndarray, np.ndarray]:
    """The fields of the empty matching at infinite distance (essential counts differ)."""
    nothing = np.empty(0, np.int64)
    return float("inf"), nothing.reshape(0, 2), nothing, nothing


def _float_bits(value: float) -> int:
    """The bit pattern of a float >= 0 as an integer: it orders like the float."""
    return int(np.float64(value).view(np.int64))


def _bits_float(bits: int) -> float:
    return float(np.int64(bits).view(np.float64))


class _WarmMatching:
    """A maximum matching from the heavy points of one diagram into the other, kept valid
    as the cost grows (a larger cost only adds pairs and makes fewer points heavy)."""

    def __init__(self, left: np.ndarray, right: np.ndarray, half: np.ndarray) -> None:
        self.left, self.right, self.half = left, right, half
        self.mate_left = np.full(len(left), -1, np.int64)
        self.mate_right = np.full(len(right), -1, np.int64)

    def grown(self, delta: float) -> tuple[_WarmMatching, bool]:
        """A copy grown to a maximum matching at ``delta``; whether it covers every point
        heavier than ``delta``."""
        out = _WarmMatching(self.left, self.right, self.half)
        out.mate_left[:], out.mate_right[:] = self.mate_left, self.mate_right
        heavy = self.half > delta
        light = (out.mate_left >= 0) & ~heavy  # free to go to the diagonal now
        out.mate_right[out.mate_left[light]] = -1
        out.mate_left[light] = -1
        free = saturate_heavy(self.left, heavy, self.right, delta, out.mate_left,
                              out.mate_right)
        return out, free == 0


def _matching_of_finite(fin_a: np.ndarray, fin_b: np.ndarray) -> tuple[float, np.ndarray]:
    """The bottleneck cost of the finite points and the partner in B of each point of A
    (-1: the diagonal)."""
    from scipy.spatial import cKDTree  # imported when needed: segmentation never is

    half_a, half_b = _half_persistence(fin_a), _half_persistence(fin_b)
    upper = float(max(half_a.max(initial=0.0), half_b.max(initial=0.0)))
    tree_a = cKDTree(fin_a) if len(fin_a) else None
    tree_b = cKDTree(fin_b) if len(fin_b) else None
    bound = _lower_bound(fin_a, fin_b, tree_a, tree_b, half_a, half_b)
    lo = bound - 4 * np.spacing(bound)  # below the exact bound: no cost that low passes
    lo_bits = _float_bits(lo) if lo >= 0 else -1
    hi_bits = _float_bits(upper)  # every point to the diagonal: always passes
    below = (_WarmMatching(fin_a, fin_b, half_a), _WarmMatching(fin_b, fin_a, half_b))
    above = below
    # Feasibility is monotone in the cost and changes only at a candidate cost (a float
    # computed exactly as in the test), so bisecting the floats between the bounds ends
    # on the answer itself: at most 64 tests, each warm-started from the last failure.
    while hi_bits - lo_bits > 1:
        mid_bits = (lo_bits + hi_bits) // 2
        delta = _bits_float(mid_bits)
        side_a, covered = below[0].grown(delta)
        side_b = below[1]
        if covered:
            side_b, covered = below[1].grown(delta)
        if covered:
            hi_bits, above = mid_bits, (side_a, side_b)
        else:
            lo_bits, below = mid_bits, (side_a, side_b)
    delta = _bits_float(hi_bits)
    partner = merge_matchings(above[0].mate_left, above[1].mate_left, half_b > delta)
    return delta, partner


def bottleneck_matching(dgm_a: Any, dgm_b: Any, dim: int) -> BottleneckMatching:
    """Exact bottleneck distance between the ``dim`` pairs of two diagrams, with a
    matching that attains it.

    Parameters
    ----------
    dgm_a, dgm_b : Diagram or (n, 2) array_like
        Diagrams, or plain arrays of ``(birth, death)`` rows (also structured arrays with
        ``birth`` and ``death`` fields). An infinite death marks an essential class.
    dim : int
        Homology dimension to compare (ignored for plain arrays).

    Returns
    -------
    BottleneckMatching
        The distance, and which rows are matched with which or with the diagonal.

    Notes
    -----
    Each diagram is augmented with the diagonal projections of the other's points; a
    point may be matched with the diagonal at cost half its persistence, and two diagonal
    points with each other at cost 0 (Cohen-Steiner, Edelsbrunner & Harer 2007). A cost
    ``δ`` can be met when the pairs of points at most ``δ`` apart (L∞) hold a matching
    that covers every point farther than ``δ`` from the diagonal; the test grows maximum
    matchings by breadth-first augmenting paths whose neighbours are found in a grid of
    side ``δ`` (after Efrat, Itai & Katz 2001), so no pair is ever listed and memory stays
    linear. The answer is a candidate cost (a point distance or a half persistence):
    the smallest float that passes, found by bisecting the floats between a lower bound
    (some point has neither the diagonal nor a partner closer) and the largest half
    persistence. Essential classes of the same death sign are matched in order of birth.

    References
    ----------
    D. Cohen-Steiner, H. Edelsbrunner, J. Harer, "Stability of persistence diagrams",
    Discrete Comput. Geom. 37 (2007) 103-120. doi:10.1007/s00454-006-1276-5
    A. Efrat, A. Itai, M. J. Katz, "Geometry helps in bottleneck matching and related
    problems", Algorithmica 31 (2001) 1-28. doi:10.1007/s00453-001-0016-8

    Examples
    --------
    >>> found = bottleneck_matching([[5.0, 1.0], [2.0, 1.9]], [[4.5, 1.0]], dim=0)
    >>> found.distance, found.pairs.tolist(), found.diagonal_a.tolist()
    (0.5, [[0, 0]], [1])
    """
    split = _split(dgm_a, dgm_b, dim)
    if split.essential is None:
        return BottleneckMatching(*_no_matching())
    rows_a, rows_b, ess = split.rows_a, split.rows_b, split.essential
    index_a, index_b = split.finite_a, split.finite_b
    ess_cost = float(np.abs(rows_a[ess[:, 0], 0] - rows_b[ess[:, 1], 0]).max(initial=0.0))
    delta, partner = _matching_of_finite(rows_a[index_a], rows_b[index_b])
    matched = partner >= 0
    to_b = np.zeros(len(index_b), bool)
    to_b[partner[matched]] = True
    pairs = np.column_stack([index_a[matched], index_b[partner[matched]]])
    return BottleneckMatching(max(delta, ess_cost), np.concatenate([pairs, ess]),
                              index_a[~matched], index_b[~to_b])


def bottleneck(dgm_a: Any, dgm_b: Any, dim: int) -> float:
    """Exact bottleneck distance between the ``dim`` pairs of two diagrams.

    The distance of :func:`bottleneck_matching` (see there for the parameters and the
    method).

    Returns
    -------
    float
        The smallest ``δ`` such that a matching pairs every point of one diagram with a
        point of the other or with the diagonal, each within ``δ`` in L∞ distance;
        ``inf`` if the diagrams have a different number of essential classes.

    Examples
    --------
    >>> bottleneck([[3.0, 1.0]], [], dim=0)    # half of the persistence, 2 / 2
    1.0
    >>> bottleneck([[5.0, 1.0], [2.0, 1.9]], [[4.5, 1.0]], dim=0)
    0.5
    """
    return bottleneck_matching(dgm_a, dgm_b, dim).distance


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


def _checked_order(order: Any) -> float:
    return number("order", order, low=1.0)


def wasserstein_matching(dgm_a: Any, dgm_b: Any, dim: int, *,
                         order: float = 1.0) -> WassersteinMatching:
    """Exact ``order``-Wasserstein distance between the ``dim`` pairs of two diagrams, with
    a matching that attains it.

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
    WassersteinMatching
        ``distance = (min over matchings of the sum of cost**q) ** (1/q)`` with L∞ costs
        between points and half the persistence to the diagonal, and which rows are
        matched with which or with the diagonal. ``inf`` (and an empty matching) if the
        numbers of essential classes differ.

    Raises
    ------
    ParameterError
        If ``order`` is not a finite number >= 1, or the diagrams together hold more than
        :data:`MAX_WASSERSTEIN_POINTS` finite points.

    Notes
    -----
    Essential classes of the same death sign are matched among themselves in order of
    birth, at cost ``|birth_a - birth_b|`` (on a line the sorted matching minimises any
    convex cost). The finite points are an assignment problem on the ``(n + m) x (n + m)``
    augmented cost matrix: each diagram plus one diagonal slot per point of the other, a
    point to any diagonal slot at half its persistence, two diagonal slots at 0 (the
    formulation of Kerber, Morozov & Nigmetov 2017, from memory), solved exactly by
    :func:`scipy.optimize.linear_sum_assignment` in ``O((n + m)^3)`` time and
    ``O((n + m)^2)`` memory.

    References
    ----------
    Y. Mileyko, S. Mukherjee, J. Harer, "Probability measures on the space of persistence
    diagrams", Inverse Problems 27 (2011) 124007. doi:10.1088/0266-5611/27/12/124007
    D. Cohen-Steiner, H. Edelsbrunner, J. Harer, Y. Mileyko, "Lipschitz functions have
    Lp-stable persistence", Found. Comput. Math. 10 (2010) 127-139 (from memory).
    M. Kerber, D. Morozov, A. Nigmetov, "Geometry helps to compare persistence diagrams",
    ACM J. Exp. Algorithmics 22 (2017) (from memory).

    Examples
    --------
    >>> found = wasserstein_matching([[5.0, 1.0], [2.0, 1.9]], [[4.5, 1.0]], dim=0)
    >>> round(found.distance, 6), found.pairs.tolist(), found.diagonal_a.tolist()
    (0.55, [[0, 0]], [1])
    """
    order = _checked_order(order)
    split = _split(dgm_a, dgm_b, dim)
    if split.essential is None:
        return WassersteinMatching(*_no_matching(), order=order)
    rows_a, rows_b, ess = split.rows_a, split.rows_b, split.essential
    fin_a, fin_b = rows_a[split.finite_a], rows_b[split.finite_b]
    n, m = len(fin_a), len(fin_b)
    if n + m > MAX_WASSERSTEIN_POINTS:
        raise ParameterError(
            f"The two diagrams hold {n + m} finite points in H{dim}; the exact Wasserstein "
            f"distance is limited to {MAX_WASSERSTEIN_POINTS}. Leave out the pairs of low "
            "persistence first (min_persistence=).", parameters=("min_persistence",))
    total = float(np.sum(np.abs(rows_a[ess[:, 0], 0] - rows_b[ess[:, 1], 0]) ** order))
    rows = cols = np.empty(0, np.int64)
    if n + m:
        cost = np.zeros((n + m, n + m))
        cost[:n, :m] = np.max(np.abs(fin_a[:, None, :] - fin_b[None, :, :]), axis=2)
        cost[:n, m:] = _half_persistence(fin_a)[:, None]
        cost[n:, :m] = _half_persistence(fin_b)[None, :]
        cost **= order
        from scipy.optimize import linear_sum_assignment  # a costly import, rarely needed

        rows, cols = linear_sum_assignment(cost)
        total += float(cost[rows, cols].sum())
    real_a, real_b = rows < n, cols < m
    pairs = np.column_stack([split.finite_a[rows[real_a & real_b]],
                             split.finite_b[cols[real_a & real_b]]])
    return WassersteinMatching(total ** (1.0 / order), np.concatenate([pairs, ess]),
                               split.finite_a[rows[real_a & ~real_b]],
                               split.finite_b[cols[~real_a & real_b]], order=order)


def wasserstein(dgm_a: Any, dgm_b: Any, dim: int, *, order: float = 1.0) -> float:
    """Exact ``order``-Wasserstein distance between the ``dim`` pairs of two diagrams.

    The distance of :func:`wasserstein_matching` (see there for the parameters, the
    method and the errors).

    Returns
    -------
    float
        ``(min over matchings of the sum of cost**q) ** (1/q)`` with L∞ costs between
        points and half the persistence to the diagonal; ``inf`` if the numbers of
        essential classes differ.

    Examples
    --------
    >>> wasserstein([[3.0, 1.0], [6.0, 2.0]], [], dim=0)   # 1 + 2
    3.0
    >>> round(wasserstein([[3.0, 1.0], [6.0, 2.0]], [], dim=0, order=2), 6)  # sqrt(1 + 4)
    2.236068
    """
    return wasserstein_matching(dgm_a, dgm_b, dim, order=order).distance
