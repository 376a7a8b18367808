"""NumPy ``.npy`` and ``.npz`` files; never unpickled (``allow_pickle=False`` always).

``.npy`` holds one 2D or 3D array in ``(z, y, x)`` order and nothing else, so it cannot keep
a voxel size, a unit or the research-only caution: give ``spacing=``/``unit=`` when reading
it, or prefer ``.npz``, TIFF or NIfTI. ``.npy`` files are memory-mapped.

``.npz`` holds the image array plus optional ``spacing`` (one value per axis), ``unit`` and
``caution`` entries; cavitas writes the image under the key ``image``. A file with several
image arrays needs ``key=`` to choose one.
"""

from __future__ import annotations

import zipfile
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np

from .._caution import RESEARCH_ONLY
from .._errors import CavitasError, ChoiceNeeded, InputFileError, ParameterError
from ._assemble import Decoded

__all__ = ["read_npy", "read_npz", "write_npy", "write_npz"]

#: Keys of a .npz that describe the image rather than hold it.
METADATA_KEYS = ("spacing", "unit", "caution")


def read_npy(path: Path, *, mmap: bool = True) -> Decoded:
    """Read a ``.npy`` array (memory-mapped unless ``mmap=False``)."""
    try:
        data = np.load(path, mmap_mode="r" if mmap else None, allow_pickle=False)
    except Exception as exc:  # ValueError (pickled objects, bad header), OSError, EOFError
        raise InputFileError(f"'{path}' cannot be read as a NumPy .npy file: {exc}.") from exc
    return Decoded(data, meta={"format": "NumPy .npy"})


def read_npz(path: Path, *, key: str | None = None) -> Decoded:
    """Read one image array (and its optional spacing and unit) from a ``.npz`` file."""
    try:
        with np.load(path, allow_pickle=False) as archive:
            names = [k for k in archive.files if k not in METADATA_KEYS]
            if key is None:
                if len(names) != 1:
                    raise ChoiceNeeded(
                        f"'{path}' holds {len(names)} arrays ({', '.join(names) or 'none'}); "
                        "choose one with key=.", parameter="key", choices=names)
                key = names[0]
            elif key not in archive.files:
                raise ParameterError(
                    f"key={key!r} is not in '{path}', which holds: {', '.join(names)}.",
                    parameters=("key",))
            data = archive[key]
            spacing = archive["spacing"] if "spacing" in archive.files else None
            unit = str(archive["unit"]) if "unit" in archive.files else None
    except CavitasError:
        raise
    except (ValueError, OSError, EOFError, zipfile.BadZipFile, KeyError) as exc:
        raise InputFileError(f"'{path}' cannot be read as a NumPy .npz file: {exc}.") from exc
    if spacing is not None:
        spacing = tuple(float(s) for s in np.ravel(spacing))
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
