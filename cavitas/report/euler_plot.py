"""Figure of an Euler characteristic curve: χ of the walls against the level."""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure

from ..cubical._euler import EulerCurve
from .diagram_plots import DIM_STYLE

__all__ = ["plot_euler_curve"]


def plot_euler_curve(curve: EulerCurve, *, unit: str | None = None) -> Figure:
    """χ of the wall set as a step line over the levels, in the order the walls grow.

    Parameters
    ----------
    curve : EulerCurve
        The curve to draw (see :func:`cavitas.cubical.euler_curve`).
    unit : str, optional
        Intensity unit for the level axis (default: "input intensity").

    Returns
    -------
    matplotlib.figure.Figure

    Notes
    -----
    Bright walls grow as the level falls, so the level axis then runs from high to low:
    time in the filtration always runs to the right.

    Examples
    --------
    >>> from cavitas.cubical import euler_curve
    >>> fig = plot_euler_curve(euler_curve(np.array([[0, 2], [2, 0]])))
    >>> bool(fig.axes[0].xaxis_inverted())   # bright walls: levels fall to the right
    True
    """
    fig = Figure(figsize=(6.4, 3.8), layout="constrained")
    ax = fig.add_subplot()
    ax.step(curve.levels, curve.chi, where="post", color=DIM_STYLE[0]["color"], linewidth=1.2)
    ax.axhline(0, color="#6b6b6b", linewidth=0.8, linestyle=":")
    if curve.walls == "bright" and len(curve.levels) > 1:
        ax.invert_xaxis()
    if len(curve.levels) == 1:
        level = float(np.asarray(curve.levels)[0])
        ax.set_xlim(level - 1, level + 1)
    ax.set_xlabel(f"level ({unit or 'input intensity'}); walls are the voxels "
                  f"{'at or above' if curve.walls == 'bright' else 'at or below'} it")
    ax.set_ylabel("Euler characteristic χ")
    kind = "faces only" if curve.connectivity == 1 else "full"
    ax.set_title(f"Euler characteristic of the {curve.walls} walls ({kind} connectivity)")
    return fig
