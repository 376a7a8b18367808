"""TIFF: single images, multi-page stacks, ImageJ hyperstacks and OME-TIFF (via tifffile).

Reading
-------
The first image series of the file is read with its axes (``'TZCYX'`` and the like);
:func:`~cavitas.io._axes.select_planes` keeps one channel and one time point. Voxel size:

* X and Y from the resolution tags (pixels per unit, so size = 1 / value); the unit from
  ``ResolutionUnit`` (inch, centimetre), from the ImageJ ``unit`` entry, or from the OME
  ``PhysicalSize*Unit`` attributes;
* Z from the ImageJ ``spacing`` entry or OME ``PhysicalSizeZ``;
* files cavitas wrote as plain TIFF (see below) keep ``spacing`` and ``unit`` in their
  JSON description.

An ImageJ file cavitas wrote with an ``original_type`` entry is given back in that type
(int32 labels stored as uint16 come back int32).

A 72 pixels-per-inch resolution is the usual placeholder of programs that know no pixel
size, and is ignored (with a warning). Data are memory-mapped when stored contiguously and
uncompressed, otherwise read into memory. Messages tifffile logs while reading are kept in
``meta["warnings"]``; errors it logs (a damaged file) make the read fail.

Writing
-------
Every TIFF is written so that common viewers show its physical size:

* ``.tif``: an ImageJ hyperstack (axes ``ZYX`` or ``YX``): X/Y in the resolution tags as
  pixels per unit (``ResolutionUnit`` none), the unit (``unit=``, µm written ``um``) and
  the z step (``spacing=``) in the ImageJ description. ImageJ opens uint8, uint16, int16
  and float32 only, so other types are stored in the smallest of those that holds every
  value exactly: integer labels in uint16 when they fit (0 to 65535), else int16, else
  float32 (exact up to 2**24 = 16 777 216); float64 and float16 data in float32 when no
  value changes. The original type is noted in the description (``original_type=int32``)
  and :func:`read_tiff` gives it back. Only data no ImageJ type holds exactly (more than
  2**24 labels, float64 that float32 would round) are written as plain TIFF: X/Y in
  pixels per centimetre, and ``spacing``, ``unit`` and ``axes`` in a JSON description.
* ``.ome.tif``: OME-TIFF in the data's own type (OME knows int32, uint32 and double),
  with ``PhysicalSizeX/Y/Z`` and their units in the OME-XML.

A spacing whose unit is ``"unknown"`` is written as numbers without a unit (no OME
physical size, whose default unit would be µm). Every written file holds the research-only
caution. zlib compression (standard library) is used unless ``compress=False``.
"""

from __future__ import annotations

import contextlib
import logging
import os
import xml.etree.ElementTree as ElementTree
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
import tifffile

from .._caution import RESEARCH_ONLY
from .._errors import CavitasError, InputFileError
from ._assemble import Decoded, note
from ._axes import select_planes
from ._declared import check_declared
from ._failures import check_signature, unreadable
from ._logs import collect_log
from ._units import centimetres_per, has_named_unit, normalise_unit

__all__ = ["read_tiff", "write_tiff"]

#: The types ImageJ opens, smallest first (the order :func:`_imagej_type` tries them in).
_IMAGEJ_TYPES = tuple(np.dtype(t) for t in ("uint8", "uint16", "int16", "float32"))
#: Types an ImageJ file may name as its ``original_type``.
_ORIGINAL_TYPES = {np.dtype(t) for t in ("int8", "uint32", "int32", "uint64", "int64",
                                         "float16", "float64")}
_FLOAT32_EXACT = 2**24  # float32 holds every integer up to this
_PLACEHOLDER_PPI = 72.0
_OME_UNITS = {"inch": "in"}


#: What a damaged file is called when tifffile logs an error while reading it.
_DAMAGED = "its image directories or image data are damaged (a truncated or damaged file)"


def _fail(path: Path, problem: str) -> InputFileError:
    return InputFileError(f"'{path}' cannot be read as TIFF: {problem}.")


