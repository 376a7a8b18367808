"""Encode pictures as PNG bytes and ``data:`` URIs, so the report needs no other file."""

from __future__ import annotations

import base64
import io
import struct

from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.image import imsave

__all__ = ["REPORT_DPI", "data_uri", "figure_png", "png_size"]

#: Resolution of the report's pictures (dots per inch): drawn at the size shown.
REPORT_DPI = 100


def data_uri(png: bytes) -> str:
    """A ``data:image/png;base64,...`` URI holding ``png``.

    Examples
    --------
    >>> data_uri(b"abc")
    'data:image/png;base64,YWJj'
    """
    return "data:image/png;base64," + base64.b64encode(png).decode("ascii")


def png_size(png: bytes) -> tuple[int, int]:
    """Width and height in pixels of a PNG (its header chunk).

    Examples
    --------
    >>> fig = Figure(figsize=(2, 1))
    >>> png_size(figure_png(fig))
    (200, 100)
    """
    width, height = struct.unpack(">II", png[16:24])
    return int(width), int(height)


def figure_png(fig: Figure, *, dpi: int = REPORT_DPI) -> bytes:
    """Render a Matplotlib figure to PNG bytes (Agg, no display needed).

    One drawing pass lays the figure out and paints it (``savefig`` paints twice when
    the figure has a layout engine: once to lay out, once to save); the pixels are the
    same.

    Examples
    --------
    >>> fig = Figure(figsize=(2, 1), layout="constrained")
    >>> _ = fig.add_subplot().plot([0, 1])
    >>> figure_png(fig)[:8] == b"\\x89PNG\\r\\n\\x1a\\n"
    True
    """
    fig.set_dpi(dpi)
    canvas = FigureCanvasAgg(fig)
    canvas.draw()
    buf = io.BytesIO()
    # None drops the key (matplotlib's documented use; its stub says str only)
    no_software: dict = {"Software": None}
    imsave(buf, canvas.buffer_rgba(), format="png", dpi=dpi, metadata=no_software,
           pil_kwargs={"compress_level": 2})  # plots compress well anyway; saves time
    return buf.getvalue()
