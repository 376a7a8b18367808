"""Figures of a persistence diagram: the birth–death plot and the barcode.

Each homology dimension gets its own marker and line style as well as its own colour, so
the figures read in greyscale too. Kept features (``highlight``) are drawn filled and
solid; the others hollow and dashed. Figures are made without pyplot (no global state);
:func:`save_figure` adds the research-only caution and writes the file atomically.
"""

from __future__ import annotations

import os
import textwrap
from collections.abc import Mapping
from typing import Any

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure

from .._caution import RESEARCH_ONLY
from .._errors import ParameterError
from .._shared.atomic import atomic_path
from ..cubical._diagram import Diagram

__all__ = ["DIM_STYLE", "SAVE_DPI", "plot_barcode", "plot_diagram", "save_figure",
           "smoothing_phrase"]

#: Marker, line style and colour per homology dimension (our own choice: blue-grey,
#: rust and moss, told apart by lightness as well as hue).
DIM_STYLE: dict[int, dict[str, str]] = {
    0: {"marker": "o", "linestyle": "-", "color": "#2b5d7d"},
    1: {"marker": "^", "linestyle": "--", "color": "#b5562b"},
    2: {"marker": "s", "linestyle": ":", "color": "#6f8a3a"},
}
_GUIDE = "#6b6b6b"
#: Resolution of the figures :func:`save_figure` writes (dots per inch).
SAVE_DPI = 150


def smoothing_phrase(smoothing: float | None, unit: str) -> str:
    """Which image a diagram is of, for its title: ``""`` when the smoothing is unknown.

    Examples
    --------
    >>> smoothing_phrase(1.5, "pixel"), smoothing_phrase(0.0, "µm")
    ('after smoothing with σ = 1.5 pixel', 'on the image without smoothing')
    """
    if smoothing is None:
        return ""
    return f"after smoothing with σ = {smoothing:g} {unit}" if smoothing else \
        "on the image without smoothing"


def _new_axes(ax: Axes | None, figsize: tuple[float, float]) -> Axes:
    if ax is not None:
        return ax
    return Figure(figsize=figsize, layout="constrained").add_subplot()


def _root_figure(ax: Axes) -> Figure:
    """The figure that holds ``ax`` (the whole figure when ``ax`` sits in a subfigure)."""
    holder = ax.figure
    return holder if isinstance(holder, Figure) else holder.figure


def _kept(highlight: Any, dim: int, n: int) -> np.ndarray | None:
    """``highlight`` for one dimension as a boolean mask of its ``n`` pairs (or ``None``)."""
    if isinstance(highlight, Mapping):
        highlight = highlight.get(dim)
    if highlight is None:
        return None
    values = np.asarray(highlight)
    if values.dtype == bool:
        if values.shape != (n,):
            raise ParameterError(
                f"highlight for H{dim} must be a mask of {n} booleans; got shape {values.shape}."
            )
        return values
    if values.dtype.kind not in "iu" or values.ndim != 1 or np.any((values < 0) | (values >= n)):
        raise ParameterError(
            f"highlight for H{dim} must be a boolean mask or indices in [0, {n}); "
            f"got {values.dtype} values {values[:5].tolist()}."
        )
    mask = np.zeros(n, dtype=bool)
    mask[values] = True
    return mask


def _level_label(dgm: Diagram, what: str, unit: str | None) -> str:
    kind = "superlevel" if dgm.walls == "bright" else "sublevel"
    return f"{what} ({dgm.walls} walls: {kind}) [{unit or 'input intensity'}]"


def _level_range(dgm: Diagram, dims: tuple[int, ...]) -> tuple[float, float, float]:
    """Finite level range of the plotted pairs, and a margin."""
    columns = [dgm.pairs(d)[f] for d in dims for f in ("birth", "death")]
    values = np.concatenate(columns) if columns else np.empty(0)
    values = values[np.isfinite(values)]
    lo, hi = (float(values.min()), float(values.max())) if len(values) else (0.0, 1.0)
    pad = 0.06 * (hi - lo) if hi > lo else max(1.0, abs(hi) * 0.1)
    return lo, hi, pad


