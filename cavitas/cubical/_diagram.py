"""The :class:`Diagram` container: persistence pairs per homology dimension."""

from __future__ import annotations

import os
from collections.abc import Iterable, Mapping
from typing import Any

import numpy as np

from .. import _checks
from .._errors import ParameterError

__all__ = ["PAIR_DTYPE", "Diagram"]

#: Row type of :meth:`Diagram.pairs`. Values are in the input's intensity units; voxels are
#: flat (C-order) indices into the image. An essential class has ``death = -inf`` for bright
#: walls (``+inf`` for dark walls) and ``death_voxel = -1``.
PAIR_DTYPE = np.dtype(
    [("birth", "f8"), ("death", "f8"), ("birth_voxel", "i8"), ("death_voxel", "i8")]
)


class Diagram:
    """Persistence diagram of a superlevel (bright walls) or sublevel (dark walls) filtration.

    Parameters
    ----------
    pairs : mapping of int to structured array
        For each computed homology dimension, an array of :data:`PAIR_DTYPE`. Rows with
        zero persistence are not stored.
    shape : tuple of int
        Shape of the image the diagram was computed from.
    walls : {"bright", "dark"}
        Polarity of the filtration: ``"bright"`` means superlevel sets (bright voxels enter
        first, births are above deaths); ``"dark"`` means sublevel sets.
    connectivity : int
        Connectivity of the wall set (1 = faces only, ``ndim`` = full).
    masked : bool, optional
        Whether an ROI mask restricted the computation.

    Notes
    -----
    Dimensions that were not computed are absent from ``pairs``; asking for them raises
    :class:`~cavitas.ParameterError` rather than returning an empty, misleading array.

    Examples
    --------
    >>> import numpy as np
    >>> rows = np.array([(5.0, 1.0, 7, 3)], dtype=PAIR_DTYPE)
    >>> dgm = Diagram({1: rows}, shape=(4, 4), walls="bright", connectivity=1)
    >>> dgm.persistence(1)
    array([4.])
    """

    def __init__(
        self,
        pairs: Mapping[int, np.ndarray],
        *,
        shape: Iterable[int],
        walls: str,
        connectivity: int,
        masked: bool = False,
    ) -> None:
        self.shape = tuple(int(s) for s in shape)
        self.walls = _checks.walls(walls)
        self.connectivity = int(connectivity)
        self.masked = bool(masked)
        self._pairs: dict[int, np.ndarray] = {}
        for dim, rows in pairs.items():
            rows = np.asarray(rows)
            if rows.dtype != PAIR_DTYPE:
                raise ParameterError(
                    f"pairs for dimension {dim} must have dtype {PAIR_DTYPE}; got {rows.dtype}."
                )
            self._pairs[int(dim)] = rows

    @property
    def ndim(self) -> int:
        """Dimension of the image (2 or 3)."""
        return len(self.shape)

    @property
    def dims(self) -> tuple[int, ...]:
        """The homology dimensions that were computed, ascending."""
        return tuple(sorted(self._pairs))

    @property
    def cavity_dim(self) -> int:
        """The homology dimension of cavities: ``ndim - 1`` (H1 in 2D, H2 in 3D)."""
        return self.ndim - 1

    def _check_dim(self, dim: int) -> int:
        dim = int(dim)
        if dim not in self._pairs:
            if 0 <= dim < self.ndim:
                raise ParameterError(
                    f"H{dim} of this {self.ndim}D image was not computed; "
                    f"computed dimensions: {list(self.dims)}."
                )
            raise ParameterError(
                f"dim must be in [0, {self.ndim - 1}] for a {self.ndim}D image; got {dim}."
            )
        return dim

    def pairs(self, dim: int) -> np.ndarray:
        """All pairs of dimension ``dim`` (a read-only structured array of :data:`PAIR_DTYPE`)."""
        rows = self._pairs[self._check_dim(dim)].view()
        rows.flags.writeable = False
        return rows

    def persistence(self, dim: int) -> np.ndarray:
        """Persistence ``|birth - death|`` of each pair of ``dim`` (``inf`` if essential)."""
        rows = self._pairs[self._check_dim(dim)]
        return np.abs(rows["birth"] - rows["death"])

    def essential(self, dim: int) -> np.ndarray:
        """Boolean mask of the essential (never dying) classes of ``dim``."""
        return ~np.isfinite(self._pairs[self._check_dim(dim)]["death"])

    def save(self, path: str | os.PathLike, *, force: bool = False,
             extra: Mapping[str, Mapping[int, Any]] | None = None) -> None:
        """Write the diagram to ``.npz`` or ``.csv``; see :func:`~cavitas.cubical.save_diagram`."""
        from ._diagram_io import save_diagram

        save_diagram(self, path, force=force, extra=extra)

    @classmethod
    def load(cls, path: str | os.PathLike) -> Diagram:
        """Read a diagram file; see :func:`~cavitas.cubical.load_diagram`."""
        from ._diagram_io import load_diagram

        return load_diagram(path)

    def summary(self) -> dict[str, Any]:
        """Counts and persistence quantiles; see :func:`~cavitas.cubical.diagram_summary`."""
        from ._summary import diagram_summary

        return diagram_summary(self)

    def __len__(self) -> int:
        return sum(len(v) for v in self._pairs.values())

    def __repr__(self) -> str:
        counts = ", ".join(f"H{d}: {len(self._pairs[d])}" for d in self.dims)
        return f"Diagram(shape={self.shape}, walls={self.walls!r}, {counts})"
