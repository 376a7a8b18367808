"""The segmentation's own parameters, their defaults, and the checks of contradictions.

What a run writes (shells, enclosures, partition, meshes, the label format) and which files
it reads (the image, the mask) are the workflow's options, not the algorithm's:
:class:`cavitas.workflow.RunOptions` and :class:`cavitas.workflow.ReadOptions`.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, fields
from typing import Any

import numpy as np

from .. import _checks
from .._checks import REGIONS, choice, flag, number, whole
from .._errors import ParameterError
from ._select import SPLIT_FRACTION

__all__ = ["SegmentParams"]

#: Candidate detection scales of the automatic mode, as Gaussian σ in voxels of the finest axis.
AUTO_SCALES = (0.0, 0.5, 1.0, 1.5, 2.0, 3.0)
#: Safety factor on the empirical noise null (see :mod:`cavitas.segment._noise`).
SAFETY = 1.25


@dataclass
class SegmentParams:
    """Parameters of :func:`cavitas.segment.segment` and ``cavitas segment``.

    Selection criteria combine: a feature is kept when it passes every criterion given.
    Types are strict: numbers are numbers (not texts, not booleans), switches are
    booleans, names are texts.

    Parameters
    ----------
    walls : {"bright", "dark"}
        Polarity of the walls.
    connectivity : int or None
        Connectivity of the wall set: 1 (faces) or ndim (full). None means 1.
    auto : bool or None
        Automatic significance (noise estimate, empirical null, data-driven smoothing).
        None (default) means on unless ``min_persistence`` or ``relative_persistence`` is
        given; True with them keeps the strictest of all.
    min_persistence : float or None
        Absolute minimum persistence, in intensity units.
    relative_persistence : float or None
        Minimum persistence as a fraction in (0, 1] of the robust range (0.5th to 99.5th
        percentile) of the image.
    top : int or None
        Keep at most the ``top`` most persistent features.
    min_volume, max_volume : float or None
        Region volume bounds in physical units (area in 2D); need a known spacing.
    smooth : float or None
        Gaussian σ in physical units, at most the image's longest side; 0 disables
        smoothing. None: chosen from the data in automatic mode, none with a hand
        threshold (``min_persistence``, ``relative_persistence``): a threshold read off
        the automatic run's diagram applies at that run's scale only with the same
        ``smooth`` (its ``smooth_sigma``); the run summary says so.
    safety : float
        Factor (> 0) on the empirical noise null (automatic mode).
    split_fraction : float
        In [0, 1]. An inner wall splits an enclosure into two chambers only when it closes
        at least this fraction of the way from the shallower side's core level up to the
        level where the whole enclosure opens; below that (a wall with a wide hole) both
        sides are one region. 0 = every significant inner wall splits. Default 0.15
        (see :mod:`cavitas.segment._select` for the measurements).
    region : {"basin", "breach", "component"}
        Region definition (see :mod:`cavitas.segment._regions`). ``"component"``: the
        breach region exactly as defined, the component below the chamber's level that
        holds its core, with no border-cut check and no wall islands given back (what a
        volume computed chunk by chunk gets, :mod:`cavitas.segment._chunked_segment`).
    level_fraction : float or None
        Breach regions only: cut at this fraction in [0, 1] of the way from the core level to
        the chamber's level (None = 1).
    keep_border : bool
        Label the cells cut by the array's faces too: the faces count as a wall, so cut
        cells are detected and delineated like whole ones; their rows have
        ``touches_border`` set (the workflow leaves them out of the global figures). The
        medium lining the faces is not labelled. Pieces cut by an ROI border stay ``cut``.

    Examples
    --------
    >>> p = SegmentParams(walls="dark", top=5)
    >>> SegmentParams.from_dict(p.to_dict()) == p
    True
    >>> SegmentParams(min_volume=10, max_volume=5)
    Traceback (most recent call last):
    ...
    cavitas._errors.ParameterError: min_volume (10.0) must not exceed max_volume (5.0).
    >>> SegmentParams(auto="yes")
    Traceback (most recent call last):
    ...
    cavitas._errors.ParameterError: auto must be true or false; got 'yes'.
    """

    walls: str = "bright"
    connectivity: int | None = None
    auto: bool | None = None
    min_persistence: float | None = None
    relative_persistence: float | None = None
    top: int | None = None
    min_volume: float | None = None
    max_volume: float | None = None
    smooth: float | None = None
    safety: float = SAFETY
    split_fraction: float = SPLIT_FRACTION
    region: str = "basin"
    level_fraction: float | None = None
    keep_border: bool = False

    def __post_init__(self) -> None:
        self.walls = _checks.walls(self.walls)
        self.region = choice("region", self.region, REGIONS)
        for name in ("min_persistence", "min_volume", "max_volume", "smooth"):
            if getattr(self, name) is not None:
                setattr(self, name, number(name, getattr(self, name), low=0))
        self.safety = number("safety", self.safety, low=0, low_open=True)
        self.split_fraction = number("split_fraction", self.split_fraction, low=0, high=1)
        if self.relative_persistence is not None:
            self.relative_persistence = number("relative_persistence",
                                               self.relative_persistence, low=0, high=1,
                                               low_open=True)
        if self.level_fraction is not None:
            self.level_fraction = number("level_fraction", self.level_fraction, low=0, high=1)
            if self.region != "breach":
                raise ParameterError(
                    "level_fraction applies to breach regions only; got it with "
                    f"region={self.region!r} (use region='breach').",
                    parameters=("level_fraction", "region"))
        if self.top is not None:
            self.top = whole("top", self.top, low=1)
        if (self.min_volume is not None and self.max_volume is not None
                and self.min_volume > self.max_volume):
            raise ParameterError(f"min_volume ({self.min_volume}) must not exceed "
                                 f"max_volume ({self.max_volume}).",
                                 parameters=("min_volume", "max_volume"))
        if self.connectivity is not None:
            self.connectivity = whole("connectivity", self.connectivity, low=1)
            if self.connectivity > 3:
                raise ParameterError(
                    f"connectivity must be 1 (faces) or the number of axes (full); "
                    f"got {self.connectivity}.", parameters=("connectivity",))
        if self.auto is not None:
            self.auto = flag("auto", self.auto)
        self.keep_border = flag("keep_border", self.keep_border)
        if self.auto is False and self.smooth is None:
            self.smooth = 0.0

    def check_image(self, volume: Any) -> None:
        """Check the parameters that depend on the image: its spacing and its size.

        Volume bounds need a known spacing; the smoothing σ may not exceed the image's
        longest side (a larger one flattens the image and only costs time and memory).

        Examples
        --------
        >>> from cavitas.io import Volume
        >>> SegmentParams(smooth=50).check_image(Volume(np.zeros((8, 8)), spacing=(2, 2)))
        Traceback (most recent call last):
        ...
        cavitas._errors.ParameterError: smooth (50 µm) exceeds the image's longest side (16 µm).
        """
        if (self.min_volume is not None or self.max_volume is not None) and (
                volume.unit == "voxel"):
            raise ParameterError(f"min_volume and max_volume are in physical units and need a "
                                 f"known spacing; '{volume.name}' has none (give spacing=).",
                                 parameters=("min_volume", "max_volume", "spacing"))
        longest = float(np.max(np.multiply(volume.shape, volume.spacing)))
        if self.smooth is not None and self.smooth > longest:
            raise ParameterError(f"smooth ({self.smooth:g} {volume.unit}) exceeds the image's "
                                 f"longest side ({longest:g} {volume.unit}).",
                                 parameters=("smooth",))

    @property
    def automatic(self) -> bool:
        """Whether the automatic significance rule applies."""
        if self.auto is not None:
            return bool(self.auto)
        return self.min_persistence is None and self.relative_persistence is None

    def replace(self, **changes: Any) -> SegmentParams:
        """A copy with some fields changed (validated again)."""
        unknown = set(changes) - {f.name for f in fields(self)}
        if unknown:
            raise ParameterError(f"Unknown segmentation parameter(s): {sorted(unknown)}; "
                                 f"known: {[f.name for f in fields(self)]}.")
        return dataclasses.replace(self, **changes)

    def to_dict(self) -> dict[str, Any]:
        """All fields as a JSON-ready dict."""
        return dataclasses.asdict(self)

    @classmethod
    def from_dict(cls, values: dict[str, Any]) -> SegmentParams:
        """Build from a dict (unknown keys are an error naming them)."""
        known = {f.name for f in fields(cls)}
        unknown = set(values) - known
        if unknown:
            raise ParameterError(f"Unknown segmentation parameter(s): {sorted(unknown)}; "
                                 f"known: {sorted(known)}.")
        return cls(**values)
