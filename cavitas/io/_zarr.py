"""Read chunked Zarr arrays and OME-Zarr images (optional extra ``zarr``).

A Zarr store is a folder of chunks. Before anything is decoded, every chunk of the array
read must be in the folder: a missing chunk is an error (Zarr itself reads it as the fill
value, so a lost file would pass as an empty region), unless ``missing_chunks="fill"``
accepts the fill value and notes how many chunks were missing. Writers may leave out
chunks that hold only the fill value; such stores need ``missing_chunks="fill"``. Blosc
chunks are checked against the sizes their own header states (compressed and unpacked
bytes), since a cut Blosc chunk can decode without an error into values that change from
run to run. A plain array store is read as it is (2D or 3D, no
geometry). An OME-Zarr image (OME-NGFF 0.4 ``multiscales`` in the group attributes, or 0.5
under ``ome``) is read at one resolution level (0, full resolution, by default): its axes
name time, channel and space, the voxel size is the ``scale`` of the level's
``coordinateTransformations`` times any multiscale-wide scale, and the unit is that of the
space axes. Only the chosen channel and time point are read, chunk by chunk into a single
array, so the volume is never held twice.

References
----------
OME-NGFF 0.4 specification, "multiscales" metadata: https://ngff.openmicroscopy.org/0.4/
Blosc header layout (16 bytes: version, format version, flags, type size, then the
unpacked size, block size and compressed size as little-endian 32-bit integers):
c-blosc, ``README_HEADER.rst``.
"""

from __future__ import annotations

import itertools
import math
import os
import struct
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from .._errors import InputFileError, ParameterError
from ._assemble import Decoded, note
from ._axes import select_planes
from ._declared import check_declared
from ._failures import reading
from ._units import normalise_unit

__all__ = ["OmeGeometry", "is_zarr_store", "ome_geometry", "read_zarr"]

#: The metadata files of a Zarr store (v2 array, v2 group, v3).
_MARKERS = (".zarray", ".zgroup", "zarr.json")
#: Accepted ``missing_chunks=`` values.
MISSING_CHUNKS = ("error", "fill")
_BLOSC_HEADER = struct.Struct("<4B3I")

_LETTERS = {"t": "T", "time": "T", "c": "C", "channel": "C", "z": "Z", "y": "Y", "x": "X"}


def is_zarr_store(path: Path) -> bool:
    """A Zarr store: a folder named ``*.zarr`` or holding Zarr's own metadata files."""
    return path.is_dir() and (path.name.lower().endswith(".zarr") or any(
        (path / marker).exists() for marker in _MARKERS))


def _open(path: Path) -> Any:
    try:
        import zarr
    except ImportError as exc:
        raise InputFileError(
            f"Reading '{path}' needs the zarr package, which is not installed; install the "
            "optional extra with: pip install 'cavitas[zarr]'."
        ) from exc
    if not path.exists():
        raise InputFileError(f"Zarr store '{path}' does not exist.")
    if not any((path / marker).is_file() for marker in _MARKERS):
        raise InputFileError(f"'{path}' is not a readable Zarr store: it holds no Zarr "
                             f"metadata ({', '.join(_MARKERS)}).")
    with reading(path, "a Zarr store"):
        return zarr, zarr.open(str(path), mode="r")


def _is_blosc(array: Any) -> bool:
    """True when each chunk is one Blosc buffer (no filters before it)."""
    metadata = array.metadata
    if getattr(metadata, "filters", None) or getattr(array, "filters", ()):
        return False
    codecs = [getattr(metadata, "compressor", None), *getattr(array, "compressors", ())]
    return any(type(c).__name__ in ("Blosc", "BloscCodec") for c in codecs if c is not None)


def _blosc_fault(data: bytes, expected: int) -> str | None:
    """What is wrong with a Blosc chunk by its header's sizes (None: they agree)."""
    if len(data) < _BLOSC_HEADER.size:
        return "is shorter than a Blosc header"
    *_, unpacked, _, packed = _BLOSC_HEADER.unpack(data[:_BLOSC_HEADER.size])
    if packed != len(data):
        return f"holds {len(data)} bytes but its Blosc header states {packed}"
    if unpacked != expected:
        return f"unpacks to {unpacked} bytes by its Blosc header; the array needs {expected}"
    return None


def _chunk_files(folder: Path) -> int:
    """Number of files under ``folder`` other than Zarr's metadata files."""
    return sum(1 for _, _, files in os.walk(folder) for f in files
               if not f.startswith(".") and f != "zarr.json")


