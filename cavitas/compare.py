"""Compare a label map with a reference (ground truth or a manual annotation), region by region.

Each reference region is paired with the predicted region that overlaps it best; the pair
counts as **found** when their Dice coefficient (Dice 1945) reaches ``min_dice``. With
``min_dice > 2/3`` the pairing is one-to-one: Dice ≥ 2/3 means an intersection over union
above 1/2, and two regions cannot each cover more than half of a third one. A predicted
region paired with no reference region at that level is **spurious**.

Everything is computed from one joint histogram of the two label maps (``np.bincount``),
so thousands of regions cost one pass over the voxels.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any

import numpy as np

from ._errors import ParameterError
from ._table import Table

__all__ = ["compare_labels", "border_labels"]


def border_labels(labels: np.ndarray) -> np.ndarray:
    """Labels (> 0) present on any face of the array: regions cut by the scan border.

    Examples
    --------
    >>> import numpy as np
    >>> border_labels(np.array([[1, 0, 0], [0, 2, 0], [0, 0, 3]])).tolist()
    [1, 3]
    """
    labels = np.asarray(labels)
    faces = [np.take(labels, idx, axis=ax).ravel()
             for ax in range(labels.ndim) for idx in (0, -1)]
    found = np.unique(np.concatenate(faces))
    return found[found > 0]


def compare_labels(labels: np.ndarray, truth: np.ndarray, *, min_dice: float = 0.7,
                   ignore: Iterable[int] = ()) -> tuple[Table, dict[str, Any]]:
    """Match predicted regions to reference regions and score them.

    Parameters
    ----------
    labels : ndarray of int
        Predicted label map (0 = background).
    truth : ndarray of int
        Reference label map of the same shape (0 = background).
    min_dice : float, optional
        Dice a pair needs to count as found, in (2/3, 1] so the matching is one-to-one.
    ignore : iterable of int, optional
        Reference labels left out of the score (e.g. regions cut by the scan border, which
        no method can report as enclosed). Predicted regions matching them are not spurious.

    Returns
    -------
    table : Table
        One row per scored reference region: ``truth_label``, ``label`` (best predicted
        match, 0 if none overlaps), ``dice``, ``found``.
    summary : dict
        ``reference_regions``, ``predicted_regions``, ``found``, ``found_percent``,
        ``median_dice``, ``spurious``, ``spurious_percent``, ``min_dice``.

    Examples
    --------
    >>> import numpy as np
    >>> truth = np.array([[1, 1, 0, 2, 2]])
    >>> pred = np.array([[5, 5, 0, 0, 7]])
    >>> table, summary = compare_labels(pred, truth)
    >>> table["dice"].round(3).tolist(), summary["found"], summary["spurious"]
    ([1.0, 0.667], 1, 1)
    """
    labels, truth = np.asarray(labels), np.asarray(truth)
    if labels.shape != truth.shape:
        raise ParameterError(f"The label maps differ in shape: {labels.shape} vs {truth.shape}.")
    if not 2 / 3 < min_dice <= 1:
        raise ParameterError(f"min_dice must be in (2/3, 1] for a one-to-one match; "
                             f"got {min_dice}.", parameters=("min_dice",))
    for name, arr in (("labels", labels), ("truth", truth)):
        if arr.dtype.kind not in "iu" or (arr.size and arr.min() < 0):
            raise ParameterError(f"{name} must hold non-negative integers; got {arr.dtype}.")
    pred = labels.ravel().astype(np.int64)
    ref = truth.ravel().astype(np.int64)
    n_ref = int(ref.max(initial=0)) + 1
    pred_ids, pred_index = np.unique(pred, return_inverse=True)  # compact predicted labels
    n_pred = len(pred_ids)
    both = (ref > 0) & (pred > 0)
    inter = np.bincount(ref[both] * n_pred + pred_index[both],
                        minlength=n_ref * n_pred).reshape(n_ref, n_pred)
    size_ref = np.bincount(ref, minlength=n_ref)
    size_pred = np.bincount(pred_index, minlength=n_pred)
    dice = 2.0 * inter / np.maximum(size_ref[:, None] + size_pred[None, :], 1)
    dice[0, :] = 0.0
    dice[:, pred_ids == 0] = 0.0
    ignored = np.zeros(n_ref, bool)
    ignored[[i for i in ignore if 0 < int(i) < n_ref]] = True
    scored = np.flatnonzero((size_ref > 0) & ~ignored)
    scored = scored[scored > 0]
    best = dice[scored].argmax(axis=1) if scored.size and n_pred else np.zeros(0, np.int64)
    best_dice = dice[scored, best] if scored.size else np.zeros(0)
    found = best_dice >= min_dice
    present = np.flatnonzero((pred_ids > 0) & (size_pred > 0))
    matched_pred = (dice[:, present].max(axis=0) >= min_dice) if present.size else np.zeros(0, bool)
    table = Table({
        "truth_label": scored,
        "label": np.where(best_dice > 0, pred_ids[best] if scored.size else best, 0),
        "dice": best_dice,
        "found": found,
    })
    summary = {
        "reference_regions": int(scored.size),
        "predicted_regions": int(present.size),
        "found": int(found.sum()),
        "found_percent": 100.0 * float(found.mean()) if scored.size else float("nan"),
        "median_dice": float(np.median(best_dice)) if scored.size else float("nan"),
        "spurious": int((~matched_pred).sum()),
        "spurious_percent": 100.0 * float((~matched_pred).mean()) if present.size else 0.0,
        "min_dice": float(min_dice),
    }
    return table, summary
