"""Scale per region: regions that a neighbouring detection scale sees more clearly.

One detection scale per image is a compromise: small cells need little smoothing, noisy
large cells much. :func:`cavitas.segment.segment` chooses the scale where most cavities
are significant (the *base*), then asks the candidate scales next to it what they found,
tracking a cavity across scales by its core (its deepest voxel, which the smoothing
moves little):

* **separated at a finer scale** — a base region holding the cores of two or more
  regions of the next finer scale is two cells that the base smoothing merged: it is
  replaced by those regions (cut to the base region's voxels) when each of them stands
  clearly above that scale's threshold (:data:`MIN_CLARITY`);
* **found only at a neighbouring scale** — a region of the next finer or coarser scale
  whose core lies in no base region (the base saw wall, medium or an insignificant cavity
  there) is added when it stands clearly above its scale's threshold too, at least
  :data:`MIN_FREE_SHARE` of its voxels are still free, and those are not far smaller than
  the base's typical region (:data:`cavitas.segment._evidence.SMALL_FRACTION` of its
  median); the clearest proposals (persistence over their own scale's threshold) first.

Every region keeps its own scale's values in the table (birth, death, persistence,
threshold, ``detection_scale``). Each scale's regions passed all of that scale's tests
(threshold, class test, texture, size, split rule) and are delineated as at their own
scale, at the fine delineation scale. Each neighbour asked costs one more detection and
delineation, and only while its regions and the base's are both held: a little more time
and memory, only when a neighbour has something to offer.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import ndimage as ndi

from ._result import ChamberValues

__all__ = ["MIN_FREE_SHARE", "MIN_CLARITY", "Contribution", "Merged", "Plan", "ScaleSeeds",
           "merge", "plan"]

#: A region found only at another scale is added when this share of it is free.
MIN_FREE_SHARE = 0.5
#: A region of another scale is taken (as a piece of a separated base region, or added)
#: only when its persistence is at least this multiple of that scale's threshold.
#: Measured: on the EM slices of ``bench/real_scans.py`` the regions other scales offered
#: stood at 1.01-1.11 (σ 0.5 pixel: pieces of textured cells and pockets, 9 more spurious
#: regions and none found) or at 2.0-2.9; on the invented hard sheets at noise 0.3 the
#: weaker piece of each separation stood at 1.19-1.73 (cells the base merged: 92.1 % ->
#: 94.7 % found), and at 1.0 at noise 0.18 (one spurious region).
MIN_CLARITY = 1.15


@dataclass(frozen=True)
class ScaleSeeds:
    """The chambers one detection scale makes, as seeds: the core voxel of each."""

    sigma: np.ndarray    # Gaussian sigma per axis, voxels
    core: np.ndarray     # flat index of each chamber's core
    clarity: np.ndarray  # each chamber's persistence over its scale's threshold
    size: np.ndarray     # voxels of each chamber's cavity where it opens (its breach region)


@dataclass
class Plan:
    """What another scale contributes: base chambers it separates, and whether it adds."""

    sigma: np.ndarray
    separates: list[int] = field(default_factory=list)  # base chamber ids
    adds: bool = False


def plan(labels: np.ndarray, n_chambers: int, base_sigma: np.ndarray,
         seeds: list[ScaleSeeds], min_voxels: float = 0.0) -> list[Plan]:
    """The neighbouring scales worth delineating, and what each contributes.

    The candidate scales next to the base are asked: the next finer one for separations
    and both for added regions (a cavity is tracked to the neighbouring scales; every
    scale asked costs one more detection and delineation). ``labels`` is the base
    delineation (chambers ``1..n_chambers``, border-cut pieces after them, 0 elsewhere).
    Only seeds clear of their scale's threshold
    (:data:`MIN_CLARITY`) whose cavity holds at least ``min_voxels`` count: the rest could
    not change the result, and every scale planned costs a detection and a delineation.

    Examples
    --------
    A base chamber 1 holding two cores of a finer scale; a coarser scale with a core in
    no region:

    >>> labels = np.array([[1, 1, 0, 1, 1, 0, 0]])
    >>> big = np.array([9, 9])
    >>> fine = ScaleSeeds(np.array([0.5, 0.5]), np.array([0, 4]), np.array([1.6, 1.3]), big)
    >>> finest = ScaleSeeds(np.array([0.0, 0.0]), np.array([5]), np.array([2.0]), big[:1])
    >>> coarse = ScaleSeeds(np.array([2.0, 2.0]), np.array([1, 6]), np.array([3.0, 2.0]), big)
    >>> [(p.separates, p.adds) for p in plan(labels, 1, np.array([1.0, 1.0]),
    ...                                      [finest, fine, coarse])]
    [([1], False), ([], True)]
    """
    flat = labels.ravel()
    base = float(np.max(base_sigma))
    finer = max((s for s in seeds if float(np.max(s.sigma)) < base),
                key=lambda s: float(np.max(s.sigma)), default=None)
    coarser = min((s for s in seeds if float(np.max(s.sigma)) > base),
                  key=lambda s: float(np.max(s.sigma)), default=None)
    plans = []
    for s in (finer, coarser):
        if s is None:
            continue
        useful = flat[s.core[_useful(s, min_voxels)]]
        step = Plan(s.sigma, adds=bool(np.any(useful == 0)))
        if s is finer:
            inside = useful[(useful >= 1) & (useful <= n_chambers)]
            counts = np.bincount(inside, minlength=n_chambers + 1)
            step.separates = np.flatnonzero(counts >= 2).tolist()
        if step.separates or step.adds:
            plans.append(step)
    return plans


def _useful(seeds: ScaleSeeds, min_voxels: float) -> np.ndarray:
    """Seeds that could become a region: clear of their threshold and large enough."""
    return (seeds.clarity >= MIN_CLARITY) & (seeds.size >= min_voxels)


@dataclass(frozen=True)
class Contribution:
    """One other scale's delineated chambers and what the plan takes from them."""

    plan: Plan
    labels: np.ndarray          # its chambers 1..n, border-cut pieces above n, 0 elsewhere
    chambers: ChamberValues     # one row per chamber
    level: np.ndarray           # its chambers' cut levels (walls high)