def plot_diagram(dgm: Diagram, *, dims: Any = None, highlight: Any = None,
                 threshold: float | None = None, unit: str | None = None,
                 ax: Axes | None = None) -> Figure:
    """Birth against death for each pair, one marker per homology dimension.

    Parameters
    ----------
    dgm : Diagram
        The diagram to draw.
    dims : int or sequence of int, optional
        Dimensions to draw (default: every computed one).
    highlight : mapping of int to array_like, optional
        Per dimension, a boolean mask or the indices of the kept pairs; they are drawn
        filled, the others hollow. Dimensions left out are drawn filled.
    threshold : float, optional
        A persistence threshold: the band of pairs with persistence below it is shaded
        along the diagonal.
    unit : str, optional
        Intensity unit for the axis labels (default: "input intensity").
    ax : matplotlib Axes, optional
        Draw into these axes; a new figure is made otherwise.

    Returns
    -------
    matplotlib.figure.Figure

    Notes
    -----
    Essential classes never die; they are drawn on a dotted line at the bottom edge
    (bright walls, death ``-inf``) or top edge (dark walls, death ``+inf``). Every plotted
    collection is labelled ``H<dim>``, ``H<dim> kept``, ``H<dim> not kept`` or
    ``H<dim> essential``.

    Examples
    --------
    >>> from cavitas.cubical import PAIR_DTYPE, Diagram
    >>> rows = np.array([(5.0, 1.0, 7, 3), (9.0, -np.inf, 0, -1)], dtype=PAIR_DTYPE)
    >>> dgm = Diagram({0: rows, 1: rows[:1]}, shape=(4, 4), walls="bright", connectivity=1)
    >>> fig = plot_diagram(dgm, threshold=2.0)
    >>> [c.get_label() for c in fig.axes[0].collections if c.get_label().startswith("H")]
    ['H0', 'H0 essential', 'H1']
    """
    dims = dgm.dims if dims is None else tuple(np.atleast_1d(dims).astype(int).tolist())
    ax = _new_axes(ax, (5.6, 5.2))
    lo, hi, pad = _level_range(dgm, dims)
    edge = lo - pad if dgm.walls == "bright" else hi + pad
    span = np.array([lo - pad, hi + pad])
    ax.plot(span, span, color=_GUIDE, linewidth=1, label="diagonal (birth = death)")
    if threshold is not None:
        shift = -threshold if dgm.walls == "bright" else threshold
        ax.fill_between(span, span, span + shift, facecolor="#e4e4e4", edgecolor=_GUIDE,
                        hatch="..", linewidth=0, label=f"persistence below {threshold:.4g}")
        ax.plot(span, span + shift, color=_GUIDE, linestyle="-.", linewidth=1)
    has_essential = False
    for dim in dims:
        rows = dgm.pairs(dim)
        style = DIM_STYLE[dim]
        essential = dgm.essential(dim)
        kept = _kept(highlight, dim, len(rows))
        groups = [("", np.ones(len(rows), bool), True)] if kept is None else [
            (" not kept", ~kept, False), (" kept", kept, True)]
        for suffix, pick, filled in groups:
            sel = pick & ~essential
            if sel.any():
                # Features not kept are drawn small and faint, so that hundreds of them near
                # the diagonal do not read as one filled blob; kept ones are drawn on top.
                ax.scatter(rows["birth"][sel], rows["death"][sel], s=28 if filled else 14,
                           marker=style["marker"],
                           facecolors=style["color"] if filled else "none",
                           edgecolors=style["color"], linewidths=1 if filled else 0.6,
                           alpha=1.0 if filled else 0.6, zorder=3 if filled else 2,
                           label=f"H{dim}{suffix}")
        if essential.any():
            has_essential = True
            ax.scatter(rows["birth"][essential], np.full(essential.sum(), edge), s=60,
                       marker=style["marker"], facecolors=style["color"], edgecolors="black",
                       linewidths=1.2, clip_on=False, zorder=3, label=f"H{dim} essential")
    if has_essential:
        ax.axhline(edge, color=_GUIDE, linestyle=":", linewidth=1,
                   label="essential: never dies")
    ax.set_xlim(*span)
    ax.set_ylim(*sorted((lo - 2 * pad, hi + 2 * pad)))
    ax.set_aspect("equal", adjustable="box")
    ax.set_xlabel(_level_label(dgm, "birth level", unit))
    ax.set_ylabel(_level_label(dgm, "death level", unit))
    ax.set_title(f"Persistence diagram, {' x '.join(map(str, dgm.shape))} image")
    ax.legend(fontsize="small", loc="upper left" if dgm.walls == "bright" else "lower right")
    return _root_figure(ax)


