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

from .. import _checks
from .._errors import InputFileError
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
    """Validate a user-given ``spacing=`` option (``None``: not given) with the shared
    :func:`cavitas._checks.spacing`.

    Examples
    --------
    >>> check_spacing_option([2, 0.5, 0.5])
    (2.0, 0.5, 0.5)
    """
    return None if spacing is None else _checks.spacing(spacing, ndim)


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
        try:
            file_spacing = _checks.spacing(tuple(float(s) for s in decoded.spacing), len(shape))
        except (TypeError, ValueError):
            raise InputFileError(
                f"'{name}' states a voxel spacing of {tuple(decoded.spacing)} for an array of "
                f"shape {shape}; expected one finite value > 0 per axis (give spacing= to "
                "replace it).", parameters=("spacing",)) from None
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
