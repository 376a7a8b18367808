"""NIfTI-1 / NIfTI-2 (``.nii``, ``.nii.gz``; also Analyze ``.hdr``/``.img`` pairs) via nibabel.

Reading
-------
NIfTI stores voxels in ``(x, y, z, t, u)`` order; cavitas transposes them to ``(z, y, x)``
(a view, so an uncompressed ``.nii`` stays memory-mapped). A 4th (time) or 5th axis of
length > 1 needs ``time=`` or ``channel=``; a z axis of length 1 gives a 2D image.
``vol.affine`` is the file's voxel-to-world matrix (``img.affine``: sform, else qform), in
the file's ``(x, y, z)`` voxel order, float64. ``spacing`` is the header's zooms reversed;
NIfTI-1 stores them as float32, so each is given as the shortest decimal that float32 reads
back the same (0.1 and not 0.10000000149). The unit comes from ``xyzt_units``; a file
without a unit code (``unknown``) gives the unit ``"unknown"``, not a guess.

Intensity scaling: when ``scl_slope``/``scl_inter`` are unset or (1, 0) the stored values
are returned with their stored type (label maps stay integer). A real scaling is applied,
because intensities in cavitas are always in the input's physical units; the data are then
floating point and ``meta["scaled"]`` is True.

Writing
-------
The array is transposed back to ``(x, y, z)``. The affine is the one of the volume written,
else the one of ``like=`` (same shape), else a diagonal from the spacing; the header of a
NIfTI ``like`` is reused (NIfTI-1 or -2, orientation codes), so a read → write → read round
trip gives back the same data, dtype, affine and spacing. The data type is kept and no
scaling is written. The ``descrip`` field holds a short research-only caution.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any, cast

import numpy as np

from .._errors import InputFileError
from ._assemble import Decoded, note
from ._axes import select_planes
from ._declared import check_declared
from ._failures import reading
from ._logs import collect_log
from ._units import centimetres_per

if TYPE_CHECKING:
    from nibabel.arrayproxy import ArrayProxy

__all__ = ["CAUTION_SHORT", "read_nifti", "write_nifti"]

#: The research-only caution as it fits in the 80-byte ``descrip`` field.
CAUTION_SHORT = "cavitas output: research use only, not for diagnosis"

_UNIT_CODES = {"mm": "mm", "µm": "micron", "m": "meter"}


def nibabel() -> Any:
    """The nibabel module, imported on first use (it takes a tenth of a second or more to
    import, which ``cavitas info`` of another format need not wait for)."""
    import nibabel

    return nibabel


def _zoom(value: Any) -> float:
    """Shortest decimal of a float32 zoom (float64 zooms are returned unchanged)."""
    if isinstance(value, np.float32):
        return float(str(value))
    return float(value)


def _stored_bytes(img: Any) -> int | None:
    """Bytes of voxel data an uncompressed image file holds after its header (None when
    the data are compressed: their size is known only once unpacked)."""
    name = str(img.file_map["image"].filename or "")
    if name.lower().endswith((".gz", ".bz2", ".zst")) or not os.path.isfile(name):
        return None
    return os.path.getsize(name) - int(getattr(img.dataobj, "offset", 0))


def read_nifti(path: Path, *, channel: int | None = None, time: int | None = None,
               mmap: bool = True) -> Decoded:
    """Read a NIfTI (or Analyze) image; see the module notes."""
    meta: dict[str, Any] = {}
    with reading(path, "NIfTI"):
        nib = nibabel()
        with collect_log("nibabel.global") as log:
            img = nib.load(path, mmap="r" if mmap else False)
        if not isinstance(img, nib.analyze.AnalyzeImage):  # NIfTI images are Analyze ones
            raise InputFileError(f"'{path}' is a {type(img).__name__} file, not a NIfTI or "
                                 "Analyze image.")
        for message in log.messages():
            note(meta, path, message)
        shape = tuple(int(n) for n in img.shape)
        if not shape or len(shape) > 7 or min(shape) < 1:
            raise InputFileError(
                f"'{path}' states impossible dimensions {shape}; expected 1 to 7 axes, "
                "each of length >= 1."
            )
        check_declared(path, shape, img.header.get_data_dtype(), stored=_stored_bytes(img))
        # a loaded image's data object is an ArrayProxy (nibabel annotates any ArrayLike)
        proxy = cast("ArrayProxy", img.dataobj)
        slope, inter = float(proxy.slope), float(proxy.inter)
        if (slope, inter) == (1.0, 0.0):
            data = proxy.get_unscaled()
        else:
            data = np.asanyarray(proxy)
            meta["scaled"] = True
        header = img.header
        zooms = header.get_zooms()
        units = (header.get_xyzt_units() if isinstance(header, nib.Nifti1Header)
                 else ("unknown", "unknown"))  # NIfTI-2 and pair headers are NIfTI-1 ones
        xyz_unit = units[0]
        kind = {nib.Nifti2Image: "NIfTI-2", nib.Nifti1Image: "NIfTI-1"}.get(type(img),
                                                                        "Analyze")
        data, chosen = select_planes(np.asanyarray(data), "XYZTCVW"[: len(shape)],
                                     channel=channel, time=time, name=str(path))
        affine = np.asarray(img.affine, dtype=np.float64)
        codes = (int(header.get("sform_code", 0)), int(header.get("qform_code", 0)))
        time_unit = units[1] if kind != "Analyze" else "unknown"
    if kind != "Analyze" and codes == (0, 0):
        note(meta, path, "no orientation codes (sform/qform); the affine holds only voxel sizes")
    spatial = [_zoom(z) for z in zooms[: min(3, len(shape))]]
    spacing = tuple(reversed(spatial[:2])) if data.ndim == 2 else tuple(reversed(spatial))
    unit = {"micron": "µm", "meter": "m"}.get(xyz_unit, xyz_unit)
    meta.update(chosen, format=kind, nifti={"version": 2 if kind == "NIfTI-2" else 1,
                                            "sform_code": codes[0], "qform_code": codes[1],
                                            "time_unit": time_unit})
    return Decoded(data, spacing, unit, affine, meta)


def _affine_from_spacing(spacing: Sequence[float] | None, ndim: int) -> np.ndarray:
    steps = list(reversed(spacing)) if spacing is not None else [1.0] * ndim
    return np.diag([*steps, *([1.0] * (4 - ndim))])


def write_nifti(target: Path, data: np.ndarray, *, spacing: Sequence[float] | None,
                unit: str | None, affine: np.ndarray | None = None,
                nifti: dict[str, Any] | None = None) -> None:
    """Write ``data`` ((z, y, x) or (y, x)) to ``target`` as NIfTI; see the module notes.

    ``nifti`` is the ``meta["nifti"]`` of a volume read from NIfTI (version, orientation
    codes, time unit); without it a NIfTI-1 file with an aligned sform is written.
    """
    code = _UNIT_CODES.get(unit or "", "unknown")
    if affine is None and code == "unknown" and spacing is not None:
        factor = centimetres_per(unit)
        if factor is not None:  # a length NIfTI has no code for: store it in mm
            spacing, code = [s * factor * 10.0 for s in spacing], "mm"
    if affine is None:
        affine = _affine_from_spacing(spacing, data.ndim)
    nifti = nifti or {}
    nib = nibabel()
    image_class = nib.Nifti2Image if nifti.get("version") == 2 else nib.Nifti1Image
    image = image_class(np.asarray(data).T, affine)
    if nifti:
        image.set_sform(affine, code=int(nifti["sform_code"]))
        image.set_qform(affine, code=int(nifti["qform_code"]))
    if spacing is not None:  # the stated zooms, not the affine's column norms (they may differ)
        image.header.set_zooms(tuple(float(s) for s in reversed(spacing)))
    image.set_data_dtype(data.dtype)
    image.header.set_slope_inter(np.nan, np.nan)
    image.header.set_xyzt_units(xyz=code, t=nifti.get("time_unit", "unknown"))
    image.header["descrip"] = CAUTION_SHORT.encode("ascii")
    image.to_filename(str(target))
