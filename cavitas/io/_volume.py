"""The :class:`Volume` type: an image array with its geometry and metadata."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from .. import _checks
from .._errors import ParameterError

__all__ = ["Volume"]


@dataclass(eq=False, init=False)
class Volume:
    """An image (2D) or volume (3D) with its voxel spacing, unit, affine and metadata.

    Arrays are indexed ``(z, y, x)`` in 3D and ``(y, x)`` in 2D; ``spacing`` is given in
    the same order, in physical units of ``unit``.

    Parameters
    ----------
    data : array_like
        The image, 2D or 3D. Kept as given (a memory map stays a memory map).
    spacing : sequence of float, optional
        Voxel size along each axis, in ``(z, y, x)`` order. Defaults to 1 per axis.
    unit : str, optional
        Physical unit of ``spacing``. Defaults to ``"voxel"`` when no spacing is given
        and to ``"µm"`` when a spacing is given without a unit.
    affine : (ndim + 1, ndim + 1) or (4, 4) array, optional
        Voxel-to-world transform, when the file provides one (NIfTI). Kept in float64.
    source : str or Path, optional
        The file (or folder / glob) the volume was read from.
    meta : mapping, optional
        Free-form metadata (format, channel, time point, warnings found on reading ...).

    Examples
    --------
    >>> import numpy as np
    >>> vol = Volume(np.zeros((4, 5, 6), np.uint16), spacing=(2.0, 1.0, 1.0))
    >>> vol.shape, vol.spacing, vol.unit
    ((4, 5, 6), (2.0, 1.0, 1.0), 'µm')
    >>> vol.voxel_volume
    2.0
    """

    data: Any
    spacing: tuple[float, ...]
    unit: str
    affine: np.ndarray | None
    source: str | None
    meta: dict[str, Any]

    def __init__(
        self,
        data: Any,
        spacing: Sequence[float] | None = None,
        unit: str | None = None,
        affine: Any = None,
        source: str | Path | None = None,
        meta: Mapping[str, Any] | None = None,
    ) -> None:
        self.data = data
        if not hasattr(self.data, "shape") or not hasattr(self.data, "dtype"):
            self.data = np.asarray(self.data)
        ndim = len(self.data.shape)
        if ndim not in (2, 3):
            raise ParameterError(
                f"A volume must be 2D or 3D; got an array with {ndim} dimension(s) "
                f"and shape {tuple(self.data.shape)}."
            )
        if spacing is None:
            self.spacing = (1.0,) * ndim
            self.unit = "voxel" if unit is None else unit
        else:
            self.spacing = _checks.spacing(spacing, ndim)
            self.unit = "µm" if unit is None else unit
        self.affine = None
        if affine is not None:
            matrix = np.asarray(affine, dtype=np.float64)
            if matrix.shape != (4, 4):
                raise ParameterError(f"affine must be a 4x4 matrix; got shape {matrix.shape}.")
            self.affine = matrix
        self.source = None if source is None else str(source)
        self.meta = dict(meta) if meta is not None else {}

    @property
    def shape(self) -> tuple[int, ...]:
        """Shape of the data, ``(z, y, x)`` or ``(y, x)``."""
        return tuple(self.data.shape)

    @property
    def ndim(self) -> int:
        """Number of axes (2 or 3)."""
        return len(self.data.shape)

    @property
    def dtype(self) -> np.dtype:
        """Data type of the voxels."""
        return np.dtype(self.data.dtype)

    @property
    def voxel_volume(self) -> float:
        """Physical volume (area in 2D) of one voxel, in ``unit**ndim``."""
        return float(np.prod(self.spacing))

    @property
    def name(self) -> str:
        """A short name for messages: the source file name, or ``"<array>"``."""
        return Path(self.source).name if self.source else "<array>"

    def with_data(self, data: Any, **changes: Any) -> Volume:
        """Return a new volume with other data (same shape) and the same geometry.

        Examples
        --------
        >>> import numpy as np
        >>> vol = Volume(np.zeros((3, 3)), spacing=(0.5, 0.5))
        >>> vol.with_data(np.ones((3, 3), np.uint8)).spacing
        (0.5, 0.5)
        """
        fields: dict[str, Any] = dict(
            spacing=self.spacing, unit=self.unit, affine=self.affine, source=self.source,
            meta=self.meta,
        )
        fields.update(changes)
        return Volume(data, **fields)

    def __repr__(self) -> str:
        return (
            f"Volume(shape={self.shape}, dtype={self.dtype}, spacing={self.spacing}, "
            f"unit={self.unit!r}, source={self.source!r})"
        )
