"""Strict JSON for every file and line cavitas writes: NaN and infinities become ``null``.

Python's :func:`json.dumps` writes a NaN as a bare ``NaN``, which is not JSON (RFC 8259):
browsers, ``jq`` and most other readers refuse the whole file. A figure that could not be
computed (the noise of a one-pixel image) is written as ``null`` instead, and
``allow_nan=False`` makes any value missed here an error rather than a broken file.
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable, Mapping
from typing import Any

import numpy as np

from ._errors import safe_text

__all__ = ["dumps", "plain"]


def plain(value: Any, default: Callable[[Any], Any] | None = None) -> Any:
    """``value`` with NumPy scalars and arrays as Python ones and non-finite floats as None.

    ``default`` converts anything else JSON cannot hold (e.g. ``str`` for paths); without
    it such a value is returned unchanged, for :func:`json.dumps` to refuse.

    Examples
    --------
    >>> plain({"noise": float("nan"), "shape": np.array([3, 4]), "n": np.int64(2)})
    {'noise': None, 'shape': [3, 4], 'n': 2}
    """
    if isinstance(value, (float, np.floating)):
        return float(value) if math.isfinite(value) else None
    if isinstance(value, np.generic):
        return plain(value.item(), default)
    if isinstance(value, str):
        return safe_text(value)  # a file name that is not UTF-8 (written escaped)
    if value is None or isinstance(value, int):
        return value
    if isinstance(value, Mapping):
        return {plain(key): plain(item, default) for key, item in value.items()}
    if isinstance(value, (list, tuple, np.ndarray)):
        return [plain(item, default) for item in value]
    return value if default is None else plain(default(value), None)


def dumps(value: Any, *, default: Callable[[Any], Any] | None = None, **options: Any) -> str:
    """:func:`json.dumps` of :func:`plain` ``(value)``, refusing NaN (``allow_nan=False``).

    Examples
    --------
    >>> dumps({"sigma": float("nan"), "inf": -np.inf})
    '{"sigma": null, "inf": null}'
    """
    return json.dumps(plain(value, default), allow_nan=False, **options)
