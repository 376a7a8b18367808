"""Turn what a format reader decoded into a checked :class:`Volume`.

Every reader returns a :class:`Decoded`; :func:`assemble` applies the user's spacing and
unit, and turns faults of the file (no voxels, too many axes, spacing <= 0) into one
:class:`InputFileError` sentence naming the file.
"""

from __future__ import annotations

import logging
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from .._errors import InputFileError, ParameterError
from ._units import UNKNOWN, normalise_unit
from ._volume import Volume

__all__ = ["Decoded", "assemble", "check_spacing_option", "note"]

_log = logging.getLogger("cavitas.io")


@dataclass
class Decoded:
    """What a reader found: data in ``(z, y, x)`` order and the file's geometry."""

    data: Any
    spacing: Sequence[float] | None = None
    unit: str | None = None
    affine: Any = None
    meta: dict[str, Any] = field(default_factory=dict)


def note(meta: dict[str, Any], source: str | Path, message: str) -> None:
    """Record a non-fatal metadata fault in ``meta["warnings"]`` and log it."""
    meta.setdefault("warnings", []).append(message)
    _log.warning("%s: %s", Path(str(source)).name, message)


def check_spacing_option(spacing: Any, ndim: int | None = None) -> tuple[float, ...] | None:
    """Validate a user-given ``spacing=`` option (finite, > 0, one value per axis).

    Examples
    --------
    >>> check_spacing_option([2, 0.5, 0.5])
    (2.0, 0.5, 0.5)
    """
    if spacing is None:
        return None
    try:
        values = tuple(float(s) for s in np.ravel(np.asarray(spacing, dtype=float)))
    except (TypeError, ValueError) as exc:
        raise ParameterError(f"spacing must be numbers; got {spacing!r}.",
                             parameters=("spacing",)) from exc
    if not values or not all(np.isfinite(v) and v > 0 for v in values):
        raise ParameterError(f"spacing must be finite and > 0 on every axis; got {values}.",
                             parameters=("spacing",))
    if ndim is not None and len(values) != ndim:
        raise ParameterError(
            f"spacing must have one value per axis ({ndim}, in (z, y, x) order); "
            f"got {len(values)}: {values}.", parameters=("spacing",))
    return values


def assemble(source: str | Path, decoded: Decoded, *, spacing: Sequence[float] | None = None,
             unit: str | None = None) -> Volume:
    """Check decoded data and geometry and build the :class:`Volume`.

    ``spacing`` and ``unit`` given by the user replace what the file says. A spacing the
    file states without a unit keeps the unit ``"unknown"`` (with a warning); a ``spacing``
    given without ``unit`` is in µm, as for :class:`Volume`.
    """
    name = str(source)
    data = decoded.data
    shape = tuple(data.shape)
    if len(shape) not in (2, 3):
        raise InputFileError(
            f"'{name}' holds an array of shape {shape} after choosing channel and time; "
            "expected a 2D image or a 3D volume."
        )
    if 0 in shape:
        raise InputFileError(f"'{name}' holds no voxels (shape {shape}).")
    meta = dict(decoded.meta)
    meta.setdefault("warnings", [])
    option = check_spacing_option(spacing, len(shape))
    if option is not None:
        file_spacing = option
    elif decoded.spacing is None:
        file_spacing = None
    else:
        file_spacing = tuple(float(s) for s in decoded.spacing)
        if len(file_spacing) != len(shape) or not all(
            np.isfinite(s) and s > 0 for s in file_spacing
        ):
            raise InputFileError(
                f"'{name}' states a voxel spacing of {file_spacing} for an array of shape "
                f"{shape}; expected one finite value > 0 per axis (give spacing= to replace it).",
                parameters=("spacing",))
    stated = unit if unit is not None else decoded.unit
    file_unit = normalise_unit(stated)
    if file_unit is None and stated is not None and str(stated).strip():
        file_unit = "voxel"  # the file (or user) says "pixel", "voxel": no physical unit
    if file_spacing is None and file_unit is None:
        file_unit = "voxel"
    elif option is not None and file_unit in (None, UNKNOWN):
        file_unit = "µm"  # the documented default of spacing= given without unit=
    elif file_spacing is not None and file_unit in (None, UNKNOWN):
        note(meta, name, "the file gives a voxel size but no unit; the unit is unknown "
                         "(give --unit to state it)")
        file_unit = UNKNOWN
    return Volume(data, spacing=file_spacing, unit=file_unit, affine=decoded.affine,
                  source=name, meta=meta)
