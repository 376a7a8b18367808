"""``read`` and ``write``: pick the format from the file extension and call its module."""

from __future__ import annotations

import os
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np

from .._errors import InputFileError, OutputError, ParameterError
from .._shared.atomic import atomic_path
from ._assemble import Decoded, assemble, check_spacing_option
from ._failures import reading
from ._hdf5 import read_hdf5, write_hdf5
from ._nifti import read_nifti, write_nifti
from ._numpy import read_npy, read_npz, write_npy, write_npz
from ._png import read_png
from ._raw import read_raw
from ._slices import is_pattern, read_slices
from ._tiff import read_tiff, write_tiff
from ._units import normalise_unit
from ._volume import Volume
from ._zarr import is_zarr_store, read_zarr

__all__ = ["READ_SUFFIXES", "WRITE_SUFFIXES", "read", "write"]

#: Extension -> format read (longest extensions are matched first).
READ_SUFFIXES = {
    ".ome.tiff": "tiff", ".ome.tif": "tiff", ".tiff": "tiff", ".tif": "tiff",
    ".nii.gz": "nifti", ".nii": "nifti", ".hdr": "nifti",
    ".npy": "npy", ".npz": "npz", ".png": "png", ".h5": "hdf5", ".hdf5": "hdf5",
    ".raw": "raw", ".bin": "raw", ".img": "raw",
}
#: Format -> its name in messages ("cannot be read as ...").
_FORMAT_NAMES = {"tiff": "TIFF", "nifti": "NIfTI", "npy": "NumPy .npy",
                 "npz": "NumPy .npz", "png": "PNG", "hdf5": "HDF5", "raw": "raw data",
                 "zarr": "Zarr", "slices": "a stack of slices"}
#: Extension -> format written.
WRITE_SUFFIXES = {
    ".ome.tiff": "ome", ".ome.tif": "ome", ".tiff": "tiff", ".tif": "tiff",
    ".nii.gz": "nifti", ".nii": "nifti", ".npy": "npy", ".npz": "npz",
    ".h5": "hdf5", ".hdf5": "hdf5",
}


def _suffix(path: Path, table: dict[str, str]) -> str | None:
    name = path.name.lower()
    return next((s for s in sorted(table, key=len, reverse=True) if name.endswith(s)), None)


def _read_kind(path: Path) -> str:
    suffix = _suffix(path, READ_SUFFIXES)
    if suffix is None:
        found = "".join(path.suffixes[-2:]) or "none"
        raise InputFileError(
            f"'{path}' has an extension cavitas does not read ({found}); it reads "
            f"{', '.join(READ_SUFFIXES)}, Zarr stores, a folder of slices or a glob pattern."
        )
    if suffix == ".img" and path.with_suffix(".hdr").exists():
        return "nifti"  # an Analyze / NIfTI pair, not raw data
    return READ_SUFFIXES[suffix]


def _check_options(text: str, kind: str, *, raw_options: bool, key: str | None,
                   dataset: str | None, channel: int | None, time: int | None) -> None:
    """Refuse options that do not apply to the format ``kind`` of ``text``."""
    if raw_options and kind != "raw":
        raise ParameterError(
            f"shape=, dtype=, byte_order= and offset= apply only to raw files; '{text}' is "
            f"read as {kind}.", parameters=("shape", "dtype", "byte_order", "offset"))
    if key is not None and kind != "npz":
        raise ParameterError(f"key= applies only to .npz files; '{text}' is read as {kind}.",
                             parameters=("key",))
    if dataset is not None and kind != "hdf5":
        raise ParameterError(f"dataset= applies only to HDF5 files (.h5, .hdf5); '{text}' is "
                             f"read as {kind}.", parameters=("dataset",))
    with_channels = kind in ("tiff", "nifti", "png", "slices", "zarr")
    with_times = kind in ("tiff", "nifti", "zarr")
    for name, value, possible in (("channel", channel, with_channels),
                                  ("time", time, with_times)):
        if value and not possible:
            raise ParameterError(
                f"{name}={value} cannot be chosen in '{text}': a {kind} input holds "
                + ("one time point." if with_channels else "one channel at one time point."),
                parameters=(name,))


