"""Many short numbers on a picture as two path collections: a light halo, then the glyphs.

Hundreds of text artists, each with a halo path effect, cost the report most of its
overview's drawing time (every one is laid out, converted to a path and stroked on its
own). Here each digit's outline is made once (:class:`matplotlib.textpath.TextPath`, the
outline Matplotlib itself draws for text with a path effect), a number is its digits'
outlines placed side by side at their advance widths, and all numbers are drawn by two
collections: the white halos, then the dark glyphs.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import RendererAgg
from matplotlib.collections import PathCollection
from matplotlib.font_manager import FontProperties, findfont, get_font
from matplotlib.path import Path
from matplotlib.textpath import TextPath, text_to_path
from matplotlib.transforms import Affine2D

__all__ = ["add_numbers", "number_paths"]


@dataclass(frozen=True)
class _Digits:
    """What Matplotlib's Agg text layout uses for a digit string at one size, in points.

    ``vertices`` and ``codes``: each digit's outline; ``advance``: where the next glyph
    starts; ``laid``: the digit's width in the layout at the drawing resolution (hinted
    whole pixels), which ``ha="center"`` halves; ``drop``: how far the baseline lies below
    the centre of the line box that ``va="center"`` centres (:func:`_drop`; a digit never
    reaches beyond the font's ascender and descender).
    """

    vertices: dict[str, np.ndarray]
    codes: dict[str, np.ndarray]
    advance: dict[str, float]
    laid: dict[str, float]
    drop: float


def _drop(prop: FontProperties, layout: RendererAgg) -> float:
    """How far the baseline lies below the centre of a one-line text box, in points: the
    box of the font's typographic ascender and descender (else its horizontal header's),
    or, for a font with neither, of ``"lp"`` as laid out (Matplotlib's own order)."""
    font = get_font(findfont(prop))
    head, os2, hhea = (font.get_sfnt_table("head"), font.get_sfnt_table("OS/2"),
                       font.get_sfnt_table("hhea"))
    size = prop.get_size_in_points()
    if head is not None and os2 is not None:
        return (os2["sTypoAscender"] + os2["sTypoDescender"]) / 2 / head["unitsPerEm"] * size
    if head is not None and hhea is not None:
        return (hhea["ascent"] + hhea["descent"]) / 2 / head["unitsPerEm"] * size
    _, height, descent = layout.get_text_width_height_descent("lp", prop, ismath=False)
    return (height / 2 - descent) * 72 / layout.dpi


@lru_cache(maxsize=8)
def _digits(size: float, dpi: float) -> _Digits:
    """The :class:`_Digits` of the default font at ``size`` points drawn at ``dpi``."""
    prop = FontProperties(size=size)
    layout = RendererAgg(1, 1, dpi)
    vertices, codes, advance, laid = {}, {}, {}, {}
    for c in "0123456789":
        outline = TextPath((0, 0), c, prop=prop)
        vertices[c] = np.asarray(outline.vertices, np.float64)
        codes[c] = np.asarray(outline.codes, Path.code_type)
        one = text_to_path.get_text_width_height_descent(c, prop, ismath=False)[0]
        two = text_to_path.get_text_width_height_descent(c + c, prop, ismath=False)[0]
        advance[c] = float(two - one)
        width = layout.get_text_width_height_descent(c, prop, ismath=False)[0]
        laid[c] = float(width) * 72 / dpi
    return _Digits(vertices, codes, advance, laid, _drop(prop, layout))


def number_paths(texts: Sequence[str], size: float, *, dpi: float = 100) -> list[Path]:
    """Outlines of the digit strings ``texts`` in points, each placed around ``(0, 0)`` as
    ``ha="center", va="center"`` places a text drawn at ``dpi``.

    Examples
    --------
    >>> paths = number_paths(["7", "12"], 9)
    >>> len(paths), bool(paths[1].get_extents().width > paths[0].get_extents().width)
    (2, True)
    """
    digits = _digits(float(size), float(dpi))
    paths = []
    for text in texts:
        parts, codes, x = [], [], -sum(digits.laid[c] for c in text) / 2
        for c in text:
            parts.append(digits.vertices[c] + np.array([x, -digits.drop]))
            codes.append(digits.codes[c])
            x += digits.advance[c]
        paths.append(Path(np.concatenate(parts), np.concatenate(codes)))
    return paths


def add_numbers(ax: Axes, xs: Sequence[float], ys: Sequence[float], texts: Sequence[str], *,
                size: float, halo: float, color: str = "black",
                halo_color: str = "white") -> None:
    """Draw each digit string ``texts[k]`` centred on the data point ``(xs[k], ys[k])``.

    ``size`` is the font size and ``halo`` the width of the light outline, both in points.
    The numbers take no room in the layout and are not clipped to the axes, like text;
    the glyphs' collection has the gid ``"numbers"``.
    """
    if not len(texts):
        return
    paths = number_paths(texts, size, dpi=ax.figure.dpi)
    points = Affine2D().scale(1 / 72) + ax.figure.dpi_scale_trans  # points to pixels
    offsets = np.column_stack([xs, ys])
    for face, edge, width, gid in (("none", halo_color, halo, "halos"),
                                   (color, "none", 0.0, "numbers")):
        numbers = PathCollection(paths, facecolors=face, edgecolors=edge, linewidths=width,
                                 offsets=offsets, offset_transform=ax.transData,
                                 transform=points, zorder=3, gid=gid)
        numbers.set_in_layout(False)
        numbers.set_clip_on(False)
        ax.add_collection(numbers, autolim=False)
