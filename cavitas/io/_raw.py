"""Raw binary files (``.raw``, ``.bin``, ``.img`` without a header): the user gives the layout.

The file must hold exactly ``offset + prod(shape) * itemsize`` bytes: a header of
``offset`` bytes, then the voxels in C order (x varies fastest, then y, then z). The data
are memory-mapped unless ``mmap=False``.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from pathlib import Path
from typing import Literal

import numpy as np

from .. import _checks
from .._errors import InputFileError, ParameterError
from ._assemble import Decoded
from ._declared import check_declared, declared_bytes
from ._failures import reading

__all__ = ["BYTE_ORDERS", "read_raw"]

#: Accepted ``byte_order=`` values and the NumPy prefix each stands for.
BYTE_ORDERS: dict[str, Literal["<", ">", "="]] = {
    "little": "<", "big": ">", "native": "=", "<": "<", ">": ">", "=": "="}


def _layout(path: Path, shape: Sequence[int] | None, dtype: str | np.dtype | None,
            byte_order: str | None, offset: int) -> tuple[tuple[int, ...], np.dtype]:
    if shape is None or dtype is None:
        raise ParameterError(
            f"'{path}' is a raw file without a header; give its shape= (z, y, x) and dtype= "
            "(and byte_order=, offset= if needed).",
            parameters=("shape", "dtype", "byte_order", "offset"),
        )
    dims = _checks.shape(shape)
    try:
        kind = np.dtype(dtype)
    except TypeError as exc:
        raise ParameterError(f"dtype={dtype!r} is not a NumPy data type name.",
                             parameters=("dtype",)) from exc
    if kind.kind not in "biuf":
        raise ParameterError(f"dtype must be an integer or float type; got {kind}.",
                             parameters=("dtype",))
    if byte_order is not None:
        if byte_order not in BYTE_ORDERS:
            raise ParameterError(
                f"byte_order must be one of {', '.join(BYTE_ORDERS)}; got {byte_order!r}.",
                parameters=("byte_order",))
        kind = kind.newbyteorder(BYTE_ORDERS[byte_order])
    if isinstance(offset, bool) or not isinstance(offset, (int, np.integer)) or offset < 0:
        raise ParameterError(f"offset must be a whole number of bytes >= 0; got {offset!r}.",
                             parameters=("offset",))
    return dims, kind


def read_raw(path: Path, *, shape: Sequence[int] | None, dtype: str | np.dtype | None,
             byte_order: str | None = None, offset: int = 0, mmap: bool = True) -> Decoded:
    """Read a raw binary volume with a user-given layout; see the module notes."""
    dims, kind = _layout(path, shape, dtype, byte_order, offset)
    expected = int(offset) + declared_bytes(path, dims, kind)
    actual = os.path.getsize(path)
    if actual != expected:
        raise InputFileError(
            f"'{path}' has {actual} bytes, but shape {dims} of {kind} after a {offset}-byte "
            f"header needs {expected} bytes."
        )
    with reading(path, "raw data"):
        data: np.ndarray
        if mmap:
            data = np.memmap(path, dtype=kind, mode="r", shape=dims, offset=int(offset))
        else:
            check_declared(path, dims, kind)
            data = np.fromfile(path, dtype=kind, offset=int(offset)).reshape(dims)
    meta = {"format": "raw", "byte_order": kind.byteorder, "offset": int(offset)}
    return Decoded(data, meta=meta)