def _check_complete(path: Path, series: Any) -> None:
    """Raise if the image data of ``series`` run past the end of the file (truncated), or
    declare more voxels than the memory available holds (see :func:`check_declared`)."""
    size = os.path.getsize(path)
    check_declared(path, series.shape, series.dtype)
    if series.dataoffset is not None:
        end = series.dataoffset + series.nbytes
    else:
        end = 0
        for page in series.pages:
            if page is None:
                raise _fail(path, "an image page is missing (truncated or damaged file)")
            ends = [int(o) + int(c) for o, c in zip(page.dataoffsets, page.databytecounts,
                                                    strict=False)]
            end = max(end, *ends) if ends else end
    if end > size:
        raise InputFileError(
            f"'{path}' is truncated: its image data end at byte {end} but the file has "
            f"{size} bytes."
        )


def _resolution(page: Any, path: Path, meta: dict[str, Any]) -> tuple[tuple[float, float] |
                                                                       None, str | None]:
    """Pixel size (y, x) from the resolution tags, and the unit they imply."""
    tags = page.tags
    if "XResolution" not in tags or "YResolution" not in tags:
        return None, None
    try:
        xres = tags["XResolution"].value
        yres = tags["YResolution"].value
        per_x = xres[0] / xres[1] if isinstance(xres, tuple) else float(xres)
        per_y = yres[0] / yres[1] if isinstance(yres, tuple) else float(yres)
    except (ZeroDivisionError, TypeError, IndexError):
        note(meta, path, "the resolution tags are unreadable; pixel size ignored")
        return None, None
    if not (per_x > 0 and per_y > 0):
        note(meta, path, f"the resolution tags hold {per_x}, {per_y} pixels per unit; ignored")
        return None, None
    code = int(tags["ResolutionUnit"].value) if "ResolutionUnit" in tags else 2
    if code == 2 and per_x == per_y == _PLACEHOLDER_PPI:
        note(meta, path, "72 pixels per inch is a placeholder, not a pixel size; ignored")
        return None, None
    if code in (2, 3):  # inch, centimetre
        unit = "inch" if code == 2 else "cm"
        size_y, size_x = _convert(1.0 / per_y, unit, "µm"), _convert(1.0 / per_x, unit, "µm")
        if size_y is not None and size_x is not None:  # always: both are lengths
            return (size_y, size_x), "µm"
    return (1.0 / per_y, 1.0 / per_x), None


def _convert(value: float, unit: str | None, target: str | None) -> float | None:
    if normalise_unit(unit) == normalise_unit(target):
        return value
    here, there = centimetres_per(unit), centimetres_per(target)
    if here is None or there is None:
        return None
    return float(f"{value * here / there:.12g}")  # drop the rounding noise of the factors


def _ome_geometry(tif: Any, path: Path, meta: dict[str, Any]) -> tuple[dict[str, float], str]:
    """Physical sizes {'Z': .., 'Y': .., 'X': ..} of the first OME image, in one unit."""
    try:
        root = ElementTree.fromstring(tif.ome_metadata)
    except ElementTree.ParseError:
        note(meta, path, "the OME-XML metadata are not valid XML; physical sizes ignored")
        return {}, "µm"
    pixels = next((e for e in root.iter() if e.tag.rsplit("}", 1)[-1] == "Pixels"), None)
    if pixels is None:
        return {}, "µm"
    sizes: dict[str, float] = {}
    unit = normalise_unit(pixels.get("PhysicalSizeXUnit", "µm")) or "µm"
    for axis in "XYZ":
        text = pixels.get(f"PhysicalSize{axis}")
        if text is None:
            continue
        axis_unit = pixels.get(f"PhysicalSize{axis}Unit", "µm")  # the OME schema default
        try:
            value = _convert(float(text), axis_unit, unit)
        except ValueError:
            value = None
        if value is None:
            note(meta, path, f"OME PhysicalSize{axis}={text} {axis_unit} cannot be used; ignored")
        else:
            sizes[axis] = value
    return sizes, unit


