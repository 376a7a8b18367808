"""Read chunked Zarr arrays and OME-Zarr images (optional extra ``zarr``).

A Zarr store is a folder of chunks. A plain array store is read as it is (2D or 3D, no
geometry). An OME-Zarr image (OME-NGFF 0.4 ``multiscales`` in the group attributes, or 0.5
under ``ome``) is read at one resolution level (0, full resolution, by default): its axes
name time, channel and space, the voxel size is the ``scale`` of the level's
``coordinateTransformations`` times any multiscale-wide scale, and the unit is that of the
space axes. Only the chosen channel and time point are read, chunk by chunk into a single
array, so the volume is never held twice.

References
----------
OME-NGFF 0.4 specification, "multiscales" metadata: https://ngff.openmicroscopy.org/0.4/
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np

from .._errors import InputFileError, ParameterError
from ._assemble import Decoded
from ._axes import select_planes
from ._units import normalise_unit

__all__ = ["is_zarr_store", "read_zarr"]

_LETTERS = {"t": "T", "time": "T", "c": "C", "channel": "C", "z": "Z", "y": "Y", "x": "X"}


def is_zarr_store(path: Path) -> bool:
    """A Zarr store: a folder named ``*.zarr`` or holding Zarr's own metadata files."""
    return path.is_dir() and (path.name.lower().endswith(".zarr") or any(
        (path / marker).exists() for marker in (".zarray", ".zgroup", "zarr.json")))


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
    try:
        return zarr, zarr.open(str(path), mode="r")
    except Exception as exc:  # zarr raises several kinds for a folder that is not a store
        raise InputFileError(
            f"'{path}' is not a readable Zarr store ({type(exc).__name__}: {exc})."
        ) from exc


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


def _decode_ome(zarr: Any, group: Any, multiscale: Mapping[str, Any], *, level: int,
                channel: int | None, time: int | None, path: Path) -> Decoded:
    datasets = multiscale.get("datasets") or []
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
    axes = multiscale.get("axes") or ["t", "c", "z", "y", "x"][-array.ndim:]
    letters, units = _axis_letters(axes, path)
    if len(letters) != array.ndim:
        raise InputFileError(f"'{path}' names {len(letters)} axes for an array of shape "
                             f"{array.shape}.")
    scale = _scale(dataset.get("coordinateTransformations"), array.ndim, "level", path)
    scale = scale * _scale(multiscale.get("coordinateTransformations"), array.ndim,
                           "multiscale", path)
    data, info = select_planes(array, letters, channel=channel, time=time, name=str(path))
    kept = [i for i, letter in enumerate(letters) if letter in "ZYX"]
    kept = [i for i in kept if not (letters[i] == "Z" and array.shape[i] == 1
                                    and len(kept) == 3)]
    space_units = {normalise_unit(units[i]) for i in kept if units[i] is not None}
    if len(space_units) > 1:
        raise InputFileError(f"'{path}' gives its space axes different units "
                             f"({sorted(map(str, space_units))}); expected one unit.")
    meta = {"format": "ome-zarr", "ngff_version": multiscale.get("version"),
            "level": level, "levels": len(datasets), **info}
    offset = _translation(dataset.get("coordinateTransformations"))
    if offset is not None:
        meta["origin"] = [offset[i] for i in kept]
    return Decoded(np.asarray(data[...]), spacing=tuple(scale[kept]),
                   unit=space_units.pop() if space_units else None, meta=meta)


def read_zarr(path: str | os.PathLike, *, channel: int | None = None,
              time: int | None = None, level: int = 0) -> Decoded:
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

    Examples
    --------
    >>> import tempfile, zarr
    >>> store = tempfile.mkdtemp() + "/cube.zarr"
    >>> zarr.open_array(store, mode="w", shape=(3, 4, 5), dtype="uint8")[:] = 7
    >>> decoded = read_zarr(store)
    >>> decoded.data.shape, decoded.spacing, int(decoded.data.max())
    ((3, 4, 5), None, 7)
    """
    path = Path(path)
    zarr, node = _open(path)
    if isinstance(node, zarr.Array):
        return Decoded(np.asarray(node[...]), meta={"format": "zarr"})
    multiscales = _multiscales(dict(node.attrs))
    if multiscales is not None:
        return _decode_ome(zarr, node, multiscales[0], level=level, channel=channel,
                           time=time, path=path)
    arrays = [name for name, _ in node.arrays()]
    if len(arrays) != 1:
        raise InputFileError(
            f"Zarr group '{path}' has no OME-Zarr multiscales metadata and holds "
            f"{len(arrays)} arrays; expected one image array or OME-Zarr metadata."
        )
    return Decoded(np.asarray(node[arrays[0]][...]), meta={"format": "zarr",
                                                            "array": arrays[0]})
