"""Histograms of region measurements (volume, sphericity ...) from the region table."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from matplotlib.collections import PolyCollection
from matplotlib.figure import Figure
from matplotlib.ticker import EngFormatter, MaxNLocator

from .._table import Table
from ._words import Words

__all__ = ["DEFAULT_HISTOGRAMS", "plot_histograms"]

#: Columns drawn when present, in this order (2D tables say area and circularity).
DEFAULT_HISTOGRAMS = ("volume", "area", "sphericity", "circularity")
_HATCHES = ("///", "\\\\\\", "xx", "..")
_FILL = ("#d9a441", "#4f8a8b", "#9c6b98", "#8a9a5b")


def _bins(values: np.ndarray) -> tuple[np.ndarray, bool]:
    """Bin edges for ``values`` and whether they are logarithmic (wide positive ranges)."""
    lo, hi = float(values.min()), float(values.max())
    count = int(np.clip(np.sqrt(values.size) * 2, 5, 50))
    if lo > 0 and hi / lo > 100:
        return np.geomspace(lo, hi, count + 1), True
    if hi == lo:
        return np.array([lo - 0.5, hi + 0.5]), False
    return np.linspace(lo, hi, count + 1), False


def _bars(values: np.ndarray, edges: np.ndarray, *, color: str, hatch: str) -> PolyCollection:
    """The bars of ``values``' histogram over ``edges`` as one collection (the rectangles
    ``Axes.hist`` would add one by one: outlined, hatched, resting on 0)."""
    counts = np.histogram(values, bins=edges)[0].astype(np.float64)
    left, right, ground = edges[:-1], edges[1:], np.zeros(len(counts))
    corners = np.stack([np.c_[left, ground], np.c_[right, ground], np.c_[right, counts],
                        np.c_[left, counts]], axis=1)
    bars = PolyCollection(list(corners), closed=True, facecolors=color, edgecolors="black",
                          linewidths=0.6, hatch=hatch, gid="bars")
    bars.sticky_edges.y.append(0)
    return bars


def plot_histograms(regions: Table, *, columns: Sequence[str] | None = None,
                    ndim: int = 3) -> Figure | None:
    """One histogram per measurement column that the table has.

    Parameters
    ----------
    regions : Table
        The region table; units come from ``regions.units``.
    columns : sequence of str, optional
        Columns to draw (default :data:`DEFAULT_HISTOGRAMS`); absent ones are skipped.
    ndim : int
        Dimension of the image: 2 names the columns in 2D words (area, circularity).

    Returns
    -------
    Figure or None
        ``None`` when no column has a finite value. Non-finite values are left out and
        counted in the panel title; bars are hatched so panels read without colour; a
        dashed line marks the median.

    Examples
    --------
    >>> t = Table({"volume": [1.0, 2.0, 2.5, 8.0]}, units={"volume": "µm³"})
    >>> fig = plot_histograms(t)
    >>> fig.axes[0].get_xlabel()
    'volume [µm³]'
    """
    wanted = [c for c in (columns or DEFAULT_HISTOGRAMS) if c in regions]
    data = {}
    for name in wanted:
        values = np.asarray(regions[name], dtype=np.float64)
        finite = values[np.isfinite(values)]
        if finite.size:
            data[name] = (finite, values.size - finite.size)
    if not data:
        return None
    fig = Figure(figsize=(4.4 * len(data), 3.6), layout="constrained")
    for k, (name, (values, dropped)) in enumerate(data.items()):
        ax = fig.add_subplot(1, len(data), k + 1)
        edges, log = _bins(values)
        ax.add_collection(_bars(values, edges, color=_FILL[k % 4], hatch=_HATCHES[k % 4]))
        ax.autoscale_view()
        median = float(np.median(values))
        ax.axvline(median, color="black", ls="--", lw=1.2, label=f"median {median:.3g}")
        if log:
            ax.set_xscale("log")
        else:
            ax.xaxis.set_major_locator(MaxNLocator(5))
        if values.max() >= 1e4:  # 20k rather than an offset or exponent on the axis
            ax.xaxis.set_major_formatter(EngFormatter(sep=""))
        unit = regions.units.get(name)
        word = Words(ndim).column(name)
        ax.set_xlabel(f"{word} [{unit}]" if unit else word)
        ax.set_ylabel("number of regions")
        note = f", {dropped} not finite (left out)" if dropped else ""
        ax.set_title(f"{word}: {values.size} regions{note}", fontsize=10)
        ax.legend(fontsize=8, frameon=False)
    return fig