def _geometry(tif: Any, series: Any, path: Path, ndim: int,
              meta: dict[str, Any]) -> tuple[tuple[float, ...] | None, str | None]:
    """Spacing in (z, y, x) / (y, x) order and its unit, from whatever the file states."""
    page = series.pages[0] if len(series.pages) else tif.pages.first
    yx, unit = _resolution(page, path, meta)
    z = None
    if tif.is_ome:
        sizes, ome_unit = _ome_geometry(tif, path, meta)
        if "Y" in sizes and "X" in sizes:
            yx, unit, z = (sizes["Y"], sizes["X"]), ome_unit, sizes.get("Z")
    elif tif.is_imagej:
        info = tif.imagej_metadata or {}
        if info.get("unit") is not None:
            unit = normalise_unit(info["unit"])
        z = info.get("spacing")
        meta["slice_spacing"] = z
    elif tif.is_shaped and tif.shaped_metadata and "spacing" in tif.shaped_metadata[0]:
        stored = tif.shaped_metadata[0]
        spacing = tuple(float(s) for s in stored["spacing"])
        if len(spacing) == ndim:
            return spacing, normalise_unit(stored.get("unit"))
        note(meta, path, f"the stored spacing {spacing} does not fit {ndim} axes; ignored")
    if unit is None and yx == (1.0, 1.0):  # the default tags of writers that know no size
        yx = None
    if ndim == 2:
        return yx, unit
    if yx is None:
        if z is not None:
            note(meta, path, "the file gives a slice distance but no pixel size; both ignored")
        return None, unit
    if z is None:
        note(meta, path, "the file gives no slice distance; assuming it equals the pixel width")
        z = yx[1]
    return (float(z), *yx), unit


def _kind(tif: Any) -> str:
    if tif.is_ome:
        return "OME-TIFF"
    if tif.is_imagej:
        return "TIFF (ImageJ)"
    return "TIFF"


def _original_type(tif: Any, data: Any) -> Any:
    """The data in the type an ImageJ file cavitas wrote names as ``original_type``."""
    if not tif.is_imagej:
        return data
    name = (tif.imagej_metadata or {}).get("original_type")
    try:
        wanted = np.dtype(str(name)) if name is not None else None
    except TypeError:
        return data
    return data.astype(wanted) if wanted in _ORIGINAL_TYPES else data


def read_tiff(path: Path, *, channel: int | None = None, time: int | None = None,
              mmap: bool = True) -> Decoded:
    """Read the first image series of a TIFF file; see the module notes."""
    meta: dict[str, Any] = {}
    check_signature(path, "TIFF")
    try:
        with collect_log("tifffile") as log, tifffile.TiffFile(path) as tif:
            if not len(tif.pages) or not tif.series:
                raise _fail(path, "the file holds no readable image directory")
            series = tif.series[0]
            if len(tif.series) > 1:
                note(meta, path, f"the file holds {len(tif.series)} image series; "
                                 "reading the first")
            if log.messages(logging.ERROR):
                raise _fail(path, _DAMAGED)
            _check_complete(path, series)
            data = None
            if mmap and series.dataoffset is not None:
                with contextlib.suppress(ValueError, OSError):
                    data = tifffile.memmap(path, series=0, mode="r")
            if data is None:
                data = series.asarray()
            if log.messages(logging.ERROR):
                raise _fail(path, _DAMAGED)
            data, chosen = select_planes(data, series.axes, channel=channel, time=time,
                                         name=str(path))
            data = _original_type(tif, data)
            spacing, unit = _geometry(tif, series, path, data.ndim, meta)
            meta.update(chosen, format=_kind(tif))
            for message in log.messages():
                note(meta, path, message)
    except CavitasError:
        raise
    except Exception as exc:  # tifffile, imagecodecs and the OS raise many types
        raise unreadable(path, "TIFF", exc) from exc
    return Decoded(data, spacing, unit, None, meta)


def _ascii_unit(unit: str) -> str:
    """ImageJ descriptions are ASCII: 'µm' is written 'um', others escaped as ImageJ does."""
    if unit == "µm":
        return "um"
    return "".join(c if ord(c) < 128 else f"\\u{ord(c):04X}" for c in unit)