def read(path: str | os.PathLike, *, channel: int | None = None, time: int | None = None,
         key: str | None = None, dataset: str | None = None,
         spacing: Sequence[float] | None = None,
         unit: str | None = None, shape: Sequence[int] | None = None,
         dtype: str | np.dtype | None = None, byte_order: str | None = None,
         offset: int = 0, mmap: bool = True, missing_chunks: str = "error") -> Volume:
    """Read a 2D image or 3D volume, with its voxel spacing, unit and metadata.

    The format is chosen by the extension: TIFF / OME-TIFF (``.tif``, ``.tiff``), NIfTI
    (``.nii``, ``.nii.gz``, Analyze ``.hdr``/``.img``), NumPy (``.npy``, ``.npz``), PNG,
    HDF5 (``.h5``, ``.hdf5``; needs the optional ``h5py`` package), raw binary (``.raw``,
    ``.bin``, ``.img`` without ``.hdr``), a Zarr / OME-Zarr store (folder; needs the
    optional ``zarr`` package), or a folder / glob pattern of 2D TIFF or PNG slices.

    Parameters
    ----------
    path : str or path-like
        File, Zarr store, folder of slices, or glob pattern (``"stack/z*.tif"``). A path
        that exists is always read as that file or folder, even when its name holds
        ``*``, ``?`` or ``[``; only a path that does not exist may be a pattern.
    channel, time : int, optional
        Index (from 0) of the channel / time point to keep, required when the file holds
        more than one (ImageJ hyperstacks, OME-TIFF, RGB images, 4D/5D NIfTI).
    key : str, optional
        Which array of a ``.npz`` file holding several.
    dataset : str, optional
        Which dataset of an HDF5 file holding several image datasets (``"/volumes/raw"``).
    spacing : sequence of float, optional
        Voxel size in ``(z, y, x)`` order; replaces what the file states.
    unit : str, optional
        Unit of the spacing; replaces what the file states ("micron", "um" -> "µm").
    shape, dtype, byte_order, offset
        Layout of a raw file (only for raw files): shape in ``(z, y, x)`` order, NumPy
        type name, "little" / "big" / "native", header bytes to skip.
    mmap : bool
        Memory-map the data when the format allows it (uncompressed TIFF, ``.nii``,
        ``.npy``, raw); False reads everything into memory.
    missing_chunks : {"error", "fill"}
        Zarr only: a chunk missing from the store is an error (default), or read as the
        fill value with a warning (for writers that leave out empty chunks).

    Returns
    -------
    Volume
        ``meta`` holds ``format``, chosen ``channel``/``time``, the stored ``axes`` and
        ``warnings`` (non-fatal metadata faults, also logged).

    Raises
    ------
    InputFileError
        Missing, unreadable, truncated, damaged or unusable file, or one that declares
        more voxels than the memory available holds (one sentence naming the file).
    ParameterError
        An option value that cannot be used (channel out of range, spacing <= 0 ...).

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "scan.npy"
    >>> np.save(target, np.zeros((2, 3, 4), np.uint8))
    >>> vol = read(target, spacing=(2.0, 0.5, 0.5))
    >>> vol.shape, vol.spacing, vol.unit
    ((2, 3, 4), (2.0, 0.5, 0.5), 'µm')
    """
    text = os.fspath(path)
    check_spacing_option(spacing)
    if unit is not None and not isinstance(unit, str):
        raise ParameterError(f"unit must be a text such as 'µm'; got {unit!r}.",
                             parameters=("unit",))
    raw_options = shape is not None or dtype is not None or byte_order is not None or offset
    source = Path(text)
    if is_zarr_store(source):
        kind = "zarr"
    elif source.is_dir() or (is_pattern(text) and not source.exists()):
        kind = "slices"  # a path that exists is that file, even named 'scan[1].tif'
    else:
        if not source.exists():
            raise InputFileError(f"File '{text}' does not exist.")
        if not source.is_file():
            raise InputFileError(f"'{text}' is neither a file nor a folder of slices.")
        kind = _read_kind(source)
        if os.path.getsize(source) == 0:
            raise InputFileError(f"'{text}' is empty (0 bytes).")
    _check_options(text, kind, raw_options=bool(raw_options), key=key, dataset=dataset,
                   channel=channel, time=time)
    if missing_chunks != "error" and kind != "zarr":
        raise ParameterError(f"missing_chunks= applies only to Zarr stores; '{text}' is read "
                             f"as {kind}.", parameters=("missing_chunks",))
    with reading(text, _FORMAT_NAMES[kind]):
        decoded = _decode(text, source, kind, channel=channel, time=time, key=key,
                          dataset=dataset, shape=shape, dtype=dtype, byte_order=byte_order,
                          offset=offset, mmap=mmap, missing_chunks=missing_chunks)
        if decoded.data.dtype.kind not in "biuf":
            raise InputFileError(
                f"'{text}' holds {decoded.data.dtype} values; expected integer or "
                "floating-point intensities."
            )
        return assemble(text, decoded, spacing=spacing, unit=unit)


