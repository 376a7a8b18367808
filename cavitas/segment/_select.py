"""Feature selection on the cavity tree: the threshold, top-k, and each feature's margin."""

from __future__ import annotations

import numpy as np

from ..cubical._tree import OUTSIDE

__all__ = ["close_upward", "persistence_threshold", "select_nodes"]


def persistence_threshold(*, auto: float | None, absolute: float | None,
                          relative: float | None, robust_range: float) -> float:
    """The strictest of the given persistence criteria (0 when none is given)."""
    values = [0.0]
    if auto is not None:
        values.append(auto)
    if absolute is not None:
        values.append(absolute)
    if relative is not None:
        values.append(relative * robust_range)
    return float(max(values))


def close_upward(keep: np.ndarray, parent: np.ndarray) -> np.ndarray:
    """Add every ancestor of a kept node (nodes are in sweep order: parents come first)."""
    keep = keep.copy()
    for n in range(len(keep) - 1, 0, -1):
        if keep[n]:
            keep[parent[n]] = True
    keep[OUTSIDE] = True
    return keep


def select_nodes(persistence: np.ndarray, parent: np.ndarray, threshold: float,
                 top: int | None) -> np.ndarray:
    """Kept nodes: persistence > 0 and >= ``threshold``, at most ``top`` of them, closed upward.

    Examples
    --------
    >>> pers = np.array([np.inf, 5.0, 0.5, 3.0])
    >>> select_nodes(pers, np.array([-1, 0, 1, 1]), 1.0, None).tolist()
    [True, True, False, True]
    >>> select_nodes(pers, np.array([-1, 0, 1, 1]), 0.0, 1).tolist()
    [True, True, False, False]
    """
    keep = (persistence > 0) & (persistence >= threshold)
    keep[OUTSIDE] = False
    if top is not None and keep.sum() > top:
        cand = np.flatnonzero(keep)
        best = cand[np.argsort(-persistence[cand], kind="stable")[:top]]
        keep[:] = False
        keep[best] = True
    return close_upward(keep, parent)
