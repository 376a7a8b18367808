"""Orthogonal slices through a volume with region outlines, as Matplotlib figures."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from matplotlib import patheffects
from matplotlib.figure import Figure
from matplotlib.lines import Line2D

from .._errors import ParameterError
from .._shared.units import length_unit
from .._table import Table
from ._regions import pick_region, region_centroids
from ._render import OUTLINE_LIGHT, intensity_window, render_slice, take_slice, to_rgb

__all__ = ["plot_region_slices", "plot_slices"]

_AXES = ("z", "y", "x")
#: The selected region: a dashed line with a light halo, and a plus at its centroid.
_SELECTED = "#7a1f5c"
_HALO = [patheffects.withStroke(linewidth=3.2, foreground="white")]


def _views(ndim: int) -> list[tuple[int | None, int, int]]:
    """(sliced axis, row axis, column axis) of each panel."""
    return [(None, 0, 1)] if ndim == 2 else [(0, 1, 2), (1, 0, 2), (2, 0, 1)]


def plot_slices(image: np.ndarray, labels: np.ndarray | None = None, *,
                spacing: Sequence[float] | None = None, unit: str | None = None,
                point: Sequence[float] | None = None, highlight: int | None = None,
                title: str | None = None, max_side: int = 512,
                window: tuple[float, float] | None = None) -> Figure:
    """Orthogonal slices through ``point`` with the outlines of every labelled region.

    Parameters
    ----------
    image : (Z, Y, X) or (Y, X) array
        The scan.
    labels : int array of the same shape, optional
        Region labels (0 = none); each region's inner outline is drawn two-tone.
    spacing, unit : optional
        Voxel size in ``(z, y, x)`` order and its unit; axes are in physical units and
        anisotropic voxels are shown with their true aspect.
    point : sequence of float, optional
        Voxel coordinates the three planes pass through (default: the centre).
    highlight : int, optional
        A label drawn with a dashed line and marked with a plus at ``point``.
    title : str, optional
        Figure title.
    max_side : int
        Planes larger than this are block-averaged down for drawing.
    window : (float, float), optional
        Display range of the intensities (default: :func:`intensity_window` of
        ``image``; a caller drawing several pictures of one scan computes it once).

    Returns
    -------
    matplotlib.figure.Figure
        One panel in 2D, three (across z, y and x) in 3D.

    Examples
    --------
    >>> import numpy as np
    >>> img = np.ones((8, 8, 8)); lab = np.zeros((8, 8, 8), int); lab[2:6, 2:6, 2:6] = 1
    >>> fig = plot_slices(img, lab, spacing=(2.0, 1.0, 1.0), unit="µm")
    >>> len(fig.axes)
    3
    """
    image = np.asarray(image) if not hasattr(image, "ndim") else image
    if image.ndim not in (2, 3):
        raise ParameterError(f"image must be 2D or 3D; got {image.ndim} dimensions.")
    if labels is not None and tuple(labels.shape) != tuple(image.shape):
        raise ParameterError(
            f"labels must have the image's shape {tuple(image.shape)}; got {tuple(labels.shape)}."
        )
    ndim = image.ndim
    spacing = tuple(float(s) for s in (spacing or (1.0,) * ndim))
    unit = length_unit(unit or "voxel", ndim)
    shape = tuple(image.shape)
    if point is None:
        point = [(n - 1) / 2 for n in shape]
    index = [int(np.clip(round(float(p)), 0, n - 1)) for p, n in zip(point, shape, strict=True)]
    window = window or intensity_window(image)
    views = _views(ndim)
    heights = [shape[r] * spacing[r] for _, r, _ in views]
    widths = [shape[c] * spacing[c] for _, _, c in views]
    inch = min(3.6 / max(heights), 12.0 / sum(widths))  # inches per physical unit
    # room beside the pictures: tick labels and axis labels per panel, then the panel
    # titles, the figure title and the legend row (too little and constrained layout lets
    # the figure title run into the panel titles)
    fig = Figure(figsize=(sum(widths) * inch + 1.0 * len(views) + 0.4,
                          max(heights) * inch + (2.3 if title else 1.9)), layout="constrained")
    grid = fig.add_gridspec(1, len(views), width_ratios=widths)
    for k, (axis, r, c) in enumerate(views):
        ax = fig.add_subplot(grid[0, k])
        where = index[axis] if axis is not None else 0
        plane = take_slice(image, axis or 0, where)
        lab = None if labels is None else take_slice(labels, axis or 0, where)
        factor = max(1, int(np.ceil(max(plane.shape) / max_side)))
        grey, code = render_slice(plane, lab, window, factor=factor)
        height, width = grey.shape[0] * factor * spacing[r], grey.shape[1] * factor * spacing[c]
        extent = (0.0, width, height, 0.0)
        ax.imshow(to_rgb(grey, code), extent=extent, interpolation="nearest")
        for other, line in ((c, ax.axvline), (r, ax.axhline)):
            if ndim == 3:  # where the other two panels cut this one
                line((index[other] + 0.5) * spacing[other], color="white", lw=0.8,
                     ls=":", alpha=0.9)
        if highlight is not None and lab is not None and (lab == highlight).any():
            ys = (np.arange(lab.shape[0]) + 0.5) * spacing[r]
            xs = (np.arange(lab.shape[1]) + 0.5) * spacing[c]
            ax.contour(xs, ys, (lab == highlight).astype(float), levels=[0.5],
                       colors=[_SELECTED], linestyles="--", linewidths=1.6).set(
                path_effects=_HALO)
            ax.plot((point[c] + 0.5) * spacing[c], (point[r] + 0.5) * spacing[r], "+",
                    ms=14, mew=2, color=_SELECTED, path_effects=_HALO)
        ax.set_xlabel(f"{_AXES[3 - ndim + c]} [{unit}]")
        ax.set_ylabel(f"{_AXES[3 - ndim + r]} [{unit}]")
        if axis is not None:
            ax.set_title(f"{_AXES[axis]} = {index[axis] * spacing[axis]:.4g} {unit} "
                         f"(slice {index[axis]})", fontsize=10)
    handles = [Line2D([], [], color="#" + "".join(f"{v:02x}" for v in OUTLINE_LIGHT), lw=2,
                      label="region outlines (two-tone)")]
    if highlight is not None:
        handles.append(Line2D([], [], color=_SELECTED, ls="--", marker="+", ms=10, lw=1.6,
                              label=f"region {highlight}"))
    if ndim == 3:
        handles.append(Line2D([], [], color="0.4", ls=":", label="positions of the other planes"))
    if title:
        fig.suptitle(title)
    fig.legend(handles=handles, loc="outside lower center", ncols=len(handles), fontsize=9,
               frameon=False)
    return fig


def plot_region_slices(image: np.ndarray, labels: np.ndarray, regions: Table, *,
                       which: str = "largest", spacing: Sequence[float] | None = None,
                       unit: str | None = None,
                       window: tuple[float, float] | None = None) -> Figure | None:
    """Orthogonal slices through the centroid of the largest or least certain region.

    ``which`` is ``"largest"`` (largest ``volume``) or ``"least_certain"`` (smallest
    ``margin``, else smallest ``persistence``). Returns ``None`` when the table has no row
    to pick (empty, or no such column). ``window`` as for :func:`plot_slices`.

    Examples
    --------
    >>> import numpy as np
    >>> lab = np.zeros((9, 9), int); lab[1:3, 1:3] = 1; lab[4:8, 4:8] = 2
    >>> t = Table({"label": [1, 2], "volume": [4.0, 16.0]})
    >>> fig = plot_region_slices(np.ones((9, 9)), lab, t)
    >>> fig.texts[-1].get_text()
    'Largest region: label 2'
    """
    row = pick_region(regions, which)
    if row is None:
        return None
    label = int(regions["label"][row]) if "label" in regions else None
    centre = region_centroids(labels, regions.select([row]))[0]
    if not np.all(np.isfinite(centre)):
        return None
    name = "Largest region" if which == "largest" else "Least certain region"
    return plot_slices(image, labels, spacing=spacing, unit=unit, point=centre,
                       highlight=label, title=f"{name}: label {label}", window=window)
