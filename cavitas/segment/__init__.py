"""Segmentation: significant cavities to labelled regions, shells and a hierarchy.

``cavitas.segment`` is both this subpackage and the function :func:`segment`: once the
subpackage is imported, Python binds the name ``cavitas.segment`` to it, so the module is
made callable and ``cavitas.segment(volume, ...)`` always runs the function.

Examples
--------
>>> import numpy as np
>>> import cavitas.segment
>>> img = np.zeros((9, 9)); img[2, 2:7] = img[6, 2:7] = img[2:7, 2] = img[2:7, 6] = 1
>>> int(cavitas.segment(img, min_persistence=0.5).labels.sum())
9
"""

import sys
import types

from ._params import SegmentParams
from ._result import Segmentation
from ._segment import segment

__all__ = ["SegmentParams", "Segmentation", "segment"]


class _CallableModule(types.ModuleType):
    """This subpackage, callable as :func:`segment`."""

    def __call__(self, *args, **kwargs):
        return segment(*args, **kwargs)


sys.modules[__name__].__class__ = _CallableModule
