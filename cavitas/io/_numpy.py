"""NumPy ``.npy`` and ``.npz`` files; never unpickled (``allow_pickle=False`` always).

``.npy`` holds one 2D or 3D array in ``(z, y, x)`` order and nothing else, so it cannot keep
a voxel size, a unit or the research-only caution: give ``spacing=``/``unit=`` when reading
it, or prefer ``.npz``, TIFF or NIfTI. ``.npy`` files are memory-mapped.

``.npz`` holds the image array plus optional ``spacing`` (one value per axis), ``unit`` and
``caution`` entries; cavitas writes the image under the key ``image``. A file with several
image arrays needs ``key=`` to choose one.
"""

from __future__ import annotations

import os
import zipfile
from collections.abc import Sequence
from pathlib import Path
from typing import IO, Any, cast

import numpy as np

from .._caution import RESEARCH_ONLY
from .._errors import ChoiceNeeded, InputFileError, ParameterError
from ._assemble import Decoded
from ._declared import check_declared, declared_bytes
from ._failures import check_signature, reading

__all__ = ["read_npy", "read_npz", "write_npy", "write_npz"]

#: Keys of a .npz that describe the image rather than hold it.
METADATA_KEYS = ("spacing", "unit", "caution")


def _header(stream: IO[bytes], path: Path) -> tuple[tuple[int, ...], np.dtype, bool]:
    """Shape, type and Fortran order a ``.npy`` header declares, the stream left at the data.

    The header is parsed by NumPy's own reader (``numpy.lib.format``), which evaluates it as
    a literal only (never unpickles); an object type is refused before any data is read.
    """
    version = np.lib.format.read_magic(stream)
    read_header = (np.lib.format.read_array_header_1_0 if version == (1, 0)
                   else np.lib.format.read_array_header_2_0)
    shape, fortran, dtype = read_header(stream)
    if dtype.hasobject:
        raise InputFileError(f"'{path}' holds Python objects, which cavitas never loads "
                             "(they could run code); expected numeric voxels.")
    return tuple(shape), dtype, fortran


def read_npy(path: Path, *, mmap: bool = True) -> Decoded:
    """Read a ``.npy`` array (memory-mapped unless ``mmap=False``)."""
    with reading(path, "NumPy .npy"):
        check_signature(path, "NumPy .npy")
        with open(path, "rb") as stream:
            shape, dtype, _ = _header(stream, path)
            stored = os.path.getsize(path) - stream.tell()
        check_declared(path, shape, dtype, stored=stored)
        data = np.load(path, mmap_mode="r" if mmap else None, allow_pickle=False)
    return Decoded(data, meta={"format": "NumPy .npy"})


def _member(archive: zipfile.ZipFile, key: str, path: Path) -> np.ndarray:
    """The array stored as ``key`` (``key.npy`` in the zip), its size checked first."""
    name = f"{key}.npy" if f"{key}.npy" in archive.namelist() else key
    with archive.open(name) as stream:
        if stream.read(6) != np.lib.format.MAGIC_PREFIX:
            raise InputFileError(f"'{path}' holds an entry '{key}' that is not a NumPy array.")
    with archive.open(name) as stream:
        shape, dtype, fortran = _header(stream, path)
        stored = archive.getinfo(name).file_size - stream.tell()
        check_declared(f"{path}' entry '{key}", shape, dtype, stored=stored)
        buffer = bytearray(declared_bytes(path, shape, dtype))  # read in place: no copy
        # typeshed types ZipFile.open() as IO[bytes]; reading, it returns a ZipExtFile
        got = cast(zipfile.ZipExtFile, stream).readinto(buffer)
    if got != len(buffer):
        raise InputFileError(f"'{path}' entry '{key}' ends before its data do (the file is "
                             "cut short).")
    return np.frombuffer(buffer, dtype=dtype).reshape(shape, order="F" if fortran else "C")


def read_npz(path: Path, *, key: str | None = None) -> Decoded:
    """Read one image array (and its optional spacing and unit) from a ``.npz`` file."""
    check_signature(path, "NumPy .npz")
    with reading(path, "NumPy .npz"), zipfile.ZipFile(path) as archive:
        entries = [n[:-4] if n.endswith(".npy") else n for n in archive.namelist()]
        names = [k for k in entries if k not in METADATA_KEYS]
        if key is None:
            if len(names) != 1:
                raise ChoiceNeeded(
                    f"'{path}' holds {len(names)} arrays ({', '.join(names) or 'none'}); "
                    "choose one with key=.", parameter="key", choices=names)
            key = names[0]
        elif key not in entries:
            raise ParameterError(
                f"key={key!r} is not in '{path}', which holds: {', '.join(names)}.",
                parameters=("key",))
        data = _member(archive, key, path)
        unit = str(_member(archive, "unit", path)) if "unit" in entries else None
        spacing = None
        if "spacing" in entries:
            stored = _member(archive, "spacing", path)
            if stored.dtype.kind not in "iuf":
                raise InputFileError(f"'{path}' holds a spacing of {stored.dtype} values; "
                                     "expected numbers.", parameters=("spacing",))
            spacing = tuple(float(s) for s in np.ravel(stored))
    return Decoded(data, spacing, unit, meta={"format": "NumPy .npz", "key": key})


def write_npy(target: Path, data: np.ndarray) -> None:
    """Write ``data`` as ``.npy`` (no metadata: see the module notes)."""
    with open(target, "wb") as stream:
        np.save(stream, np.asarray(data), allow_pickle=False)


def write_npz(target: Path, data: np.ndarray, *, spacing: Sequence[float] | None,
              unit: str | None, compress: bool = True) -> None:
    """Write ``data`` with its spacing, unit and the research-only caution as ``.npz``."""
    entries: dict[str, Any] = {"image": np.asarray(data), "caution": np.array(RESEARCH_ONLY)}
    if spacing is not None:
        entries["spacing"] = np.asarray(spacing, dtype=np.float64)
    if unit is not None:
        entries["unit"] = np.array(unit)
    save = np.savez_compressed if compress else np.savez
    with open(target, "wb") as stream:
        save(stream, allow_pickle=False, **entries)
