"""The overview picture: one representative slice, every region filled and numbered.

Regions are filled with colours that differ in lightness as well as hue, each carries its
table number (dark text on a light halo), regions cut by the scan border are striped and
left unnumbered, and a scale bar gives the physical size, so the picture reads in grey print.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from matplotlib import patheffects
from matplotlib.artist import Artist
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch, Rectangle

from .._shared.units import length_unit
from ._numbers import add_numbers
from ._render import block_reduce, intensity_window, outline_mask, take_slice

__all__ = ["nice_length", "plot_overview", "representative_slice"]

#: Width of the light outline around the region numbers and the dashed line (points).
_HALO_WIDTH = 2.6
_HALO = [patheffects.withStroke(linewidth=_HALO_WIDTH, foreground="white")]


def representative_slice(labels: np.ndarray, *, samples: int = 48) -> int:
    """The z slice (of at most ``samples`` evenly spaced ones) crossing the most regions.

    Examples
    --------
    >>> import numpy as np
    >>> lab = np.zeros((5, 4, 4), int); lab[3, :2, :2] = 1; lab[3, 2:, 2:] = 2; lab[1, 0, 0] = 3
    >>> representative_slice(lab)
    3
    """
    if labels.ndim == 2:
        return 0
    picks = np.unique(np.linspace(0, labels.shape[0] - 1, min(samples, labels.shape[0]))
                      .round().astype(int))
    counts = [np.unique(np.asarray(labels[z])).size for z in picks]
    return int(picks[int(np.argmax(counts))])


def nice_length(span: float) -> float:
    """A round length (1, 2 or 5 times a power of ten) near a fifth of ``span``.

    Examples
    --------
    >>> nice_length(512.0), nice_length(0.9)
    (100.0, 0.1)
    """
    want = span / 5
    step = 10 ** np.floor(np.log10(want))
    return float(max(m * step for m in (1, 2, 5) if m * step <= want))


def _palette(count: int) -> np.ndarray:
    """``count`` RGB colours that alternate in lightness and walk round the hue circle."""
    k = np.arange(count)
    hue = (k * 0.618034) % 1.0
    light = np.where(k % 3 == 0, 0.78, np.where(k % 3 == 1, 0.6, 0.45))
    # a simple hue wheel scaled to the lightness (no external colour maps)
    angle = 2 * np.pi * hue[:, None] + np.array([0.0, 2.094, 4.189])
    rgb = 0.5 + 0.5 * np.cos(angle)
    return np.clip(rgb * 0.55 + light[:, None] * 0.45 + (light[:, None] - 0.6) * 0.5, 0, 1)


def plot_overview(image: np.ndarray, labels: np.ndarray, *, spacing: Sequence[float],
                  unit: str, border: Sequence[int] = (), highlight: int | None = None,
                  max_side: int = 640, max_numbers: int = 400,
                  window: tuple[float, float] | None = None) -> tuple[Figure, str]:
    """The overview figure and a sentence saying which slice it shows.

    Parameters
    ----------
    image, labels : array
        The scan and its label map (2D, or 3D: the z slice crossing most regions is shown).
    spacing, unit : sequence of float, str
        Voxel size in ``(z, y, x)`` order and its unit (for the axes and the scale bar).
    border : sequence of int
        Labels of regions cut by the scan border: pale with dark stripes, not numbered.
    highlight : int, optional
        A label outlined with a thick dashed line (the report marks the least certain
        region this way in 2D).
    max_side : int
        Larger slices are reduced by a whole factor for drawing.
    max_numbers : int
        Most region numbers drawn (the largest regions of the slice first).
    window : (float, float), optional
        Display range of the intensities (default: :func:`intensity_window` of
        ``image``; a caller drawing several pictures of one scan computes it once).

    Examples
    --------
    >>> import numpy as np
    >>> lab = np.zeros((20, 20), int); lab[2:8, 2:8] = 1; lab[10:18, 10:18] = 2
    >>> fig, where = plot_overview(np.ones((20, 20)), lab, spacing=(1.0, 1.0), unit="µm")
    >>> [len(c.get_paths()) for c in fig.axes[0].collections if c.get_gid() == "numbers"]
    [2]
    """
    unit = length_unit(unit, np.ndim(image))
    z = representative_slice(labels)
    plane = take_slice(image, 0, z)
    lab = np.asarray(take_slice(labels, 0, z))
    dy, dx = spacing[-2], spacing[-1]
    factor = max(1, int(np.ceil(max(plane.shape) / max_side)))
    lo, hi = window or intensity_window(image)
    grey = np.clip((block_reduce(np.asarray(plane, np.float64), factor) - lo) / (hi - lo), 0, 1)
    small = lab[factor // 2::factor, factor // 2::factor][:grey.shape[0], :grey.shape[1]]
    ids = np.unique(small[small > 0])
    colours = _palette(len(ids))
    rgb = np.repeat(grey[..., None], 3, axis=-1)
    where = np.searchsorted(ids, small)
    inside = small > 0
    is_border = np.isin(small, np.asarray(border, dtype=small.dtype))
    fill = inside & ~is_border
    rgb[fill] = 0.35 * rgb[fill] + 0.65 * colours[where[fill]]
    rgb[is_border] = 0.4 * rgb[is_border] + 0.6 * 0.85  # pale, with dark diagonal stripes
    grid = np.indices(small.shape)
    rows, cols = grid[0], grid[1]
    stripes = is_border & (((rows + cols) // max(2, small.shape[1] // 120)) % 3 == 0)
    rgb[stripes] = 0.2
    edge = outline_mask(small)
    rgb[edge] = 0.08
    height, width = grey.shape[0] * factor * dy, grey.shape[1] * factor * dx
    aspect = height / width
    fig = Figure(figsize=(7.2, min(max(7.2 * aspect, 3.0), 9.0) + 0.6), layout="constrained")
    ax = fig.add_subplot()
    ax.imshow(rgb, extent=(0, width, height, 0), interpolation="nearest")
    sizes = np.bincount(np.searchsorted(ids, small[fill]), minlength=len(ids))
    sum_r = np.bincount(where[fill], rows[fill], minlength=len(ids))
    sum_c = np.bincount(where[fill], cols[fill], minlength=len(ids))
    font = 9 if len(ids) < 60 else 7
    bar = nice_length(width)
    pad, thick = 0.03 * width, 0.018 * height
    box_x, box_y = pad / 2, height - 2 * pad - 0.09 * height
    box_w, box_h = bar + pad, 0.09 * height + 1.5 * pad
    picked = np.argsort(-sizes)[:max_numbers]
    picked = picked[sizes[picked] >= 12]
    ys = (sum_r[picked] / sizes[picked] + 0.5) * factor * dy
    xs = (sum_c[picked] / sizes[picked] + 0.5) * factor * dx
    # under the scale bar: the table and the slice browser still name it
    clear = ~((xs < box_x + box_w + pad) & (ys > box_y - pad))
    add_numbers(ax, xs[clear], ys[clear], [str(int(i)) for i in ids[picked][clear]],
                size=font, halo=_HALO_WIDTH)
    ax.add_patch(Rectangle((box_x, box_y), box_w, box_h, facecolor="white", alpha=0.85,
                           edgecolor="black", linewidth=0.8))
    ax.add_patch(Rectangle((pad, height - pad - thick), bar, thick, facecolor="black"))
    ax.text(pad + bar / 2, height - pad - 1.6 * thick, f"{bar:g} {unit}", ha="center",
            va="bottom", fontsize=10)
    ax.set_xlabel(f"x [{unit}]")
    ax.set_ylabel(f"y [{unit}]")
    handles: list[Artist] = [Patch(facecolor="#c9b26b", edgecolor="black",
                     label="enclosed region (number = table label)")]
    if highlight is not None and (small == highlight).any():
        ax.contour((np.arange(small.shape[1]) + 0.5) * factor * dx,
                   (np.arange(small.shape[0]) + 0.5) * factor * dy,
                   (small == highlight).astype(np.float32), levels=[0.5], colors="black",
                   linestyles="--", linewidths=2.2).set(path_effects=_HALO)
        handles.append(Line2D([], [], color="black", ls="--", lw=2.2,
                              label=f"least certain region ({highlight})"))
    if is_border.any():
        handles.append(Patch(facecolor="none", edgecolor="black", hatch="////",
                             label="cut by the scan border"))
    fig.legend(handles=handles, loc="outside lower center", ncols=len(handles), fontsize=9,
               frameon=False)
    if labels.ndim == 3:
        sentence = (f"Slice {z + 1} of {labels.shape[0]} across z (z = {z * spacing[0]:.4g} "
                    f"{unit}), the one crossing the most regions.")
    else:
        sentence = "The whole image."
    return fig, sentence
