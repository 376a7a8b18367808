"""Strict checks of single parameter values, shared by every parameter group and every stage.

The argument validators every stage shares live here too, so their copies cannot drift:
:func:`spacing`, :func:`shape`, :func:`walls` and :func:`refuse_nonfinite` (NaN or
infinite intensities, inside a mask when there is one). This module imports no stage.

Each check takes the parameter's Python name and its value, and returns the value in its
canonical type or raises a one-sentence :class:`~cavitas._errors.ParameterError` naming the
parameter (listed in ``parameters``, so the command line can write it as its option).
Types are strict, as a parameter file is: a boolean is not a number, a number is not a
text, ``"yes"`` is not a boolean. NumPy scalars count as the Python type they stand for.

Examples
--------
>>> number("smooth", 2, low=0)
2.0
>>> whole("top", True, low=1)
Traceback (most recent call last):
...
cavitas._errors.ParameterError: top must be a whole number >= 1; got true.
"""

from __future__ import annotations

import math
import numbers
from collections.abc import Sequence
from typing import Any

import numpy as np

from ._errors import InputFileError, ParameterError

__all__ = ["REGIONS", "WALLS", "choice", "flag", "number", "numbers_list", "refuse_nonfinite",
           "shape", "spacing", "text", "walls", "whole"]

#: The accepted ``walls`` values: bright walls (a superlevel filtration) or dark ones.
WALLS = ("bright", "dark")
#: The region definitions (:mod:`cavitas.segment._regions`; ``"component"``: the breach
#: region alone, no border-cut check and no island filling).
REGIONS = ("basin", "breach", "component")


def _shown(value: Any) -> str:
    """A value as a parameter file would write it (``true``, a table, a list)."""
    if isinstance(value, (bool, np.bool_)):
        return "true" if value else "false"
    if isinstance(value, dict):
        return "a table"
    return repr(value)


def _refuse(name: str, expected: str, value: Any) -> ParameterError:
    return ParameterError(f"{name} must be {expected}; got {_shown(value)}.",
                          parameters=(name,))


def number(name: str, value: Any, *, low: float | None = None, high: float | None = None,
           low_open: bool = False, what: str = "a number") -> float:
    """A finite real number in ``[low, high]`` (``(low, high]`` with ``low_open``).

    Examples
    --------
    >>> number("safety", 0, low=0, low_open=True)
    Traceback (most recent call last):
    ...
    cavitas._errors.ParameterError: safety must be a number > 0; got 0.
    """
    bounds = (f" in {'(' if low_open else '['}{low:g}, {high:g}]" if low is not None
              and high is not None else f" {'>' if low_open else '>='} {low:g}"
              if low is not None else f" <= {high:g}" if high is not None else "")
    expected = what + bounds
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise _refuse(name, expected, value)
    result = float(value)
    if not math.isfinite(result):
        raise _refuse(name, f"finite, {expected}", value)
    if low is not None and (result < low or (low_open and result == low)):
        raise _refuse(name, expected, value)
    if high is not None and result > high:
        raise _refuse(name, expected, value)
    return result


def whole(name: str, value: Any, *, low: int = 0, what: str = "a whole number") -> int:
    """A whole number (a Python or NumPy integer, not a float or a boolean) ``>= low``."""
    expected = f"{what} >= {low}"
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral):
        raise _refuse(name, expected, value)
    if value < low:
        raise _refuse(name, expected, value)
    return int(value)


def flag(name: str, value: Any) -> bool:
    """A boolean (``true`` / ``false`` in a parameter file; never ``"yes"`` or 1)."""
    if not isinstance(value, (bool, np.bool_)):
        raise _refuse(name, "true or false", value)
    return bool(value)


def text(name: str, value: Any, *, what: str = "a text") -> str:
    """A non-empty string."""
    if not isinstance(value, str) or not value:
        raise _refuse(name, what, value)
    return value


