"""Cubical persistent homology of 2D images and 3D volumes."""

from ._diagram import PAIR_DTYPE, Diagram
from ._tree import OUTSIDE, CavityTree

__all__ = ["PAIR_DTYPE", "OUTSIDE", "CavityTree", "Diagram"]
