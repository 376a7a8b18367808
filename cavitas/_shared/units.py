"""Names of lengths, areas and volumes in a scan's unit, and in its own pixels or voxels.

A scan whose file gives no physical size is measured in its sampling elements: lengths in
pixels (2D) or voxels (3D), areas and volumes in counts of them (never "voxel²").
"""

from __future__ import annotations

__all__ = ["ELEMENT_UNIT", "length_unit", "size_unit"]

#: The unit of a scan measured in its own sampling elements.
ELEMENT_UNIT = "voxel"


def length_unit(unit: str, ndim: int) -> str:
    """The unit of a length.

    Examples
    --------
    >>> length_unit("µm", 2), length_unit("voxel", 2), length_unit("voxel", 3)
    ('µm', 'pixel', 'voxel')
    """
    if unit != ELEMENT_UNIT:
        return unit
    return "pixel" if ndim == 2 else "voxel"


def size_unit(unit: str, ndim: int, power: int | None = None, *, plural: bool = True) -> str:
    """The unit of an area (2D) or volume (3D), or of a measure of ``power`` dimensions;
    counts of pixels or voxels are plural unless ``plural`` is False ("per voxel").

    Examples
    --------
    >>> size_unit("µm", 3), size_unit("µm", 2), size_unit("voxel", 3), size_unit("voxel", 2)
    ('µm³', 'µm²', 'voxels', 'pixels')
    >>> size_unit("mm", 3, power=2), size_unit("voxel", 3, plural=False)
    ('mm²', 'voxel')
    """
    power = ndim if power is None else power
    if unit == ELEMENT_UNIT and power == ndim:
        return length_unit(unit, ndim) + ("s" if plural else "")
    return length_unit(unit, ndim) + {1: "", 2: "²", 3: "³"}[power]
