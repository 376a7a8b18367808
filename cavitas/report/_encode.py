"""Encode pictures as PNG bytes and ``data:`` URIs, so the report needs no other file."""

from __future__ import annotations

import base64
import io

from matplotlib.figure import Figure

__all__ = ["data_uri", "figure_png"]


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
    fig.savefig(buf, format="png", dpi=dpi, metadata={"Software": None},
                pil_kwargs={"compress_level": 2})  # plots compress well anyway; saves time
    return buf.getvalue()
