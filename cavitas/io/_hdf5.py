"""HDF5 (``.h5``, ``.hdf5``) image datasets, via h5py (optional extra ``hdf5``).

Reading
-------
An HDF5 file is a tree of groups and datasets. The image is the file's only image
dataset (numeric, 2 or 3 axes, ``(z, y, x)`` or ``(y, x)`` order), or the one named by
``dataset=`` (``--dataset NAME``, e.g. ``/volumes/raw``). The voxel size comes from the
dataset's attributes, else the file's root attributes, in this order (common practice of
HDF5 image pipelines):

* ``spacing`` or ``resolution`` with a ``unit`` attribute: one size per axis;
* ``element_size_um``: one size per axis, in µm;
* ``spacing`` or ``resolution`` alone: the unit is "unknown".

A contiguous, uncompressed dataset is memory-mapped (read lazily, like an uncompressed
TIFF); a chunked or compressed one is read into memory.

Writing
-------
The array goes to the dataset ``image`` (gzip-compressed in chunks unless
``compress=False``), with ``spacing`` and ``unit`` attributes, ``element_size_um`` when
the unit is a length, and the research-only caution in ``caution``.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np

from .._caution import RESEARCH_ONLY
from .._errors import InputFileError, OutputError
from ._assemble import Decoded
from ._declared import check_declared
from ._failures import reading
from ._units import UNKNOWN, centimetres_per

__all__ = ["read_hdf5", "write_hdf5"]

#: Name of the dataset cavitas writes.
DATASET = "image"
_MICRONS_PER_CM = 1e4


def _h5py(path: Path, *, writing: bool = False) -> Any:
    try:
        import h5py
    except ImportError as exc:
        error = OutputError if writing else InputFileError
        raise error(
            f"{'Writing' if writing else 'Reading'} '{path}' needs the h5py package, which "
            "is not installed; install the optional extra with: pip install 'cavitas[hdf5]'."
        ) from exc
    return h5py


def _datasets(h5py: Any, handle: Any) -> list[Any]:
    found: list[Any] = []
    handle.visititems(lambda _, node: found.append(node) if isinstance(node, h5py.Dataset)
                      else None)
    return found


def _is_image(dataset: Any) -> bool:
    return dataset.ndim in (2, 3) and dataset.dtype.kind in "biuf" and min(dataset.shape) > 0


def _listing(datasets: list[Any]) -> str:
    return ", ".join(f"{d.name} {d.shape} {d.dtype}" for d in datasets) or "none"


def _choose(h5py: Any, handle: Any, name: str | None, path: Path) -> Any:
    datasets = _datasets(h5py, handle)
    if name is not None:
        node = handle.get(name)
        if isinstance(node, h5py.Dataset) and _is_image(node):
            return node
        problem = "is not a dataset" if node is not None else "does not exist"
        if isinstance(node, h5py.Dataset):
            problem = f"is {node.shape} {node.dtype}, not a 2D or 3D numeric image"
        raise InputFileError(f"Dataset '{name}' {problem} in '{path}', which holds: "
                             f"{_listing(datasets)}.")
    images = [d for d in datasets if _is_image(d)]
    if len(images) == 1:
        return images[0]
    if not images:
        raise InputFileError(f"'{path}' holds no 2D or 3D numeric dataset (it holds: "
                             f"{_listing(datasets)}).")
    raise InputFileError(f"'{path}' holds {len(images)} image datasets ({_listing(images)}); "
                         "choose one with --dataset NAME.")


def _attribute(attrs: Any, key: str, ndim: int) -> tuple[float, ...] | None:
    if key not in attrs:
        return None
    values = np.ravel(np.asarray(attrs[key]))
    if len(values) != ndim or values.dtype.kind not in "iuf":
        return None
    return tuple(float(v) for v in values)


def _text(value: Any) -> str:
    if isinstance(value, bytes):
        return value.decode("utf-8", "replace")
    return str(np.ravel(np.asarray(value))[0]) if np.ndim(value) else str(value)


def _geometry(dataset: Any, root: Any) -> tuple[tuple[float, ...] | None, str | None]:
    """Voxel size and unit from the dataset's attributes, else the root's.

    A ``spacing``/``resolution`` with a ``unit`` comes first (it is what cavitas writes,
    in any unit), then ``element_size_um``, then a ``spacing``/``resolution`` alone.
    """
    for attrs in (dataset.attrs, root.attrs):
        sizes = next((found for key in ("spacing", "resolution")
                      if (found := _attribute(attrs, key, dataset.ndim)) is not None), None)
        if sizes is not None and "unit" in attrs:
            return sizes, _text(attrs["unit"])
        microns = _attribute(attrs, "element_size_um", dataset.ndim)
        if microns is not None:
            return microns, "µm"
        if sizes is not None:
            return sizes, UNKNOWN
    return None, None


def _voxels(dataset: Any, path: Path, mmap: bool) -> Any:
    """A memory map of a contiguous uncompressed dataset, else its values in memory."""
    offset = dataset.id.get_offset()
    contiguous = dataset.chunks is None and offset is not None and not dataset.compression
    stored = os.path.getsize(path) - offset if contiguous else None
    check_declared(f"{path}' dataset '{dataset.name}", dataset.shape, dataset.dtype,
                   stored=stored)
    if mmap and contiguous:
        return np.memmap(path, dtype=dataset.dtype, mode="r", offset=offset,
                         shape=dataset.shape)
    return dataset[()]


def read_hdf5(path: Path, *, dataset: str | None = None, mmap: bool = True) -> Decoded:
    """Read one image dataset of an HDF5 file; see the module notes."""
    h5py = _h5py(path)
    with reading(path, "HDF5"), h5py.File(path, "r") as handle:
        node = _choose(h5py, handle, dataset, path)
        spacing, unit = _geometry(node, handle)
        data = _voxels(node, path, mmap)
        name = node.name
    return Decoded(data, spacing, unit, meta={"format": f"HDF5 dataset {name}",
                                              "dataset": name})


def write_hdf5(target: Path, data: np.ndarray, *, spacing: Sequence[float] | None,
               unit: str | None, compress: bool = True) -> None:
    """Write ``data`` with its spacing, unit and the research-only caution as HDF5."""
    h5py = _h5py(target, writing=True)
    with h5py.File(target, "w") as handle:
        node = handle.create_dataset(DATASET, data=np.asarray(data),
                                     compression="gzip" if compress else None)
        node.attrs["caution"] = RESEARCH_ONLY
        if spacing is None:
            return
        node.attrs["spacing"] = np.asarray(spacing, dtype=np.float64)
        node.attrs["unit"] = unit or UNKNOWN
        per_cm = centimetres_per(unit)
        if per_cm is not None:
            node.attrs["element_size_um"] = np.asarray(spacing, np.float64) * (
                per_cm * _MICRONS_PER_CM)