def choice(name: str, value: Any, choices: Sequence[str]) -> str:
    """One of ``choices`` (strings).

    Examples
    --------
    >>> choice("walls", "grey", ("bright", "dark"))
    Traceback (most recent call last):
    ...
    cavitas._errors.ParameterError: walls must be 'bright' or 'dark'; got 'grey'.
    """
    if not isinstance(value, str) or value not in choices:
        listed = " or ".join(repr(c) for c in choices) if len(choices) <= 2 else (
            "one of " + ", ".join(repr(c) for c in choices))
        raise _refuse(name, listed, value)
    return value


def numbers_list(name: str, value: Any, *, integer: bool, low: float,
                 low_open: bool = False) -> tuple[Any, ...]:
    """Two or three numbers, one per axis in ``(z, y, x)`` order, each above ``low``.

    Examples
    --------
    >>> numbers_list("shape", [64, 256, 256], integer=True, low=1)
    (64, 256, 256)
    >>> numbers_list("spacing", [2, "0.5"], integer=False, low=0, low_open=True)
    ... # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    cavitas._errors.ParameterError: spacing must be 2 or 3 numbers > 0, ... got [2, '0.5'].
    """
    kind = "whole numbers" if integer else "numbers"
    expected = f"2 or 3 {kind} {'>' if low_open else '>='} {low:g}, in (z, y, x) order"
    if isinstance(value, (str, bytes, dict)) or not isinstance(value, (Sequence, np.ndarray)):
        raise _refuse(name, expected, value)
    if len(value) not in (2, 3):
        raise _refuse(name, expected, value)
    try:
        if integer:
            return tuple(whole(name, v, low=int(low)) for v in value)
        return tuple(number(name, v, low=low, low_open=low_open) for v in value)
    except ParameterError:
        raise _refuse(name, expected, value) from None


def spacing(value: Any, ndim: int | None = None) -> tuple[float, ...]:
    """A voxel spacing: 2 or 3 finite numbers > 0 in ``(z, y, x)`` order, ``ndim`` of them
    when the image is known.

    Examples
    --------
    >>> spacing([2, 0.5, 0.5])
    (2.0, 0.5, 0.5)
    >>> spacing((1.0, 1.0), ndim=3)
    Traceback (most recent call last):
    ...
    cavitas._errors.ParameterError: spacing must have one value per axis (3, in (z, y, x) \
order); got 2: (1.0, 1.0).
    """
    values = numbers_list("spacing", value, integer=False, low=0, low_open=True)
    if ndim is not None and len(values) != ndim:
        raise ParameterError(
            f"spacing must have one value per axis ({ndim}, in (z, y, x) order); "
            f"got {len(values)}: {values}.", parameters=("spacing",))
    return values


def shape(value: Any) -> tuple[int, ...]:
    """An array shape: 2 or 3 whole numbers >= 1 in ``(z, y, x)`` order.

    Examples
    --------
    >>> shape([64, 256, 256])
    (64, 256, 256)
    """
    return numbers_list("shape", value, integer=True, low=1)


def walls(value: Any) -> str:
    """``"bright"`` (walls brighter than what they enclose) or ``"dark"``.

    Examples
    --------
    >>> walls("grey")
    Traceback (most recent call last):
    ...
    cavitas._errors.ParameterError: walls must be 'bright' or 'dark'; got 'grey'.
    """
    return choice("walls", value, WALLS)


def refuse_nonfinite(count: int, *, image: str = "image", masked: bool = False,
                     total: int | None = None) -> None:
    """Refuse an image with ``count`` NaN or infinite values among the voxels analysed
    (those inside the mask when ``masked``); ``total`` is the number of voxels looked at.

    Examples
    --------
    >>> refuse_nonfinite(0, image="'a.tif'")
    >>> refuse_nonfinite(2, image="'a.tif'", masked=True)
    Traceback (most recent call last):
    ...
    cavitas._errors.InputFileError: 'a.tif' holds 2 NaN or infinite voxel(s) inside the mask; \
replace them (e.g. with numpy.nan_to_num) or leave them outside the mask.
    """
    if not count:
        return
    among = "" if total is None else f" out of {total}"
    where, instead = (" inside the mask", "leave them outside the mask") if masked else (
        "", "mask them out")
    raise InputFileError(f"{image} holds {count} NaN or infinite voxel(s){among}{where}; "
                         f"replace them (e.g. with numpy.nan_to_num) or {instead}.")