@dataclass
class Merged:
    """The base delineation with regions of other scales put in."""

    labels: np.ndarray          # chambers, then border-cut pieces (ids shifted)
    chambers: ChamberValues
    level: np.ndarray           # per chamber: the level it was cut at (walls high)
    parent: np.ndarray          # per chamber: enclosing enclosure id (shifted), 0 = none
    shift: int                  # how far ids above the base chambers moved up
    added: np.ndarray           # voxels that became regions (no longer background)
    summary: dict[str, int]


def merge(base_labels: np.ndarray, base: ChamberValues, base_level: np.ndarray,
          base_parent: np.ndarray, enclosure_map: np.ndarray | None,
          contributions: list[Contribution], min_voxels: float = 0.0) -> Merged:
    """Put the planned regions of other scales into the base delineation.

    An added region needs at least ``min_voxels`` free voxels (and
    :data:`MIN_FREE_SHARE` of its own).

    A separated base chamber keeps its id for its first piece; further pieces and added
    regions get ids after the base chambers, and every id above them (border-cut pieces,
    enclosures) moves up by as many (``shift``).

    Examples
    --------
    Base chamber 1 covers two cells that a finer scale separates (its chambers 1 and 2):

    >>> rows = lambda n, s: ChamberValues(np.full(n, 2.0), np.zeros(n), np.arange(n),
    ...     np.arange(n), np.ones(n), np.full(n, s), np.full(n, -1))
    >>> base = np.array([[1, 1, 1, 1, 1, 0]])
    >>> finer = Contribution(Plan(np.array([0.5, 0.5]), [1]),
    ...                      np.array([[1, 1, 0, 2, 2, 0]]), rows(2, 0.5), np.ones(2))
    >>> merged = merge(base, rows(1, 1.0), np.ones(1), np.zeros(1, int), None, [finer])
    >>> merged.labels.tolist(), merged.chambers.scale.tolist(), merged.summary["pieces"]
    ([[1, 1, 0, 2, 2, 0]], [0.5, 0.5], 2)
    """
    n_ch = base.node.size
    flat = base_labels.ravel()
    new = flat.copy()
    rows = base.take(np.arange(n_ch))
    level = np.array(base_level, np.float64, copy=True)
    extra_rows: list[ChamberValues] = []
    extra_level: list[np.ndarray] = []
    extra_parent: list[np.ndarray] = []
    summary = {"split": 0, "pieces": 0, "added": 0}
    next_id = n_ch + 1
    hosts = [flat[c.chambers.core_voxel] for c in contributions]

    for c, host in zip(contributions, hosts, strict=True):
        if not c.plan.separates:
            continue
        clear = _clarity(c.chambers) >= MIN_CLARITY
        pieces_of = {}  # base chamber -> its pieces (rows of c), all clear and present
        other = c.labels.ravel()
        split = np.isin(flat, c.plan.separates)
        present = np.bincount(other[split], minlength=c.chambers.node.size + 1)[1:] > 0
        for chamber in c.plan.separates:
            pieces = np.flatnonzero((host == chamber) & present)
            if pieces.size >= 2 and clear[pieces].all():
                pieces_of[chamber] = pieces
        if not pieces_of:
            continue
        piece_id = np.zeros(c.chambers.node.size + 1, new.dtype)
        piece_host = np.full(c.chambers.node.size + 1, -1, np.int64)
        for chamber, pieces in pieces_of.items():
            piece_id[pieces + 1] = np.r_[chamber, np.arange(next_id, next_id + pieces.size - 1)]
            piece_host[pieces + 1] = chamber
            rows.put(chamber - 1, c.chambers, int(pieces[0]))
            level[chamber - 1] = c.level[pieces[0]]
            extra_rows.append(c.chambers.take(pieces[1:]))
            extra_level.append(c.level[pieces[1:]])
            extra_parent.append(np.full(pieces.size - 1, base_parent[chamber - 1]))
            next_id += pieces.size - 1
            summary["split"] += 1
            summary["pieces"] += int(pieces.size)
        where = np.flatnonzero(np.isin(flat, list(pieces_of)))
        mine = other[where]
        new[where] = np.where(piece_host[mine] == flat[where], piece_id[mine], 0)

    # regions seen only at another scale, the clearest first over every scale
    free = (new == 0).reshape(base_labels.shape)
    adding = [k for k, c in enumerate(contributions) if c.plan.adds]
    proposals = [(float(_clarity(contributions[k].chambers)[j]), k, int(j))
                 for k in adding for j in np.flatnonzero(hosts[k] == 0)
                 if _clarity(contributions[k].chambers)[j] >= MIN_CLARITY]
    size = {k: contributions[k].chambers.node.size + 1 for k in adding}
    totals = {k: np.bincount(contributions[k].labels.ravel(), minlength=size[k])
              for k in adding}
    open_counts = {k: np.bincount(contributions[k].labels[free], minlength=size[k])
                   for k in adding}
    boxes = {k: ndi.find_objects(contributions[k].labels) for k in adding}
    added = np.zeros(base_labels.shape, bool)
    for _, k, j in sorted(proposals, key=lambda p: -p[0]):
        c, label = contributions[k], j + 1
        if (open_counts[k][label] < max(min_voxels, 1)
                or open_counts[k][label] < MIN_FREE_SHARE * totals[k][label]):
            continue
        box = boxes[k][j]
        take = (c.labels[box] == label) & free[box]
        for m in adding:  # what the others could still take
            open_counts[m] -= np.bincount(contributions[m].labels[box][take],
                                          minlength=size[m])
        new.reshape(base_labels.shape)[box][take] = next_id
        free[box] &= ~take
        added[box] |= take
        extra_rows.append(c.chambers.take(np.array([j])))
        extra_level.append(c.level[[j]])
        extra_parent.append(_enclosure_at(enclosure_map, c.chambers.core_voxel[[j]]))
        next_id += 1
        summary["added"] += 1

    shift = next_id - n_ch - 1
    above = flat > n_ch
    new[above] = flat[above] + shift
    parent = np.concatenate([np.asarray(base_parent, np.int64), *extra_parent])
    parent = np.where(parent > n_ch, parent + shift, parent)
    return Merged(labels=new.reshape(base_labels.shape),
                  chambers=ChamberValues.concatenate([rows, *extra_rows]),
                  level=np.concatenate([level, *extra_level]), parent=parent, shift=shift,
                  added=added, summary=summary)


def _enclosure_at(enclosure_map: np.ndarray | None, core: np.ndarray) -> np.ndarray:
    """The base enclosure id at each voxel (0: none)."""
    if enclosure_map is None:
        return np.zeros(core.size, np.int64)
    return enclosure_map.ravel()[core].astype(np.int64)


def _clarity(values: ChamberValues) -> np.ndarray:
    """Persistence over the threshold of each chamber's own scale."""
    return np.abs(values.birth - values.death) / np.maximum(values.threshold, 1e-300)
