"""Open a Zarr store or an HDF5 dataset without reading its voxels (:func:`open_chunked`).

For the command line's chunked route (``--scheduler``, ``--dask-local``): the image is
handed to the workers as a Dask array whose chunks are the file's own, so no process ever
holds it whole. The choice inside the file is the reader's: the one array of a Zarr store,
level 0 of an OME-Zarr image (one channel and time point, chosen as :func:`cavitas.read`
chooses them), the image dataset of an HDF5 file (``dataset=`` when it holds several).
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from .._errors import InputFileError, ParameterError
from ._assemble import Decoded, assemble
from ._axes import select_planes
from ._failures import reading
from ._hdf5 import _choose, _geometry, _h5py
from ._volume import Volume
from ._zarr import (
    MISSING_CHUNKS,
    _check_chunks,
    _multiscales,
    _open,
    is_zarr_store,
    ome_geometry,
)

__all__ = ["ChunkedImage", "open_chunked"]

#: The endings of the HDF5 files the readers know (:data:`cavitas.io._dispatch.READ_SUFFIXES`).
HDF5_SUFFIXES = (".h5", ".hdf5")


@dataclass(frozen=True)
class ChunkedImage:
    """A 2D or 3D image as a lazy Dask array in the file's chunks."""

    data: Any                       # dask.array.Array, axes (z, y, x) or (y, x)
    name: str                       # the file, as given
    kind: str                       # "Zarr" or "HDF5"
    spacing: tuple[float, ...] | None = None  # as the file states it (cavitas.read's)
    unit: str | None = None

    def volume(self, *, spacing: Any = None, unit: str | None = None) -> Volume:
        """The image as a :class:`~cavitas.io.Volume` whose data stay this Dask array, its
        geometry the file's or the one given, exactly as :func:`cavitas.read` makes it."""
        return assemble(self.name, Decoded(self.data, self.spacing, self.unit),
                        spacing=spacing, unit=unit)

    @property
    def chunk_shape(self) -> tuple[int, ...]:
        """The largest chunk along each axis."""
        return tuple(max(sizes) for sizes in self.data.chunks)


def open_chunked(path: str | os.PathLike, *, channel: int | None = None,
                 time: int | None = None, dataset: str | None = None,
                 missing_chunks: str = "error", role: str = "") -> ChunkedImage:
    """The image of a Zarr store or an HDF5 file as a Dask array, no voxel read.

    The options are :func:`cavitas.read`'s; a Zarr store's chunk files are checked as it
    checks them (a missing chunk is an error unless ``missing_chunks="fill"``). ``role``
    (``"Mask"``) names what the file is for in messages.

    Examples
    --------
    >>> import tempfile, zarr, numpy as np
    >>> store = tempfile.mkdtemp() + "/cube.zarr"
    >>> zarr.open_array(store, mode="w", shape=(6, 4, 5), chunks=(2, 4, 5),
    ...                 dtype="uint8")[:] = 7
    >>> image = open_chunked(store)
    >>> image.kind, image.chunk_shape, int(image.data.max().compute())
    ('Zarr', (2, 4, 5), 7)
    """
    from ..cubical._chunked import as_dask_array

    source = Path(path)
    if not source.exists():
        raise InputFileError(f"{role or 'Input'} '{path}' does not exist.")
    if is_zarr_store(source):
        if dataset is not None:
            raise ParameterError(f"dataset= applies only to HDF5 files (.h5, .hdf5); "
                                 f"'{path}' is a Zarr store.", parameters=("dataset",))
        return _zarr_image(source, str(path), channel, time, missing_chunks)
    if source.name.lower().endswith(HDF5_SUFFIXES):
        if missing_chunks != "error":
            raise ParameterError(f"missing_chunks= applies only to Zarr stores; '{path}' is "
                                 "an HDF5 file.", parameters=("missing_chunks",))
        if channel is not None or time is not None:
            raise ParameterError(f"channel= and time= do not apply to HDF5 files; '{path}' "
                                 "is one (choose the dataset with dataset=).",
                                 parameters=("channel", "time", "dataset"))
        h5py = _h5py(source)
        try:
            with h5py.File(source, "r") as handle:
                node = _choose(h5py, handle, dataset, source)
                lazy = as_dask_array(node)
                spacing, unit = _geometry(node, handle)
        except OSError as exc:
            raise InputFileError(f"'{path}' is not a readable HDF5 file: {exc}.") from exc
        return ChunkedImage(lazy, str(path), "HDF5", spacing, unit)
    raise ParameterError(f"{role + ' ' if role else ''}'{path}' is neither a Zarr store nor an "
                         "HDF5 file (.h5, .hdf5): only those are read chunk by chunk on Dask "
                         "workers.")


def _zarr_image(source: Path, name: str, channel: int | None, time: int | None,
                missing_chunks: str) -> ChunkedImage:
    """The 2D/3D image of a Zarr store as a Dask array (level 0 of an OME-Zarr image), with
    the voxel size and unit it states (an OME-Zarr image's; none for a plain array)."""
    import dask.array as da

    zarr, node = _open(source)
    ome = None
    if isinstance(node, zarr.Array):
        array, letters = node, None
    elif (multiscales := _multiscales(dict(node.attrs))) is not None:
        datasets = multiscales[0].get("datasets") or [{}]
        try:
            array = node[datasets[0]["path"]]
        except (KeyError, TypeError) as exc:
            raise InputFileError(f"'{source}' lists no readable array at resolution level "
                                 "0; the OME-Zarr metadata are damaged.") from exc
        ome = ome_geometry(array, multiscales[0], datasets[0], source)
        letters = ome.letters
    else:
        arrays = [name for name, _ in node.arrays()]
        if len(arrays) != 1:
            raise InputFileError(f"Zarr group '{source}' has no OME-Zarr multiscales metadata "
                                 f"and holds {len(arrays)} arrays; expected one image array "
                                 "or OME-Zarr metadata.")
        array, letters = node[arrays[0]], None
    lazy = da.from_zarr(array)
    fixed: dict[int, int] = {}
    if letters is not None:
        lazy, info = select_planes(lazy, letters, channel=channel, time=time,
                                   name=str(source))
        chosen = {"T": info["time"], "C": info["channel"]}
        fixed = {axis: chosen.get(letter) or 0 for axis, letter in enumerate(letters)
                 if letter not in "ZYX"}
    elif channel is not None or time is not None:
        raise ParameterError(f"channel= and time= apply to OME-Zarr images; '{source}' is a "
                             "plain Zarr array.", parameters=("channel", "time"))
    if missing_chunks not in MISSING_CHUNKS:
        raise ParameterError(f"missing_chunks must be one of {', '.join(MISSING_CHUNKS)}; "
                             f"got {missing_chunks!r}.", parameters=("missing_chunks",))
    with reading(source, "Zarr"):
        _check_chunks(array, source, missing_chunks, {}, fixed)
    if lazy.ndim not in (2, 3):
        raise InputFileError(f"'{source}' holds an array of shape {lazy.shape}; expected a "
                             "2D image or a 3D volume.")
    if ome is None:
        return ChunkedImage(lazy, name, "Zarr")
    return ChunkedImage(lazy, name, "Zarr", ome.spacing, ome.unit)