def _decode(text: str, source: Path, kind: str, *, channel: int | None, time: int | None,
            key: str | None, dataset: str | None, shape: Sequence[int] | None,
            dtype: str | np.dtype | None, byte_order: str | None, offset: int, mmap: bool,
            missing_chunks: str) -> Decoded:
    """Call the reader of ``kind``."""
    if kind == "slices":
        return read_slices(text, channel=channel)
    if kind == "tiff":
        return read_tiff(source, channel=channel, time=time, mmap=mmap)
    if kind == "nifti":
        return read_nifti(source, channel=channel, time=time, mmap=mmap)
    if kind == "png":
        return read_png(source, channel=channel)
    if kind == "zarr":
        return read_zarr(source, channel=channel, time=time, missing_chunks=missing_chunks)
    if kind == "npy":
        return read_npy(source, mmap=mmap)
    if kind == "npz":
        return read_npz(source, key=key)
    if kind == "hdf5":
        return read_hdf5(source, dataset=dataset, mmap=mmap)
    return read_raw(source, shape=shape, dtype=dtype, byte_order=byte_order, offset=offset,
                    mmap=mmap)


def _geometry(data: Any, volume: Volume | None, like: Volume | None,
              spacing: Sequence[float] | None, unit: str | None) -> tuple[Any, ...]:
    """Spacing, unit, affine and NIfTI details of a write.

    By precedence: the options, then the volume written (unless it has no geometry of its
    own, unit "voxel"), then ``like`` (when its shape matches). Affine and header come from
    the first of those that has an affine, unless ``spacing`` is given (then the affine is
    built from it).
    """
    if volume is not None and volume.unit == "voxel" and volume.affine is None and like is not None:
        volume = None  # a bare Volume(labels): like= gives the geometry
    donors = [v for v in (volume, like) if v is not None and v.shape == tuple(data.shape)]
    given = check_spacing_option(spacing, data.ndim)
    donor_unit = donors[0].unit if donors else None
    if unit is not None:
        unit = normalise_unit(unit) or "voxel"
    elif given is not None:
        unit = donor_unit if donor_unit not in (None, "voxel") else "µm"
    else:
        unit = donor_unit
    if given is None and donors:
        given = tuple(donors[0].spacing)
    source = None if spacing is not None else next(
        (v for v in donors if v.affine is not None), None)
    if source is None:
        return given, unit, None, None
    return given, unit, source.affine, source.meta.get("nifti")


