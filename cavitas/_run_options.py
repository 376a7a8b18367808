"""The workflow's options: what a run reads besides the image, and what it writes.

:class:`cavitas.segment.SegmentParams` holds what decides the regions; these two hold the
rest of a run of :func:`cavitas.workflow.segment_file` (and ``cavitas segment``,
``cavitas batch``): :class:`ReadOptions` how the input is read (the options of
:func:`cavitas.io.read`), :class:`RunOptions` the mask file and the outputs written beside
the label map. Every value is checked strictly when the object is made (see
:mod:`cavitas._checks`); checks that need the image run in :meth:`RunOptions.check_image`.
"""

from __future__ import annotations

import dataclasses
import os
from dataclasses import dataclass, fields
from importlib.util import find_spec
from typing import Any

import numpy as np

from . import _checks
from ._checks import choice, flag, number, text, whole
from ._errors import ParameterError

__all__ = ["ReadOptions", "RunOptions"]


def _known(cls: type, values: dict[str, Any], what: str) -> None:
    unknown = set(values) - {f.name for f in fields(cls)}
    if unknown:
        raise ParameterError(f"Unknown {what}: {sorted(unknown)}; known: "
                             f"{[f.name for f in fields(cls)]}.")


@dataclass
class RunOptions:
    """What a run reads besides the image, and writes besides labels, tables and report.

    Parameters
    ----------
    mask : str or None
        Region-of-interest file (nonzero = inside), the image's shape.
    shells : float or None
        Write ``shells.<ext>``: the walls around each region, thickened by this physical
        distance (0 = touching wall voxels only; at most the image's longest side).
    enclosures : bool
        Write ``enclosures.<ext>``, the enclosures as a second label map.
    partition : bool
        Write ``partition.<ext>`` (every voxel of the specimen given to a region, walls
        split at their ridge line) and each region's volume with its part of the walls.
    mesh : {"ply", "stl"} or None
        Write a surface mesh per chamber into ``meshes/`` (3D only).
    label_format : str or None
        File suffix of the label maps (``".tif"``, ``".nii.gz"``, ``".h5"`` ...); None:
        the input's.

    Examples
    --------
    >>> RunOptions(shells=0.5, mesh="ply").to_dict()["shells"]
    0.5
    >>> RunOptions(enclosures="no")
    Traceback (most recent call last):
    ...
    cavitas._errors.ParameterError: enclosures must be true or false; got 'no'.
    """

    mask: str | None = None
    shells: float | None = None
    enclosures: bool = False
    partition: bool = False
    mesh: str | None = None
    label_format: str | None = None

    def __post_init__(self) -> None:
        from .io import WRITE_SUFFIXES

        if self.mask is not None:
            mask = os.fspath(self.mask) if isinstance(self.mask, os.PathLike) else self.mask
            self.mask = text("mask", mask, what="a file name")
        if self.shells is not None:
            self.shells = number("shells", self.shells, low=0, what="a thickness")
        self.enclosures = flag("enclosures", self.enclosures)
        self.partition = flag("partition", self.partition)
        if self.mesh is not None:
            choice("mesh", self.mesh, ("ply", "stl"))
        if self.label_format is not None:
            wanted = text("label_format", self.label_format, what="a file suffix")
            suffix = (wanted if wanted.startswith(".") else f".{wanted}").lower()
            if suffix not in WRITE_SUFFIXES:
                raise ParameterError(f"label_format must be one of {sorted(WRITE_SUFFIXES)}; "
                                     f"got {wanted!r}.", parameters=("label_format",))
            if WRITE_SUFFIXES[suffix] == "hdf5" and find_spec("h5py") is None:
                raise ParameterError(f"label_format={wanted} needs the h5py package, which is "
                                     "not installed; install it with: pip install "
                                     "'cavitas[hdf5]'.", parameters=("label_format",))
            self.label_format = suffix

    def check_image(self, volume: Any) -> None:
        """Check the options that depend on the image: meshes need 3D, shells a sane size.

        Examples
        --------
        >>> from cavitas.io import Volume
        >>> RunOptions(mesh="ply").check_image(Volume(np.zeros((8, 8))))
        Traceback (most recent call last):
        ...
        cavitas._errors.ParameterError: mesh needs a 3D volume; '<array>' is 2D.
        """
        if self.mesh and volume.ndim != 3:
            raise ParameterError(f"mesh needs a 3D volume; '{volume.name}' is 2D.",
                                 parameters=("mesh",))
        longest = float(np.max(np.multiply(volume.shape, volume.spacing)))
        if self.shells is not None and self.shells > longest:
            raise ParameterError(f"shells ({self.shells:g} {volume.unit}) exceeds the image's "
                                 f"longest side ({longest:g} {volume.unit}).",
                                 parameters=("shells",))

    def replace(self, **changes: Any) -> RunOptions:
        """A copy with some fields changed (checked again)."""
        _known(type(self), changes, "run option(s)")
        return dataclasses.replace(self, **changes)

    def to_dict(self) -> dict[str, Any]:
        """All fields as a JSON-ready dict."""
        return dataclasses.asdict(self)


