"""Encode pictures as PNG bytes and ``data:`` URIs, so the report needs no other file."""

from __future__ import annotations

import base64
import io

import numpy as np
from matplotlib.figure import Figure
from PIL import Image

from ._render import OUTLINE_DARK, OUTLINE_LIGHT

__all__ = ["data_uri", "figure_png", "grey_png", "outline_png"]


def data_uri(png: bytes) -> str:
    """A ``data:image/png;base64,...`` URI holding ``png``.

    Examples
    --------
    >>> data_uri(b"abc")
    'data:image/png;base64,YWJj'
    """
    return "data:image/png;base64," + base64.b64encode(png).decode("ascii")


def figure_png(fig: Figure, *, dpi: int = 100) -> bytes:
    """Render a Matplotlib figure to PNG bytes (Agg, no display needed)."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, metadata={"Software": None})
    return buf.getvalue()


def grey_png(grey: np.ndarray, *, levels: int = 256) -> bytes:
    """An 8-bit grey PNG of grey indices in ``[0, levels)`` (stretched to 0..255).

    Examples
    --------
    >>> import numpy as np
    >>> grey_png(np.zeros((4, 4), np.uint8))[:8]
    b'\\x89PNG\\r\\n\\x1a\\n'
    """
    lut = np.round(np.arange(256) * (255.0 / max(levels - 1, 1))).clip(0, 255).astype(np.uint8)
    buf = io.BytesIO()
    Image.fromarray(lut[grey]).save(buf, format="PNG", optimize=True)
    return buf.getvalue()


def outline_png(code: np.ndarray) -> bytes:
    """A transparent PNG with the outline tones of :func:`~._render.render_slice`'s code."""
    img = Image.fromarray(code.astype(np.uint8))  # "L", made "P" by putpalette
    img.putpalette([0, 0, 0, *OUTLINE_LIGHT, *OUTLINE_DARK])
    buf = io.BytesIO()
    img.save(buf, format="PNG", optimize=True, transparency=0)
    return buf.getvalue()
