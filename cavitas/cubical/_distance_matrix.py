"""Distances between many diagrams at once: a matrix per homology dimension.

What ``cavitas distance`` and the batch's reference column compute: every pair of
diagrams compared by one metric (bottleneck, or the Wasserstein distance of an order),
dimension by dimension, after leaving out the pairs of low persistence if asked.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from .._checks import number
from .._errors import ParameterError
from ._diagram import Diagram
from ._distance import Matching, _checked_order, bottleneck_matching, wasserstein_matching

__all__ = ["METRICS", "DistanceMatrix", "distance_matrix", "drop_shallow", "match_diagrams"]

#: The metrics a matrix can use.
METRICS = ("bottleneck", "wasserstein")


def _checked_metric(metric: str, order: float | None) -> float | None:
    """The order to use (``None`` for the bottleneck distance), checked."""
    if metric not in METRICS:
        raise ParameterError(f"metric must be one of {', '.join(METRICS)}; got {metric!r}.",
                             parameters=("metric",))
    if metric == "bottleneck":
        return None
    return _checked_order(1.0 if order is None else order)


def match_diagrams(dgm_a: Diagram, dgm_b: Diagram, dim: int, *, metric: str = "bottleneck",
                   order: float | None = None) -> Matching:
    """The optimal matching of ``dim`` pairs under ``metric`` (and its distance).

    Parameters
    ----------
    dgm_a, dgm_b : Diagram
        The diagrams to compare.
    dim : int
        Homology dimension.
    metric : {"bottleneck", "wasserstein"}, optional
        The distance.
    order : float, optional
        The Wasserstein exponent ``q >= 1`` (default 1; not used by the bottleneck).

    Returns
    -------
    Matching
        A :class:`~cavitas.cubical.BottleneckMatching` or
        :class:`~cavitas.cubical.WassersteinMatching`.

    Examples
    --------
    >>> from cavitas.cubical import PAIR_DTYPE
    >>> rows = np.array([(5.0, 1.0, 0, 1)], dtype=PAIR_DTYPE)
    >>> a = Diagram({0: rows}, shape=(2, 2), walls="bright", connectivity=1)
    >>> match_diagrams(a, Diagram({0: rows[:0]}, shape=(2, 2), walls="bright",
    ...                           connectivity=1), 0).distance     # (5 - 1) / 2
    2.0
    """
    q = _checked_metric(metric, order)
    if q is None:
        return bottleneck_matching(dgm_a, dgm_b, dim)
    return wasserstein_matching(dgm_a, dgm_b, dim, order=q)


def drop_shallow(dgm: Diagram, min_persistence: float) -> Diagram:
    """``dgm`` without its finite pairs of persistence below ``min_persistence``.

    Each pair left out is at most ``min_persistence / 2`` from the diagonal, so it moves
    the bottleneck distance by at most that much (triangle inequality).

    Examples
    --------
    >>> from cavitas.cubical import PAIR_DTYPE
    >>> rows = np.array([(5.0, 1.0, 0, 1), (2.0, 1.5, 2, 3)], dtype=PAIR_DTYPE)
    >>> dgm = Diagram({0: rows}, shape=(2, 2), walls="bright", connectivity=1)
    >>> drop_shallow(dgm, 1.0).pairs(0)["birth"].tolist()
    [5.0]
    """
    floor = number("min_persistence", min_persistence, low=0.0)
    kept = {dim: dgm.pairs(dim)[~(dgm.persistence(dim) < floor)] for dim in dgm.dims}
    return Diagram(kept, shape=dgm.shape, walls=dgm.walls, connectivity=dgm.connectivity,
                   masked=dgm.masked)


@dataclass(frozen=True)
class DistanceMatrix:
    """Distances between every two of ``k`` diagrams, per homology dimension.

    Attributes
    ----------
    dims : tuple of int
        The homology dimensions compared.
    values : ndarray of float64, shape (len(dims), k, k)
        ``values[d, i, j]``: the distance between diagrams ``i`` and ``j`` in ``dims[d]``
        (symmetric, 0 on the diagonal; ``inf`` when their numbers of essential classes
        differ).
    metric : {"bottleneck", "wasserstein"}
        The distance used.
    order : float or None
        The Wasserstein exponent (``None`` for the bottleneck distance).
    against_first : dict of int to dict of int to Matching
        ``against_first[k][dim]``: the optimal matching of diagram 0 with diagram ``k``
        (``k >= 1``) in ``dim``, what a figure of each diagram against the first draws.
    """

    dims: tuple[int, ...]
    values: np.ndarray
    metric: str
    order: float | None
    against_first: dict[int, dict[int, Matching]] = field(default_factory=dict)

    def of(self, dim: int) -> np.ndarray:
        """The ``k x k`` matrix of homology dimension ``dim``."""
        if dim not in self.dims:
            raise ParameterError(f"dim must be one of {list(self.dims)}; got {dim}.")
        return self.values[self.dims.index(dim)]


def distance_matrix(diagrams: Sequence[Diagram], dims: Sequence[int], *,
                    metric: str = "bottleneck", order: float | None = None) -> DistanceMatrix:
    """Distances between every two of ``diagrams`` in each of ``dims``.

    Parameters
    ----------
    diagrams : sequence of Diagram
        Two or more diagrams of the same wall polarity, each with every one of ``dims``.
    dims : sequence of int
        Homology dimensions to compare.
    metric, order
        As in :func:`match_diagrams`.

    Returns
    -------
    DistanceMatrix

    Examples
    --------
    >>> from cavitas.cubical import PAIR_DTYPE
    >>> def one_pair(birth):
    ...     rows = np.array([(birth, 1.0, 0, 1)], dtype=PAIR_DTYPE)
    ...     return Diagram({0: rows}, shape=(2, 2), walls="bright", connectivity=1)
    >>> distance_matrix([one_pair(5.0), one_pair(4.0), one_pair(2.0)], [0]).of(0).tolist()
    [[0.0, 1.0, 2.0], [1.0, 0.0, 1.5], [2.0, 1.5, 0.0]]
    """
    q = _checked_metric(metric, order)
    dims = tuple(int(d) for d in dims)
    values = np.zeros((len(dims), len(diagrams), len(diagrams)))
    against_first: dict[int, dict[int, Matching]] = {k: {} for k in range(1, len(diagrams))}
    for d, dim in enumerate(dims):
        for i in range(len(diagrams)):
            for j in range(i + 1, len(diagrams)):
                found = match_diagrams(diagrams[i], diagrams[j], dim, metric=metric, order=q)
                values[d, i, j] = values[d, j, i] = found.distance
                if i == 0:
                    against_first[j][dim] = found
    return DistanceMatrix(dims, values, metric, q, against_first)