@dataclass
class ReadOptions:
    """How to read an input: the options of :func:`cavitas.io.read`, checked strictly.

    Parameters
    ----------
    channel, time : int or None
        Index (from 0) of the channel / time point of a file holding several.
    key : str or None
        Array of a ``.npz`` file holding several.
    dataset : str or None
        Dataset of an HDF5 file holding several.
    missing_chunks : {"error", "fill"} or None
        Zarr stores: a missing chunk is an error (default), or read as the fill value and
        counted in a warning.
    spacing : tuple of float or None
        Voxel size in ``(z, y, x)`` (2D: ``(y, x)``) order; replaces what the file states
        (PNG, ``.npy``, raw files and uncalibrated TIFFs state nothing).
    unit : str or None
        Unit of the spacing (``"um"``, ``"nm"``, ``"mm"``); µm when a spacing is given
        without one.
    shape : tuple of int or None
        Raw files: the array shape in ``(z, y, x)`` order.
    dtype : str or None
        Raw files: the voxel type as a NumPy name (``"uint16"``).
    byte_order : {"little", "big", "native"} or None
        Raw files: byte order of multi-byte voxels.
    offset : int or None
        Raw files: header bytes to skip.

    Examples
    --------
    >>> ReadOptions(spacing=[2, 0.5, 0.5], unit="um").kwargs()
    {'spacing': (2.0, 0.5, 0.5), 'unit': 'um'}
    >>> ReadOptions(shape=[64, 256.0])  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    cavitas._errors.ParameterError: shape must be 2 or 3 whole numbers >= 1, ... [64, 256.0].
    """

    channel: int | None = None
    time: int | None = None
    key: str | None = None
    dataset: str | None = None
    missing_chunks: str | None = None
    spacing: tuple[float, ...] | None = None
    unit: str | None = None
    shape: tuple[int, ...] | None = None
    dtype: str | None = None
    byte_order: str | None = None
    offset: int | None = None

    def __post_init__(self) -> None:
        from .io._raw import BYTE_ORDERS

        checked = {
            "channel": lambda v: whole("channel", v),
            "time": lambda v: whole("time", v),
            "offset": lambda v: whole("offset", v, what="a whole number of bytes"),
            "key": lambda v: text("key", v, what="an array name"),
            "dataset": lambda v: text("dataset", v, what="a dataset name"),
            "unit": lambda v: text("unit", v, what="a unit such as 'um'"),
            "spacing": _checks.spacing,
            "shape": _checks.shape,
            "dtype": _dtype_name,
            "byte_order": lambda v: choice("byte_order", v, tuple(BYTE_ORDERS)),
            "missing_chunks": lambda v: choice("missing_chunks", v, ("error", "fill")),
        }
        for name, check in checked.items():
            value = getattr(self, name)
            if value is not None:
                setattr(self, name, check(value))

    def kwargs(self) -> dict[str, Any]:
        """The options given, as keyword arguments of :func:`cavitas.io.read`."""
        return {f.name: getattr(self, f.name) for f in fields(self)
                if getattr(self, f.name) is not None}

    def replace(self, **changes: Any) -> ReadOptions:
        """A copy with some fields changed (checked again)."""
        _known(type(self), changes, "reading option(s)")
        return dataclasses.replace(self, **changes)


def _dtype_name(value: Any) -> str:
    """A NumPy name of an integer or floating-point type (``"uint16"``, ``"<f4"``)."""
    name = text("dtype", value, what="a NumPy type name such as 'uint16'")
    try:
        kind = np.dtype(name)
    except TypeError:
        kind = None
    if kind is None or kind.kind not in "biuf":
        raise ParameterError(f"dtype={name} is not the NumPy name of an integer or "
                             "floating-point type (such as uint16).", parameters=("dtype",))
    return name
