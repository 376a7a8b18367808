"""Figure of two persistence diagrams drawn over each other with their optimal matching."""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np
from matplotlib.axes import Axes
from matplotlib.collections import LineCollection
from matplotlib.figure import Figure

from ..cubical._diagram import Diagram
from ..cubical._distance import Matching, WassersteinMatching
from .diagram_plots import DIM_STYLE

__all__ = ["matching_edges", "plot_matching"]

_GUIDE = "#6b6b6b"
_LONGEST = "#1d232a"


def _distance_name(found: Matching) -> str:
    if isinstance(found, WassersteinMatching):
        return f"{found.order:g}-Wasserstein distance"
    return "bottleneck distance"


def matching_edges(rows_a: np.ndarray, rows_b: np.ndarray,
                   found: Matching) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Segments and costs of a matching: point to point, then point to the diagonal.

    Returns ``(starts, ends, costs)``: ``(k, 2)`` start and end points (``(birth,
    death)``; a diagonal end is the nearest diagonal point in L∞, ``(b+d)/2`` twice) and
    the cost of each edge. Essential classes are left out (they have no finite point).

    Examples
    --------
    >>> from cavitas.cubical import bottleneck_matching
    >>> a, b = np.array([[5.0, 1.0], [2.0, 1.5]]), np.array([[4.5, 1.0]])
    >>> starts, ends, costs = matching_edges(a, b, bottleneck_matching(a, b, 0))
    >>> ends.tolist(), costs.tolist()
    ([[4.5, 1.0], [1.75, 1.75]], [0.5, 0.25])
    """
    a, b = rows_a[found.pairs[:, 0]], rows_b[found.pairs[:, 1]]
    finite = np.isfinite(a[:, 1])
    a, b = a[finite], b[finite]
    lone = np.concatenate([rows_a[found.diagonal_a], rows_b[found.diagonal_b]])
    middle = lone.mean(axis=1) if len(lone) else np.empty(0)
    starts = np.concatenate([a, lone]).reshape(-1, 2)
    ends = np.concatenate([b, np.column_stack([middle, middle])]).reshape(-1, 2)
    costs = np.concatenate([np.abs(a - b).max(axis=1, initial=0.0),
                            np.abs(lone[:, 0] - lone[:, 1]) / 2 if len(lone) else []])
    return starts, ends, costs


def _panel(ax: Axes, dgm_a: Diagram, dgm_b: Diagram, dim: int, found: Matching,
           names: Sequence[str], unit: str | None) -> None:
    rows_a = np.column_stack([dgm_a.pairs(dim)["birth"], dgm_a.pairs(dim)["death"]])
    rows_b = np.column_stack([dgm_b.pairs(dim)["birth"], dgm_b.pairs(dim)["death"]])
    values = np.concatenate([rows_a.ravel(), rows_b.ravel()])
    values = values[np.isfinite(values)]
    lo, hi = (float(values.min()), float(values.max())) if len(values) else (0.0, 1.0)
    pad = 0.06 * (hi - lo) if hi > lo else max(1.0, abs(hi) * 0.1)
    bright = dgm_a.walls == "bright"
    edge = lo - pad if bright else hi + pad
    span = np.array([lo - pad, hi + pad])
    ax.plot(span, span, color=_GUIDE, linewidth=1, label="diagonal (birth = death)")
    starts, ends, costs = matching_edges(rows_a, rows_b, found)
    a, b = rows_a[found.pairs[:, 0]], rows_b[found.pairs[:, 1]]
    never = ~np.isfinite(a[:, 1])  # essential pairs: a segment along the edge line
    starts = np.concatenate([starts, np.column_stack([a[never, 0], np.full(never.sum(), edge)])])
    ends = np.concatenate([ends, np.column_stack([b[never, 0], np.full(never.sum(), edge)])])
    costs = np.concatenate([costs, np.abs(a[never, 0] - b[never, 0])])
    longest = np.zeros(len(costs), bool)
    if not isinstance(found, WassersteinMatching) and len(costs):
        longest = costs == costs.max()
    segments = np.stack([starts, ends], axis=1)
    ax.add_collection(LineCollection(list(segments[~longest]), colors=_GUIDE,
                                     linewidths=0.7, label="matched"))
    if longest.any():
        ax.add_collection(LineCollection(list(segments[longest]), colors=_LONGEST,
                                         linewidths=2.2, label="longest edge (= the distance)"))
    style = DIM_STYLE[dim]
    # the hollow markers are larger and lie underneath: a point of both stays visible
    for rows, name, filled in ((rows_a, names[0], True), (rows_b, names[1], False)):
        finite = np.isfinite(rows[:, 1])
        face = style["color"] if filled else "white"
        ax.scatter(rows[finite, 0], rows[finite, 1], s=18 if filled else 40,
                   marker=style["marker"], facecolors=face, edgecolors=style["color"],
                   linewidths=0.9, zorder=4 if filled else 3, label=name)
        if (~finite).any():
            ax.scatter(rows[~finite, 0], np.full(int((~finite).sum()), edge),
                       s=40 if filled else 90, marker=style["marker"], facecolors=face,
                       edgecolors="black", linewidths=1.1, clip_on=False,
                       zorder=4 if filled else 3)
    if not (np.isfinite(rows_a[:, 1]).all() and np.isfinite(rows_b[:, 1]).all()):
        ax.axhline(edge, color=_GUIDE, linestyle=":", linewidth=1,
                   label="essential: never dies")
    ax.set_xlim(*span)
    ax.set_ylim(*sorted((lo - 2 * pad, hi + 2 * pad)))
    ax.set_aspect("equal", adjustable="box")
    kind = "superlevel" if bright else "sublevel"
    ax.set_xlabel(f"birth level ({dgm_a.walls} walls: {kind}) [{unit or 'input intensity'}]")
    ax.set_ylabel("death level")
    if np.isfinite(found.distance):
        title = f"H{dim}: {_distance_name(found)} {found.distance:.4g}"
    else:
        ess = [int((~np.isfinite(r[:, 1])).sum()) for r in (rows_a, rows_b)]
        title = (f"H{dim}: infinite distance\n({ess[0]} and {ess[1]} classes never die: "
                 "they cannot be matched)")
    ax.set_title(title, fontsize=10)
    ax.legend(fontsize="x-small", loc="upper left" if bright else "lower right")


def plot_matching(dgm_a: Diagram, dgm_b: Diagram, matchings: Mapping[int, Matching], *,
                  names: Sequence[str] = ("first", "second"),
                  unit: str | None = None) -> Figure:
    """Two diagrams over each other, one panel per dimension, with the optimal matching.

    Parameters
    ----------
    dgm_a, dgm_b : Diagram
        The two diagrams (``dgm_a`` filled markers, ``dgm_b`` hollow ones).
    matchings : mapping of int to Matching
        Per homology dimension, the matching to draw (see
        :func:`cavitas.cubical.match_diagrams`).
    names : pair of str, optional
        Legend names of the two diagrams.
    unit : str, optional
        Intensity unit of the axes (default: "input intensity").

    Returns
    -------
    matplotlib.figure.Figure

    Notes
    -----
    A grey segment joins two matched points; a point matched with the diagonal is joined
    to its nearest diagonal point in L∞ (half its persistence away). For the bottleneck
    distance the longest segment, whose length is the distance, is drawn thick and dark.
    Classes that never die sit on a dotted line at the edge, as in
    :func:`~cavitas.report.plot_diagram`.

    Examples
    --------
    >>> from cavitas.cubical import PAIR_DTYPE, bottleneck_matching
    >>> rows = np.array([(5.0, 1.0, 7, 3), (9.0, -np.inf, 0, -1)], dtype=PAIR_DTYPE)
    >>> a = Diagram({0: rows}, shape=(4, 4), walls="bright", connectivity=1)
    >>> b = Diagram({0: rows[1:]}, shape=(4, 4), walls="bright", connectivity=1)
    >>> fig = plot_matching(a, b, {0: bottleneck_matching(a, b, 0)})
    >>> fig.axes[0].get_title()
    'H0: bottleneck distance 2'
    """
    dims = sorted(matchings)
    fig = Figure(figsize=(5.2 * max(len(dims), 1), 5.4), layout="constrained")
    for k, dim in enumerate(dims):
        _panel(fig.add_subplot(1, len(dims), k + 1), dgm_a, dgm_b, dim, matchings[dim],
               names, unit)
    fig.suptitle(f"{names[0]} (filled) against {names[1]} (hollow)", fontsize=11)
    return fig