def _imagej_type(data: np.ndarray) -> np.dtype | None:
    """The first ImageJ type that holds every value of ``data`` exactly, or None.

    Examples
    --------
    >>> _imagej_type(np.array([0, 70000], np.int32)), _imagej_type(np.array([0, 9], np.int64))
    (dtype('float32'), dtype('uint16'))
    """
    if data.dtype in _IMAGEJ_TYPES:
        return data.dtype
    if data.dtype.kind in "iu":
        low, high = int(data.min()), int(data.max())
        for candidate in _IMAGEJ_TYPES[1:3]:  # uint16, int16 (uint8 would lose the label type)
            limits = np.iinfo(candidate)
            if limits.min <= low and high <= limits.max:
                return candidate
        if max(-low, high) <= _FLOAT32_EXACT:
            return np.dtype("float32")
        return None
    if data.dtype.kind == "f":
        with np.errstate(over="ignore"):
            narrowed = data.astype(np.float32)
        if np.array_equal(narrowed, data, equal_nan=True):
            return np.dtype("float32")
    return None


def _write_ome(target: Path, data: np.ndarray, axes: str, spacing: Sequence[float] | None,
               unit: str | None, options: dict[str, Any]) -> None:
    metadata: dict[str, Any] = {"axes": axes, "Description": RESEARCH_ONLY}
    if spacing is not None and has_named_unit(unit):
        for axis, size in zip(axes, spacing, strict=True):
            metadata[f"PhysicalSize{axis}"] = float(size)
            metadata[f"PhysicalSize{axis}Unit"] = _OME_UNITS.get(unit, unit)
    tifffile.imwrite(target, data, ome=True, metadata=metadata, **options)


def _write_imagej(target: Path, data: np.ndarray, stored: np.dtype, axes: str,
                  spacing: Sequence[float] | None, unit: str | None,
                  options: dict[str, Any]) -> None:
    metadata: dict[str, Any] = {"axes": axes, "caution": RESEARCH_ONLY, "Info": RESEARCH_ONLY}
    if stored != data.dtype:
        metadata["original_type"] = data.dtype.name
    if spacing is not None:
        options["resolution"] = (1.0 / spacing[-1], 1.0 / spacing[-2])  # pixels per unit
        if data.ndim == 3:
            metadata["spacing"] = float(spacing[0])
        if has_named_unit(unit):
            metadata["unit"] = _ascii_unit(unit)
    tifffile.imwrite(target, data.astype(stored, copy=False), imagej=True, metadata=metadata,
                     **options)


def _write_plain(target: Path, data: np.ndarray, axes: str, spacing: Sequence[float] | None,
                 unit: str | None, options: dict[str, Any]) -> None:
    metadata: dict[str, Any] = {"axes": axes, "caution": RESEARCH_ONLY}
    if spacing is not None:
        metadata["spacing"] = [float(s) for s in spacing]
        metadata["unit"] = unit
        per_cm = centimetres_per(unit)
        if per_cm is not None:  # pixels per centimetre: 1 / (pixel size in cm)
            options["resolution"] = (1.0 / (spacing[-1] * per_cm),
                                     1.0 / (spacing[-2] * per_cm))
            options["resolutionunit"] = "CENTIMETER"
    tifffile.imwrite(target, data, ome=False, metadata=metadata, **options)


def write_tiff(target: Path, data: np.ndarray, *, spacing: Sequence[float] | None,
               unit: str | None, compress: bool = True, ome: bool = False) -> None:
    """Write ``data`` (2D or 3D) to ``target`` as ImageJ TIFF, OME-TIFF or plain TIFF."""
    axes = "ZYX"[-data.ndim:]
    if unit in (None, "voxel") and spacing is not None and all(s == 1 for s in spacing):
        spacing = None
    options: dict[str, Any] = dict(
        photometric="minisblack", software="cavitas",
        compression="zlib" if compress else None,
    )
    if ome:
        _write_ome(target, data, axes, spacing, unit, options)
        return
    stored = _imagej_type(data)
    if stored is not None:
        _write_imagej(target, data, stored, axes, spacing, unit, options)
    else:
        _write_plain(target, data, axes, spacing, unit, options)
