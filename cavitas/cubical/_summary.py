"""A short account of a :class:`Diagram`: counts and persistence quantiles per dimension."""

from __future__ import annotations

from typing import Any

import numpy as np

from .._caution import RESEARCH_ONLY
from ._diagram import Diagram

__all__ = ["diagram_summary", "format_summary"]

#: Persistence quantiles reported per dimension (percent), besides the maximum.
QUANTILES = (50, 90, 99)


def diagram_summary(dgm: Diagram) -> dict[str, Any]:
    """Counts and persistence quantiles per homology dimension, as a JSON-ready dict.

    Quantiles are taken over the finite pairs (essential classes are counted apart);
    they are ``None`` for a dimension without finite pairs.

    Examples
    --------
    >>> from cavitas.cubical import PAIR_DTYPE
    >>> rows = np.array([(5.0, 1.0, 7, 3), (9.0, -np.inf, 0, -1)], dtype=PAIR_DTYPE)
    >>> s = diagram_summary(Diagram({0: rows}, shape=(4, 4), walls="bright", connectivity=1))
    >>> s["dimensions"]["H0"]
    {'pairs': 2, 'essential': 1, 'persistence': {'p50': 4.0, 'p90': 4.0, 'p99': 4.0, 'max': 4.0}}
    """
    dims: dict[str, Any] = {}
    for dim in dgm.dims:
        pers = dgm.persistence(dim)
        essential = dgm.essential(dim)
        finite = pers[~essential]
        quantiles = None
        if len(finite):
            values = np.percentile(finite, QUANTILES)
            quantiles = {f"p{q}": float(v) for q, v in zip(QUANTILES, values, strict=True)}
            quantiles["max"] = float(finite.max())
        dims[f"H{dim}"] = {"pairs": int(len(pers)), "essential": int(essential.sum()),
                           "persistence": quantiles}
    return {
        "shape": list(dgm.shape),
        "walls": dgm.walls,
        "connectivity": dgm.connectivity,
        "masked": dgm.masked,
        "cavity_dimension": dgm.cavity_dim,
        "dimensions": dims,
        "caution": RESEARCH_ONLY,
    }


def format_summary(dgm: Diagram) -> str:
    """The summary of :func:`diagram_summary` as a few lines of text.

    Examples
    --------
    >>> from cavitas.cubical import PAIR_DTYPE
    >>> rows = np.array([(5.0, 1.0, 7, 3), (9.0, -np.inf, 0, -1)], dtype=PAIR_DTYPE)
    >>> print(format_summary(Diagram({0: rows}, shape=(4, 4), walls="bright", connectivity=1)))
    Persistence diagram of a 4 x 4 image (bright walls: superlevel filtration, connectivity 1)
      H0 (wall components): 2 pairs, 1 essential; persistence median 4, 90% 4, 99% 4, max 4
      H1 (cavities): not computed
    """
    summary = diagram_summary(dgm)
    level = "superlevel" if dgm.walls == "bright" else "sublevel"
    roi = ", inside an ROI mask" if dgm.masked else ""
    lines = [
        f"Persistence diagram of a {' x '.join(map(str, dgm.shape))} image "
        f"({dgm.walls} walls: {level} filtration, connectivity {dgm.connectivity}{roi})"
    ]
    for dim in range(dgm.ndim):
        role = {0: "wall components", dgm.cavity_dim: "cavities"}.get(dim, "tunnels")
        info = summary["dimensions"].get(f"H{dim}")
        if info is None:
            lines.append(f"  H{dim} ({role}): not computed")
            continue
        text = f"  H{dim} ({role}): {info['pairs']} pairs, {info['essential']} essential"
        quant = info["persistence"]
        if quant is not None:
            text += (f"; persistence median {quant['p50']:.4g}, 90% {quant['p90']:.4g}, "
                     f"99% {quant['p99']:.4g}, max {quant['max']:.4g}")
        lines.append(text)
    return "\n".join(lines)
