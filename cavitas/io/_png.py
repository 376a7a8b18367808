"""PNG images (2D) via Pillow, which matplotlib and scikit-image already require.

Grey images keep their type (8-bit ``uint8``, 16-bit ``uint16``); colour images (RGB,
RGBA, grey + alpha) need ``channel=`` (0 = red ...); palette images give their palette
indices (label images are often stored so). The pixel size comes from the ``pHYs`` chunk
when it states one (Pillow reports it in dots per inch); 72 dpi is ignored as a placeholder.
"""

from __future__ import annotations

import struct
import warnings
from pathlib import Path
from typing import Any

import numpy as np

from .._errors import InputFileError
from ._assemble import Decoded, note
from ._axes import select_planes
from ._declared import check_declared
from ._failures import check_signature, reading

__all__ = ["read_png"]

_PLACEHOLDER_DPI = 72.0


def _check_header(path: Path) -> None:
    """Check the size the ``IHDR`` chunk declares (PNG specification, section 11.2.2: width
    and height as big-endian 32-bit integers after the signature and chunk header, then the
    bit depth and colour type) against the memory available, before decoding."""
    with open(path, "rb") as stream:
        header = stream.read(26)
    if len(header) < 26 or header[12:16] != b"IHDR":
        return  # Pillow names what is wrong
    width, height, depth, colour = struct.unpack(">IIBB", header[16:26])
    samples = {0: 1, 2: 3, 3: 1, 4: 2, 6: 4}.get(colour, 4)
    check_declared(path, (height, width, samples), np.uint16 if depth == 16 else np.uint8)


def read_png(path: Path, *, channel: int | None = None) -> Decoded:
    """Read a PNG image as a 2D array; see the module notes."""
    from PIL import Image  # Pillow: a dependency of matplotlib and scikit-image

    meta: dict[str, Any] = {"format": "PNG"}
    with reading(path, "PNG"):
        check_signature(path, "PNG")
        _check_header(path)
        try:
            with warnings.catch_warnings():  # the size was checked against memory above
                warnings.simplefilter("ignore", Image.DecompressionBombWarning)
                image = Image.open(path)
        except Image.DecompressionBombError as exc:
            raise InputFileError(
                f"'{path}' holds more pixels than Pillow (the PNG library) opens; store it "
                "as TIFF instead.") from exc
        with image:
            image.load()
            mode, info = image.mode, dict(image.info)
            data = np.asarray(image)
        if mode == "P":
            note(meta, path, "a palette image; reading the palette indices")
        if data.dtype == bool:
            data = data.astype(np.uint8)
        data, chosen = select_planes(data, "YXC"[: data.ndim], channel=channel, time=None,
                                     name=str(path))
    meta.update(chosen)
    spacing = None
    dpi = info.get("dpi")
    if dpi and max(abs(d - _PLACEHOLDER_DPI) for d in dpi) < 0.1:
        note(meta, path, "72 dots per inch is a placeholder, not a pixel size; ignored")
    elif dpi and min(dpi) > 0:
        spacing = (25400.0 / float(dpi[1]), 25400.0 / float(dpi[0]))
    return Decoded(data, spacing, "µm" if spacing else None, None, meta)
