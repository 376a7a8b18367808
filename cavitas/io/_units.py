"""Length units: one spelling per unit, and conversion factors for resolution tags."""

from __future__ import annotations

import re
from typing import TypeGuard

__all__ = ["UNKNOWN", "centimetres_per", "has_named_unit", "normalise_unit"]

#: The unit of a spacing a file states without saying in what (a NIfTI file without a unit
#: code, TIFF resolution tags without a unit): the numbers are kept, the unit is not guessed.
UNKNOWN = "unknown"

#: Spellings met in TIFF (ImageJ, OME), NIfTI and user options, mapped to one name.
_ALIASES = {
    "µm": "µm", "μm": "µm", "um": "µm", "micron": "µm", "microns": "µm",
    "micrometer": "µm", "micrometre": "µm", "micrometers": "µm", "micrometres": "µm",
    "nm": "nm", "nanometer": "nm", "nanometre": "nm", "nanometers": "nm", "nanometres": "nm",
    "mm": "mm", "millimeter": "mm", "millimetre": "mm", "millimeters": "mm", "millimetres": "mm",
    "cm": "cm", "centimeter": "cm", "centimetre": "cm", "centimeters": "cm",
    "centimetres": "cm",
    "m": "m", "meter": "m", "metre": "m", "meters": "m", "metres": "m",
    "inch": "inch", "inches": "inch", "in": "inch",
    "å": "Å", "angstrom": "Å",
    UNKNOWN: UNKNOWN,
}

#: Words that mean "no physical unit".
_NO_UNIT = {"", "pixel", "pixels", "px", "voxel", "voxels", "none"}

#: Length of one unit in centimetres (TIFF resolution tags count pixels per centimetre).
_CENTIMETRES = {"nm": 1e-7, "Å": 1e-8, "µm": 1e-4, "mm": 0.1, "cm": 1.0, "m": 100.0,
                "inch": 2.54}


def normalise_unit(unit: str | None) -> str | None:
    """Return the one spelling cavitas uses for a length unit, or ``None`` for "no unit".

    Unknown spellings are returned stripped but otherwise unchanged.

    Examples
    --------
    >>> normalise_unit("micron"), normalise_unit("\\\\u00B5m"), normalise_unit("pixel")
    ('µm', 'µm', None)
    >>> normalise_unit("Unknown")
    'unknown'
    """
    if unit is None:
        return None
    text = re.sub(r"\\u([0-9a-fA-F]{4})", lambda m: chr(int(m.group(1), 16)), str(unit)).strip()
    key = text.lower()
    if key in _NO_UNIT:
        return None
    return _ALIASES.get(key, text)


def centimetres_per(unit: str | None) -> float | None:
    """Length of one ``unit`` in centimetres, or ``None`` when it is not a known length.

    Examples
    --------
    >>> centimetres_per("µm")
    0.0001
    """
    return _CENTIMETRES.get(normalise_unit(unit) or "")


def has_named_unit(unit: str | None) -> TypeGuard[str]:
    """True when ``unit`` names a physical unit (not "voxel", "unknown" or nothing).

    Examples
    --------
    >>> has_named_unit("µm"), has_named_unit("voxel"), has_named_unit(UNKNOWN)
    (True, False, False)
    """
    return normalise_unit(unit) not in (None, UNKNOWN)