def plot_barcode(dgm: Diagram, *, dim: int, top: int = 50, highlight: Any = None,
                 threshold: float | None = None, unit: str | None = None,
                 ax: Axes | None = None) -> Figure:
    """One bar per pair of dimension ``dim``, from birth to death, longest first.

    Parameters
    ----------
    dgm : Diagram
        The diagram to draw.
    dim : int
        Homology dimension.
    top : int, optional
        Draw only the ``top`` most persistent pairs (essential classes first).
    highlight : array_like or mapping of int to array_like, optional
        A boolean mask or the indices of the kept pairs (of ``dgm.pairs(dim)``); kept bars
        are solid and thick, the others thin and dashed.
    threshold : float, optional
        A persistence threshold: a line separates the bars longer than it from the rest.
    unit : str, optional
        Intensity unit for the axis label (default: "input intensity").
    ax : matplotlib Axes, optional
        Draw into these axes; a new figure is made otherwise.

    Returns
    -------
    matplotlib.figure.Figure

    Notes
    -----
    With bright walls the level axis runs from high to low, so that every bar reads from
    left (birth) to right (death). Essential bars run to the edge and end in an arrow
    head. Bars are drawn as line collections labelled ``bars``, ``bars kept`` or
    ``bars not kept``.

    Examples
    --------
    >>> from cavitas.cubical import PAIR_DTYPE, Diagram
    >>> rows = np.array([(5.0, 1.0, 7, 3), (9.0, -np.inf, 0, -1)], dtype=PAIR_DTYPE)
    >>> dgm = Diagram({0: rows}, shape=(4, 4), walls="bright", connectivity=1)
    >>> fig = plot_barcode(dgm, dim=0, highlight=[True, False])
    >>> [len(c.get_segments()) for c in fig.axes[0].collections]
    [1, 1]
    """
    if int(top) < 1:
        raise ParameterError(f"top must be a positive number of bars; got {top}.")
    rows = dgm.pairs(dim)
    pers = dgm.persistence(dim)
    essential = dgm.essential(dim)
    kept = _kept(highlight, dim, len(rows))
    order = np.argsort(-pers, kind="stable")[: int(top)]
    ax = _new_axes(ax, (6.0, max(2.5, min(9.0, 1.2 + 0.14 * len(order)))))
    lo, hi, pad = _level_range(dgm, (dim,))
    edge = lo - pad if dgm.walls == "bright" else hi + pad
    ends = np.where(essential, edge, rows["death"])
    style = DIM_STYLE[dim]
    ranks = np.arange(len(order))
    groups = [("", np.ones(len(order), bool), True)] if kept is None else [
        (" kept", kept[order], True), (" not kept", ~kept[order], False)]
    for suffix, pick, solid in groups:
        if pick.any():
            ax.hlines(ranks[pick], rows["birth"][order][pick], ends[order][pick],
                      colors=style["color"], linewidths=2.4 if solid else 1.2,
                      linestyles="-" if solid else "--", label=f"bars{suffix}")
    ess_rank = ranks[essential[order]]
    if len(ess_rank):
        head = "<" if dgm.walls == "bright" else ">"
        ax.plot(np.full(len(ess_rank), edge), ess_rank, linestyle="none", marker=head,
                color=style["color"], clip_on=False, label="essential: never dies")
    if threshold is not None:
        n_above = int(np.sum(pers[order] > threshold))
        ax.axhline(n_above - 0.5, color=_GUIDE, linestyle="-.", linewidth=1,
                   label=f"persistence threshold {threshold:.4g}")
    ax.set_xlim(*((hi + pad, lo - pad) if dgm.walls == "bright" else (lo - pad, hi + pad)))
    ax.set_ylim(max(len(order), 1) - 0.5, -0.5)
    ax.set_yticks([])
    ax.set_xlabel(_level_label(dgm, "level", unit))
    ax.set_ylabel(f"H{dim} pairs, longest first ({len(order)} of {len(rows)})")
    role = "cavities" if dim == dgm.cavity_dim else ("wall components" if dim == 0 else "tunnels")
    ax.set_title(f"Barcode of H{dim} ({role})")
    if ax.get_legend_handles_labels()[0]:
        ax.legend(fontsize="small", loc="upper left", bbox_to_anchor=(1.01, 1.0))
    return _root_figure(ax)


def save_figure(fig: Figure, path: str | os.PathLike, *, force: bool = False,
                dpi: int = SAVE_DPI) -> None:
    """Write ``fig`` (format from the suffix) with the research-only caution as a footer.

    The file is written atomically; an existing ``path`` needs ``force``.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> fig = Figure()
    >>> _ = fig.add_subplot().plot([0, 1], [1, 0])
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "line.png"
    >>> save_figure(fig, target)
    >>> target.read_bytes()[:4]
    b'\\x89PNG'
    """
    if not any(t.get_gid() == "cavitas-caution" for t in fig.texts):
        fig.text(0.5, 1.005, textwrap.fill(RESEARCH_ONLY, 100), ha="center", va="bottom",
                 fontsize=6, color=_GUIDE, gid="cavitas-caution")
    fmt = os.path.splitext(os.fspath(path))[1].lstrip(".").lower()
    if fmt not in fig.canvas.get_supported_filetypes():
        raise ParameterError(
            f"A figure file must end in .png, .svg or .pdf; got '{os.fspath(path)}'."
        )
    with atomic_path(path, force=force) as tmp:
        fig.savefig(tmp, format=fmt, dpi=dpi, bbox_inches="tight")
