"""Valid seed files per reader and the ways the fuzz tests damage them.

Each seed is a small valid file written by a general-purpose library (tifffile, nibabel,
NumPy, Pillow, h5py, zarr) or by hand following the format's published layout; a
:class:`Damage` cuts, flips, overwrites or inflates its bytes. Used by
``tests/test_io_fuzz.py``; the kinds of damage are those of the fuzzing reported in
issue 14 (truncations, bit flips, huge or negative declared sizes, wrong magic,
compressed-stream damage, broken Zarr chunks and metadata).
"""

from __future__ import annotations

import io
import json
import struct
import zipfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np

#: Largest value a damaged size field is set to (a huge or negative declared size).
HUGE = (2**31 - 1, 2**32 - 1, 2**40, 2**62, -1, -(2**31))


@dataclass(frozen=True)
class Damage:
    """One change to a file's bytes: ``kind`` is cut / flip / overwrite / inflate / magic."""

    kind: str
    position: float  # 0..1, where in the file
    value: int  # the byte flipped, the bytes written, or the index into HUGE

    def apply(self, data: bytes) -> bytes:
        """The damaged bytes (never empty: an empty file has its own message)."""
        if not data:
            return data
        at = min(int(self.position * len(data)), len(data) - 1)
        if self.kind == "cut":
            return data[:max(at, 1)]
        if self.kind == "flip":
            return data[:at] + bytes([data[at] ^ (1 << (self.value % 8))]) + data[at + 1:]
        if self.kind == "overwrite":
            noise = np.random.default_rng(self.value).integers(0, 256, 16, np.uint8).tobytes()
            return data[:at] + noise[: len(data) - at] + data[at + 16:]
        if self.kind == "inflate":  # a size field set to a huge or negative number
            number = HUGE[self.value % len(HUGE)]
            packed = struct.pack("<q", number)[:8]
            return data[:at] + packed[: len(data) - at] + data[at + 8:]
        return bytes(b ^ 0x5A for b in data[:4]) + data[4:]  # "magic": wrong signature


def _image(ndim: int = 3, dtype: str = "uint16") -> np.ndarray:
    shape = (3, 6, 7) if ndim == 3 else (6, 7)
    return (np.arange(int(np.prod(shape))).reshape(shape) * 37 % 251).astype(dtype)


def tiff_seed(folder: Path, compressed: bool) -> Path:
    import tifffile

    path = folder / ("seed_z.tif" if compressed else "seed.tif")
    tifffile.imwrite(path, _image(), imagej=True, resolution=(2.0, 2.0),
                     metadata={"spacing": 1.5, "unit": "um", "axes": "ZYX"},
                     compression="zlib" if compressed else None)
    return path


def nifti_seed(folder: Path, compressed: bool) -> Path:
    import nibabel as nib

    path = folder / ("seed.nii.gz" if compressed else "seed.nii")
    nib.save(nib.Nifti1Image(_image().T, np.diag([0.5, 0.5, 2.0, 1.0])), path)
    return path


def npy_seed(folder: Path) -> Path:
    path = folder / "seed.npy"
    np.save(path, _image())
    return path


def npz_seed(folder: Path, compressed: bool) -> Path:
    path = folder / ("seed_z.npz" if compressed else "seed.npz")
    save = np.savez_compressed if compressed else np.savez
    save(path, image=_image(), spacing=np.array([2.0, 0.5, 0.5]), unit=np.array("um"))
    return path


def png_seed(folder: Path) -> Path:
    from PIL import Image

    path = folder / "seed.png"
    Image.fromarray(_image(2, "uint8")).save(path, dpi=(300, 300))
    return path


def hdf5_seed(folder: Path) -> Path:
    import h5py

    path = folder / "seed.h5"
    with h5py.File(path, "w") as handle:
        node = handle.create_dataset("image", data=_image(), compression="gzip")
        node.attrs["spacing"] = [2.0, 0.5, 0.5]
        node.attrs["unit"] = "um"
    return path


def raw_seed(folder: Path) -> Path:
    path = folder / "seed.raw"
    _image().tofile(path)
    return path


def zarr_seed(folder: Path, compressor: str) -> Path:
    """A Zarr v2 array store chunked 2 x 3 x 4 (compressor ``blosc``, ``zlib`` or ``none``)."""
    import zarr

    path = folder / f"seed_{compressor}.zarr"
    from numcodecs import Blosc, Zlib

    options = {"zarr_format": 2, "chunks": (2, 3, 4),
               "compressor": {"blosc": Blosc(), "zlib": Zlib(level=1)}.get(compressor)}
    array = zarr.open_array(str(path), mode="w", shape=(3, 6, 7), dtype="uint16", **options)
    array[:] = _image()
    return path


def ome_zarr_attrs(multiscales: object) -> bytes:
    """A ``.zattrs`` document holding ``multiscales`` as it comes (possibly of a wrong type)."""
    return json.dumps({"multiscales": multiscales}).encode()


def npz_with_member(folder: Path, member: bytes) -> Path:
    """A .npz whose only member holds ``member`` instead of a .npy file."""
    path = folder / "member.npz"
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w") as archive:
        archive.writestr("image.npy", member)
    path.write_bytes(buffer.getvalue())
    return path
