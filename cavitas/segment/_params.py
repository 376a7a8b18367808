"""Every segmentation parameter, its default, and the checks of contradictions."""

from __future__ import annotations

import dataclasses
import math
import os
import sys
from dataclasses import dataclass, field, fields
from typing import Any

from .._errors import InputFileError, ParameterError
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
        Gaussian σ in physical units; 0 disables smoothing. None: chosen from the data in
        automatic mode, none with a hand threshold (``min_persistence``,
        ``relative_persistence``): a threshold read off the automatic run's diagram applies
        at that run's scale only with the same ``smooth`` (its ``smooth_sigma``); the run
        summary says so.
    safety : float
        Factor on the empirical noise null (automatic mode).
    split_fraction : float
        In [0, 1]. An inner wall splits an enclosure into two chambers only when it closes
        at least this fraction of the way from the shallower side's core level up to the
        level where the whole enclosure opens; below that (a wall with a wide hole) both
        sides are one region. 0 = every significant inner wall splits. Default 0.15
        (see :mod:`cavitas.segment._select` for the measurements).
    region : {"basin", "breach"}
        Region definition (see :mod:`cavitas.segment._regions`).
    level_fraction : float or None
        Breach regions only: cut at this fraction in [0, 1] of the way from the core level to
        the chamber's level (None = 1).
    keep_border : bool
        Label the cells cut by the array's faces too: the faces count as a wall, so cut
        cells are detected and delineated like whole ones; their rows have
        ``touches_border`` set (the workflow leaves them out of the global figures). The
        medium lining the faces is not labelled. Pieces cut by an ROI border stay ``cut``.
    shells : float or None
        Write shells, thickened by this physical distance (0 = touching wall voxels only).
    enclosures : bool
        Write the enclosures as a second label map.
    partition : bool
        Write the partition (:attr:`Segmentation.partition`: every voxel of the specimen
        given to a region, walls split at their ridge line) and each region's volume
        with its part of the walls.
    mesh : {"ply", "stl"} or None
        Write a surface mesh per region (3D only).
    label_format : str or None
        File suffix of the label map (e.g. ".tif", ".nii.gz"); None = the input's.
    mask : str or None
        ROI mask file (nonzero = inside), same shape as the input.

    Examples
    --------
    >>> p = SegmentParams(walls="dark", top=5)
    >>> SegmentParams.from_dict(p.to_dict()) == p
    True
    >>> SegmentParams(min_volume=10, max_volume=5)
    Traceback (most recent call last):
    ...
    cavitas._errors.ParameterError: min_volume (10.0) must not exceed max_volume (5.0).
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
    shells: float | None = None
    enclosures: bool = False
    partition: bool = False
    mesh: str | None = None
    label_format: str | None = None
    mask: str | None = field(default=None)

    def __post_init__(self) -> None:
        if self.walls not in ("bright", "dark"):
            raise ParameterError(f"walls must be 'bright' or 'dark'; got {self.walls!r}.",
                                 parameters=("walls",))
        if self.region not in ("basin", "breach"):
            raise ParameterError(f"region must be 'basin' or 'breach'; got {self.region!r}.",
                                 parameters=("region",))
        if self.mesh is not None and self.mesh not in ("ply", "stl"):
            raise ParameterError(f"mesh must be 'ply' or 'stl'; got {self.mesh!r}.",
                                 parameters=("mesh",))
        for name in ("min_persistence", "min_volume", "max_volume", "smooth", "shells"):
            value = getattr(self, name)
            if value is not None:
                value = _number(name, value)
                if value < 0:
                    raise ParameterError(f"{name} must be >= 0; got {value}.",
                                         parameters=(name,))
                setattr(self, name, value)
        self.safety = _number("safety", self.safety)
        if self.safety <= 0:
            raise ParameterError(f"safety must be > 0; got {self.safety}.",
                                 parameters=("safety",))
        self.split_fraction = _number("split_fraction", self.split_fraction)
        if not 0 <= self.split_fraction <= 1:
            raise ParameterError(
                f"split_fraction must be in [0, 1]; got {self.split_fraction}.",
                parameters=("split_fraction",))
        if self.relative_persistence is not None:
            self.relative_persistence = _number("relative_persistence",
                                                self.relative_persistence)
            if not 0 < self.relative_persistence <= 1:
                raise ParameterError("relative_persistence must be in (0, 1]; got "
                                     f"{self.relative_persistence}.",
                                     parameters=("relative_persistence",))
        if self.level_fraction is not None:
            self.level_fraction = _number("level_fraction", self.level_fraction)
            if not 0 <= self.level_fraction <= 1:
                raise ParameterError(
                    f"level_fraction must be in [0, 1]; got {self.level_fraction}.",
                    parameters=("level_fraction",))
            if self.region != "breach":
                raise ParameterError(
                    "level_fraction applies to breach regions only; got it with "
                    f"region={self.region!r} (use region='breach').",
                    parameters=("level_fraction", "region"))
        if self.top is not None:
            if isinstance(self.top, bool) or int(self.top) != self.top or self.top < 1:
                raise ParameterError(f"top must be an integer >= 1; got {self.top!r}.",
                                     parameters=("top",))
            self.top = int(self.top)
        if (self.min_volume is not None and self.max_volume is not None
                and self.min_volume > self.max_volume):
            raise ParameterError(f"min_volume ({self.min_volume}) must not exceed "
                                 f"max_volume ({self.max_volume}).",
                                 parameters=("min_volume", "max_volume"))
        if self.connectivity is not None and (
                isinstance(self.connectivity, bool) or self.connectivity not in (1, 2, 3)):
            raise ParameterError(
                f"connectivity must be 1 (faces) or the number of axes (full); "
                f"got {self.connectivity!r}.", parameters=("connectivity",))
        if self.auto is False and self.smooth is None:
            self.smooth = 0.0

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

    @classmethod
    def from_toml(cls, path: str | os.PathLike) -> SegmentParams:
        """Read parameters from a TOML file (top level or a ``[segment]`` table).

        Examples
        --------
        >>> import tempfile, pathlib
        >>> f = pathlib.Path(tempfile.mkdtemp()) / "p.toml"
        >>> _ = f.write_text('[segment]\\nwalls = "dark"\\ntop = 3\\n')
        >>> SegmentParams.from_toml(f).top
        3
        """
        if sys.version_info >= (3, 11):
            import tomllib
        else:  # pragma: no cover
            import tomli as tomllib
        try:
            with open(path, "rb") as fh:
                data = tomllib.load(fh)
        except OSError as exc:
            raise InputFileError(f"Cannot read parameter file '{path}': "
                                 f"{exc.strerror or exc}.") from exc
        except tomllib.TOMLDecodeError as exc:
            raise InputFileError(f"Parameter file '{path}' is not valid TOML: {exc}.") from exc
        data = data.get("segment", data)
        try:
            return cls.from_dict(data)
        except ParameterError as exc:
            raise ParameterError(f"In parameter file '{path}': {exc}") from None


def _number(name: str, value: Any) -> float:
    if isinstance(value, bool):
        raise ParameterError(f"{name} must be a number; got {value!r}.", parameters=(name,))
    try:
        value = float(value)
    except (TypeError, ValueError):
        raise ParameterError(f"{name} must be a number; got {value!r}.",
                             parameters=(name,)) from None
    if not math.isfinite(value):
        raise ParameterError(f"{name} must be finite; got {value}.", parameters=(name,))
    return value
