"""The report's section on how the walls connect: Betti numbers, connectivity density and
the Euler characteristic curve."""

from __future__ import annotations

import html

from .._shared.units import size_unit
from ..cubical._euler import ConnectivityDensity, EulerCurve
from ._words import Words, round_number

__all__ = ["euler_caption", "topology_html"]


def _facts(topology: ConnectivityDensity, words: Words) -> list[tuple[str, str]]:
    loops = "Loops β1 (tunnels, handles)" if words.ndim == 3 else "Holes β1"
    rows = [("Pieces of wall β0", f"{topology.betti0:,}"), (loops, f"{topology.betti1:,}")]
    if words.ndim == 3:
        rows.append(("Enclosed cavities β2", f"{topology.betti2:,}"))
    rows += [
        ("Euler characteristic χ", f"{topology.chi:,}"),
        ("Connectivity density (β1 per " + words.size + ")",
         f"{round_number(topology.density)} per "
         f"{size_unit(topology.unit, words.ndim, plural=False)}"),
    ]
    return rows


def topology_html(topology: ConnectivityDensity, *, ndim: int) -> str:
    """What the segmented walls are, then their Betti numbers and density as a table.

    Examples
    --------
    >>> import numpy as np
    >>> ring = np.ones((3, 3), bool); ring[1, 1] = False
    >>> from cavitas.cubical import connectivity_density
    >>> "Holes β1</th><td>1" in topology_html(connectivity_density(ring), ndim=2)
    True
    """
    esc = html.escape
    words = Words(ndim)
    chi = "β0 − β1 + β2" if ndim == 3 else "β0 − β1"
    rows = "".join(f"<tr><th>{esc(k)}</th><td>{esc(v)}</td></tr>"
                   for k, v in _facts(topology, words))
    return (f"<p>The segmented walls are every {words.element} that no region holds "
            f"(regions cut by the scan border count as regions). Counted with the run's "
            f"connectivity, χ = {chi}; the connectivity density is the number of loops per "
            f"unit {words.size}, as bone and porous-media morphometry report it (Odgaard "
            f'&amp; Gundersen 1993).</p><table class="kv" id="wall-topology">{rows}</table>')


def euler_caption(curve: EulerCurve, *, ndim: int) -> str:
    """How to read the Euler characteristic curve of the report.

    Examples
    --------
    >>> from cavitas.cubical import euler_curve
    >>> import numpy as np
    >>> euler_caption(euler_curve(np.eye(3)), ndim=2)[:40]
    'The Euler characteristic of the walls at'
    """
    side = "at or above" if curve.walls == "bright" else "at or below"
    return (f"The Euler characteristic of the walls at every level of the image (without "
            f"smoothing): the walls at a level are the {Words(ndim).element}s {side} it. "
            "χ above 0 means separate pieces of wall prevail, below 0 loops (a network of "
            "struts); the levels where it changes are in euler.csv.")