def _check_chunks(array: Any, name: Path, missing_chunks: str, meta: dict[str, Any],
                  fixed: Mapping[int, int] | None = None) -> None:
    """Refuse missing chunks (unless filled) and Blosc chunks of the wrong size, among the
    chunks read: those holding index ``fixed[axis]`` on each fixed axis (the chosen channel
    and time point), all of them on the other axes.

    With ``missing_chunks="error"`` the search stops at the first missing chunk, which
    comes at the latest after every stored file was seen, so a damaged shape declaring
    millions of chunks cannot make it run long.
    """
    fixed = dict(fixed or {})
    read_shape = [1 if axis in fixed else n for axis, n in enumerate(array.shape)]
    check_declared(name, read_shape, array.dtype)
    if getattr(array, "shards", None) is not None:
        return  # sharded arrays index their chunks inside shard files
    folder = name / array.path if array.path else name
    ranges = [range(fixed[axis] // size, fixed[axis] // size + 1) if axis in fixed
              else range(count) for axis, (count, size)
              in enumerate(zip(array.cdata_shape, array.chunks, strict=True))]
    total, blosc = math.prod(len(r) for r in ranges), _is_blosc(array)
    if missing_chunks == "fill" and not blosc and not fixed:
        missing = max(total - _chunk_files(folder), 0)
    else:
        missing, expected = 0, math.prod(array.chunks) * array.dtype.itemsize
        for coords in itertools.product(*ranges):
            chunk = folder / array.metadata.encode_chunk_key(coords)
            where = ".".join(map(str, coords))
            if not chunk.is_file():
                if missing_chunks == "error":
                    raise InputFileError(
                        f"'{name}' has no chunk {where}, one of the {total} chunks to read "
                        "(Zarr would read it as the fill value); give missing_chunks='fill' "
                        "if the writer left out empty chunks.",
                        parameters=("missing_chunks",))
                missing += 1
            elif blosc and (fault := _blosc_fault(chunk.read_bytes(), expected)):
                raise InputFileError(f"'{name}' chunk {where} {fault}: the chunk is damaged.")
    if missing:
        note(meta, name, f"{missing} of {total} chunks are missing; read as the fill "
                         f"value {array.metadata.fill_value}")


def _multiscales(attrs: Mapping[str, Any]) -> list[Any] | None:
    found = attrs.get("multiscales")
    if found is None and isinstance(attrs.get("ome"), Mapping):  # OME-NGFF 0.5 layout
        found = attrs["ome"].get("multiscales")
    return found if isinstance(found, list) and found else None


def _scale(transforms: Any, ndim: int, where: str, name: Path) -> np.ndarray:
    scale = np.ones(ndim)
    for transform in transforms or ():
        if isinstance(transform, Mapping) and transform.get("type") == "scale":
            values = np.asarray(transform.get("scale"), dtype=float)
            if values.shape != (ndim,):
                raise InputFileError(
                    f"'{name}' gives a {where} scale of {transform.get('scale')} for {ndim} "
                    "axes; expected one value per axis."
                )
            scale = scale * values
    return scale


def _translation(transforms: Any) -> list[float] | None:
    for transform in transforms or ():
        if isinstance(transform, Mapping) and transform.get("type") == "translation":
            return [float(v) for v in transform.get("translation", ())]
    return None


def _axis_letters(axes: list[Any], name: Path) -> tuple[str, list[str | None]]:
    letters, units = "", []
    for axis in axes:
        label = axis.get("name") if isinstance(axis, Mapping) else axis  # 0.3: plain names
        letter = _LETTERS.get(str(label).lower())
        if letter is None:
            raise InputFileError(f"'{name}' has an axis named {label!r}; expected t, c, z, y "
                                 "or x (OME-NGFF axes).")
        letters += letter
        units.append(axis.get("unit") if isinstance(axis, Mapping) else None)
    return letters, units


def _decode_ome(zarr: Any, group: Any, multiscale: Any, *, level: int,
                channel: int | None, time: int | None, path: Path,
                missing_chunks: str) -> Decoded:
    datasets = multiscale.get("datasets") if isinstance(multiscale, Mapping) else None
    if not isinstance(datasets, list) or not all(isinstance(d, Mapping) for d in datasets):
        raise InputFileError(f"'{path}' has OME-Zarr multiscales metadata without a list of "
                             "datasets (each an object with a path); the metadata are "
                             "damaged.")
    if not 0 <= level < len(datasets):
        raise ParameterError(f"level={level} is out of range for '{path}', which has "
                             f"{len(datasets)} resolution level(s) (0 to {len(datasets) - 1}).")
    dataset = datasets[level]
    try:
        array = group[dataset["path"]]
    except (KeyError, TypeError) as exc:
        raise InputFileError(f"'{path}' lists resolution level {level} at "
                             f"{dataset.get('path')!r}, but that array is missing.") from exc
    if not isinstance(array, zarr.Array):
        raise InputFileError(f"'{path}' level {level} ({dataset['path']!r}) is not an array.")
    geometry = ome_geometry(array, multiscale, dataset, path)
    letters, kept = geometry.letters, geometry.kept
    data, info = select_planes(array, letters, channel=channel, time=time, name=str(path))
    meta = {"format": "ome-zarr", "ngff_version": multiscale.get("version"),
            "level": level, "levels": len(datasets), **info}
    offset = _translation(dataset.get("coordinateTransformations"))
    if offset is not None:
        meta["origin"] = [offset[i] for i in kept]
    chosen = {"T": info["time"], "C": info["channel"]}
    fixed = {axis: chosen.get(letter) or 0 for axis, letter in enumerate(letters)
             if letter not in "ZYX"}
    _check_chunks(array, path, missing_chunks, meta, fixed)
    return Decoded(np.asarray(data[...]), spacing=geometry.spacing, unit=geometry.unit,
                   meta=meta)


@dataclass(frozen=True)
class OmeGeometry:
    """An OME-Zarr level's axes (letters), the space axes kept, their voxel size and unit."""

    letters: str
    kept: list[int]
    spacing: tuple[float, ...]
    unit: str | None


def ome_geometry(array: Any, multiscale: Any, dataset: Any, path: Path) -> OmeGeometry:
    """The geometry of one OME-Zarr level from its metadata alone (no voxel read)."""
    axes = multiscale.get("axes") or ["t", "c", "z", "y", "x"][-array.ndim:]
    letters, units = _axis_letters(axes, path)
    if len(letters) != array.ndim:
        raise InputFileError(f"'{path}' names {len(letters)} axes for an array of shape "
                             f"{array.shape}.")
    scale = _scale(dataset.get("coordinateTransformations"), array.ndim, "level", path)
    scale = scale * _scale(multiscale.get("coordinateTransformations"), array.ndim,
                           "multiscale", path)
    kept = [i for i, letter in enumerate(letters) if letter in "ZYX"]
    kept = [i for i in kept if not (letters[i] == "Z" and array.shape[i] == 1
                                    and len(kept) == 3)]
    space_units = {normalise_unit(units[i]) for i in kept if units[i] is not None}
    if len(space_units) > 1:
        raise InputFileError(f"'{path}' gives its space axes different units "
                             f"({sorted(map(str, space_units))}); expected one unit.")
    return OmeGeometry(letters, kept, tuple(scale[kept]),
                       space_units.pop() if space_units else None)


def read_zarr(path: str | os.PathLike, *, channel: int | None = None,
              time: int | None = None, level: int = 0,
              missing_chunks: str = "error") -> Decoded:
    """Read a Zarr array store or an OME-Zarr image (voxels and geometry, not yet checked).

    Parameters
    ----------
    path : path or str
        The store folder (``.zarr``).
    channel, time : int, optional
        The channel and time point to read from an OME-Zarr image with ``c`` / ``t`` axes
        longer than 1.
    level : int, optional
        Resolution level of a multiscale image (0 = full resolution).
    missing_chunks : {"error", "fill"}
        A chunk missing from the store is an error, or (``"fill"``) read as the array's
        fill value with a warning saying how many were missing.

    Examples
    --------
    >>> import tempfile, zarr
    >>> store = tempfile.mkdtemp() + "/cube.zarr"
    >>> zarr.open_array(store, mode="w", shape=(3, 4, 5), dtype="uint8")[:] = 7
    >>> decoded = read_zarr(store)
    >>> decoded.data.shape, decoded.spacing, int(decoded.data.max())
    ((3, 4, 5), None, 7)
    """
    if missing_chunks not in MISSING_CHUNKS:
        raise ParameterError(f"missing_chunks must be one of {', '.join(MISSING_CHUNKS)}; "
                             f"got {missing_chunks!r}.", parameters=("missing_chunks",))
    path = Path(path)
    zarr, node = _open(path)
    with reading(path, "Zarr"):
        if isinstance(node, zarr.Array):
            return _whole(node, path, missing_chunks, {"format": "zarr"})
        multiscales = _multiscales(dict(node.attrs))
        if multiscales is not None:
            return _decode_ome(zarr, node, multiscales[0], level=level, channel=channel,
                               time=time, path=path, missing_chunks=missing_chunks)
        arrays = [name for name, _ in node.arrays()]
        if len(arrays) != 1:
            raise InputFileError(
                f"Zarr group '{path}' has no OME-Zarr multiscales metadata and holds "
                f"{len(arrays)} arrays; expected one image array or OME-Zarr metadata."
            )
        return _whole(node[arrays[0]], path, missing_chunks,
                      {"format": "zarr", "array": arrays[0]})


def _whole(array: Any, path: Path, missing_chunks: str, meta: dict[str, Any]) -> Decoded:
    """Every voxel of a plain Zarr array, its chunks checked first."""
    _check_chunks(array, path, missing_chunks, meta)
    return Decoded(np.asarray(array[...]), meta=meta)