def write(path: str | os.PathLike, array_or_volume: Any, *, like: Volume | None = None,
          force: bool = False, spacing: Sequence[float] | None = None,
          unit: str | None = None, compress: bool = True) -> Path:
    """Write a 2D image or 3D volume, choosing the format from the extension.

    Formats: TIFF (``.tif``, ``.tiff``; an ImageJ hyperstack, labels stored in a type
    ImageJ opens), OME-TIFF (``.ome.tif``), NIfTI (``.nii``, ``.nii.gz``), NumPy (``.npy``,
    ``.npz``), HDF5 (``.h5``, ``.hdf5``; needs ``h5py``). The write is
    atomic (temporary file, then rename): an existing file is replaced only with
    ``force=True`` and never when it is the volume's (or ``like``'s) own input file. The
    data type is kept (labels stay integer; ``bool`` masks are written as ``uint8``); a
    ``.tif`` stores types ImageJ cannot open (int32 labels) in one it can that holds every
    value, notes the original type, and :func:`read` gives that type back.
    Written files carry the research-only caution in their metadata, except ``.npy``,
    which cannot hold any.

    Parameters
    ----------
    path : str or path-like
        Output file.
    array_or_volume : array_like or Volume
        The data, ``(z, y, x)`` or ``(y, x)``.
    like : Volume, optional
        Source of the geometry (spacing, unit, NIfTI affine and codes) for a plain array,
        typically the volume the labels were computed from.
    force : bool
        Replace an existing file.
    spacing, unit : optional
        Voxel size ``(z, y, x)`` and unit; override those of the volume or ``like``.
    compress : bool
        zlib-compress TIFF, ``.npz`` and HDF5 (NIfTI compression follows ``.nii.gz``).

    Returns
    -------
    Path
        The file written.

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "labels.tif"
    >>> _ = write(target, np.ones((2, 3, 4), np.int32), spacing=(2.0, 0.5, 0.5))
    >>> from cavitas.io import read
    >>> back = read(target)
    >>> back.dtype, back.spacing, back.unit
    (dtype('int32'), (2.0, 0.5, 0.5), 'µm')
    """
    target = Path(os.fspath(path))
    suffix = _suffix(target, WRITE_SUFFIXES)
    if suffix is None:
        raise OutputError(
            f"'{target}' has an extension cavitas does not write; it writes "
            f"{', '.join(WRITE_SUFFIXES)}."
        )
    kind = WRITE_SUFFIXES[suffix]
    volume = array_or_volume if isinstance(array_or_volume, Volume) else None
    data = volume.data if volume is not None else array_or_volume
    data = np.asarray(data)
    if data.ndim not in (2, 3) or data.size == 0:
        raise ParameterError(
            f"Cannot write '{target}': expected a non-empty 2D or 3D array; got shape "
            f"{data.shape}."
        )
    if data.dtype.kind not in "biuf":
        raise ParameterError(
            f"Cannot write '{target}': expected integer or floating-point data; got {data.dtype}."
        )
    if data.dtype == bool:
        data = data.astype(np.uint8)
    if like is not None and not isinstance(like, Volume):
        raise ParameterError(f"like= must be a Volume (from cavitas.read); got {type(like)}.")
    given, unit, affine, nifti = _geometry(data, volume, like, spacing, unit)
    inputs = tuple(v.source for v in (volume, like) if v is not None and v.source)
    with atomic_path(target, force=force, inputs=inputs) as tmp:
        if kind in ("tiff", "ome"):
            write_tiff(tmp, data, spacing=given, unit=unit, compress=compress, ome=kind == "ome")
        elif kind == "nifti":
            write_nifti(tmp, data, spacing=given, unit=unit, affine=affine, nifti=nifti)
        elif kind == "npy":
            write_npy(tmp, data)
        elif kind == "hdf5":
            write_hdf5(tmp, data, spacing=given, unit=unit, compress=compress)
        else:
            write_npz(tmp, data, spacing=given, unit=unit, compress=compress)
    return target
