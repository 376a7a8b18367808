"""Pick one channel and one time point from an array whose axes are named by letters.

Axis letters follow the usual microscopy convention (as in tifffile's series axes):
``T`` time, ``C`` channel (``S``, the samples of an RGB pixel, counts as a channel),
``Z`` depth, ``Y`` rows, ``X`` columns. A generic page axis (``I``, ``Q``) is taken as
``Z`` when there is no ``Z``. Axes of length 1 are dropped.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .._errors import ChoiceNeeded, InputFileError, ParameterError

__all__ = ["select_planes"]

_OPTION = {"C": ("channel", "channel(s)"), "T": ("time", "time point(s)")}


def _rename(axes: str) -> str:
    out = axes.upper().replace("S", "C") if "C" not in axes.upper() else axes.upper()
    for generic in "IQ":
        if generic in out and "Z" not in out:
            out = out.replace(generic, "Z", 1)
        if generic in out and "T" not in out:
            out = out.replace(generic, "T", 1)
    return out


def _pick(data: Any, axes: str, letter: str, choice: int | None, name: str,
          shape: tuple[int, ...], original: str) -> tuple[Any, str, int | None]:
    option, plural = _OPTION[letter]
    size = data.shape[axes.index(letter)] if letter in axes else 1
    if choice is None:
        if size > 1:
            raise ChoiceNeeded(
                f"'{name}' holds {size} {plural} (axes {original}, shape {shape}); "
                f"choose one with {option}=N (counted from 0).",
                parameter=option, choices=range(size))
        choice = 0
    elif isinstance(choice, bool) or not isinstance(choice, (int, np.integer)) or not (
        0 <= choice < size
    ):
        raise ParameterError(
            f"{option}={choice!r} is out of range for '{name}', which holds {size} {plural} "
            f"(0 to {size - 1}).", parameters=(option,))
    if letter not in axes:
        return data, axes, None
    index = axes.index(letter)
    key = (*[slice(None)] * index, int(choice))  # basic indexing: a memory map stays one
    data = data[key]
    return data, axes.replace(letter, ""), int(choice)


def select_planes(data: Any, axes: str, *, channel: int | None, time: int | None,
                  name: str) -> tuple[Any, dict[str, Any]]:
    """Return the ``(z, y, x)`` or ``(y, x)`` part of ``data`` for one channel and time.

    Basic indexing only, so a memory map stays a memory map.

    Parameters
    ----------
    data : array
        The array as stored, with ``len(axes)`` dimensions.
    axes : str
        One letter per axis, e.g. ``"TZCYX"``.
    channel, time : int or None
        The index to keep along ``C`` (or ``S``) and ``T``; required when that axis is
        longer than 1.
    name : str
        The file, for messages.

    Returns
    -------
    data : array
        2D or 3D, axes in ``(z, y, x)`` order.
    info : dict
        ``axes`` (as stored), ``channel``, ``time`` (chosen indices, or None).

    Examples
    --------
    >>> import numpy as np
    >>> stack = np.zeros((2, 5, 3, 8, 9))
    >>> select_planes(stack, "TZCYX", channel=1, time=0, name="a.tif")[0].shape
    (5, 8, 9)
    """
    original = axes
    shape = tuple(data.shape)
    axes = _rename(axes)
    if len(axes) != len(shape) or len(set(axes)) != len(axes):
        raise InputFileError(
            f"'{name}' has axes '{original}' that do not match its shape {shape}."
        )
    data, axes, chosen_time = _pick(data, axes, "T", time, name, shape, original)
    data, axes, chosen_channel = _pick(data, axes, "C", channel, name, shape, original)
    for letter in [a for a in axes if a not in "ZYX"]:  # other axes: only length 1 is fine
        index = axes.index(letter)
        if data.shape[index] != 1:
            raise InputFileError(
                f"'{name}' has an axis '{letter}' of length {data.shape[index]} (axes "
                f"{original}, shape {shape}) that cavitas cannot choose from."
            )
        data = data[(slice(None),) * index + (0,)]
        axes = axes.replace(letter, "")
    if "Z" in axes and data.shape[axes.index("Z")] == 1 and len(axes) == 3:
        data = data[(slice(None),) * axes.index("Z") + (0,)]
        axes = axes.replace("Z", "")
    order = [axes.index(a) for a in "ZYX" if a in axes]
    if len(order) != len(axes) or "Y" not in axes or "X" not in axes:
        raise InputFileError(f"'{name}' has axes '{original}' without rows and columns (Y, X).")
    if order != sorted(order):
        data = np.transpose(data, order)
    return data, {"axes": original, "channel": chosen_channel, "time": chosen_time}
