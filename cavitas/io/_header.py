"""The shape and type an input declares, from its header alone (no voxel is read).

The format is chosen by the same extension table as :func:`cavitas.io.read`; formats
without a cheap header (PNG, npz, HDF5, raw data) raise ``ValueError``, and so does a
file whose header cannot be read. The batch runner budgets its workers with this.
"""

from __future__ import annotations

import logging
import os
from pathlib import Path
from typing import Any

import numpy as np
import tifffile

from ._dispatch import _read_kind
from ._nifti import nibabel
from ._zarr import is_zarr_store

__all__ = ["declared_layout"]


def _npy(path: Path) -> tuple[tuple[int, ...], np.dtype]:
    array = np.load(path, mmap_mode="r", allow_pickle=False)
    return tuple(array.shape), array.dtype


def _tiff(path: Path) -> tuple[tuple[int, ...], np.dtype]:
    quiet = logging.getLogger("tifffile")
    was, quiet.disabled = quiet.disabled, True  # its worker reports a damaged file
    try:
        with tifffile.TiffFile(path) as tif:
            return tuple(tif.series[0].shape), np.dtype(tif.series[0].dtype)
    finally:
        quiet.disabled = was


def _nifti(path: Path) -> tuple[tuple[int, ...], np.dtype]:
    nib = nibabel()
    image = nib.load(path)
    if not isinstance(image, nib.analyze.AnalyzeImage):  # NIfTI images are Analyze ones
        raise ValueError(f"'{path}' is not a NIfTI or Analyze image")
    return tuple(image.header.get_data_shape()), image.header.get_data_dtype()


def _zarr(path: Path) -> tuple[tuple[int, ...], np.dtype]:
    import zarr

    node: Any = zarr.open(str(path), mode="r")
    if not isinstance(node, zarr.Array):  # an OME-Zarr image: its largest array, level 0
        node = max((a for _, a in node.arrays()), key=lambda a: a.nbytes)
    return tuple(node.shape), np.dtype(node.dtype)


_HEADERS = {"npy": _npy, "tiff": _tiff, "nifti": _nifti}


def declared_layout(path: str | os.PathLike) -> tuple[tuple[int, ...], np.dtype]:
    """Shape and type ``path`` declares in its header, without reading its voxels.

    Raises
    ------
    ValueError
        The format has no header to read here, or the header is unreadable (a
        :class:`~cavitas.CavitasError` for an extension cavitas does not read).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> f = pathlib.Path(tempfile.mkdtemp()) / "x.npy"
    >>> np.save(f, np.zeros((2, 3, 4), np.uint16))
    >>> declared_layout(f)
    ((2, 3, 4), dtype('uint16'))
    """
    path = Path(path)
    if is_zarr_store(path):
        return _zarr(path)
    kind = _read_kind(path)
    if kind not in _HEADERS:
        raise ValueError(f"no header reader for {kind} files")
    return _HEADERS[kind](path)
