"""Diagrams to compare, from volumes (computed here) or diagram files (read as saved).

What ``cavitas distance`` and the batch's reference column start from. A file that
:func:`~cavitas.cubical.save_diagram` wrote (``cavitas diagram``'s ``diagram.npz`` or
``diagram.csv``) is read as it is; any other file is read as an image with the reading
options, optionally smoothed, and its diagram computed with the same walls and
connectivity as every other input. Diagrams of different polarity, connectivity or
dimension are never compared: the inputs are refused with one sentence instead.
"""

from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from . import _checks
from ._errors import InputFileError, ParameterError
from .cubical import Diagram, is_diagram_file, load_diagram, persistence

__all__ = ["DiagramRecipe", "DiagramSource", "diagram_sources"]


@dataclass(frozen=True)
class DiagramRecipe:
    """How an image becomes a diagram (saved diagrams are used as they are).

    Attributes
    ----------
    walls : {"bright", "dark"} or None
        Polarity; ``None``: that of the saved diagrams among the inputs, else bright.
    connectivity : int or None
        Wall connectivity; ``None``: that of the saved diagrams, else 1 (faces).
    smooth : float
        Gaussian σ in physical units applied to each image first (0: none).
    mask : str or None
        Region of interest for every image (same shape as each).
    read_options : mapping
        Options of :func:`cavitas.io.read` (``channel``, ``spacing``, raw layout ...).
    dims : tuple of int or None
        Homology dimensions to compute for each image (those below its dimension);
        ``None``: components and cavities (H1 of a volume only when asked for: it costs
        more).
    """

    walls: str | None = None
    connectivity: int | None = None
    smooth: float = 0.0
    mask: str | None = None
    read_options: Mapping[str, Any] = field(default_factory=dict)
    dims: tuple[int, ...] | None = None


@dataclass(frozen=True)
class DiagramSource:
    """One input and its diagram.

    Attributes
    ----------
    path : str
        The file as given.
    kind : {"image", "diagram"}
        Whether the diagram was computed from an image or read from a diagram file.
    diagram : Diagram
        Its persistence diagram.
    """

    path: str
    kind: str
    diagram: Diagram


def _settled(name: str, given: Any, saved: dict[str, Any], default: Any) -> Any:
    """The one value of ``name`` every input shares: the one given, else the saved
    diagrams' (which must agree), else ``default``."""
    for path, value in saved.items():
        if given is not None and value != given:
            raise InputFileError(
                f"Diagram file '{path}' was computed with {name}={value!r}, the other inputs "
                f"with {name}={given!r} (given, or from another diagram file); diagrams of "
                f"different {name} are not compared.", parameters=(name,))
        given = value
    return default if given is None else given


def _smoothed(data: np.ndarray, spacing: Sequence[float], sigma: float) -> np.ndarray:
    from .segment._noise import smooth

    return smooth(data, tuple(sigma / s for s in spacing), dtype=np.float64)


def _image_diagram(path: str, recipe: DiagramRecipe, walls: str,
                   connectivity: int) -> Diagram:
    from .io import read
    from .workflow import _read_mask

    volume = read(path, **dict(recipe.read_options))
    mask = _read_mask(recipe.mask, volume, Path(path))
    image: Any = volume
    if recipe.smooth > 0:
        image = _smoothed(np.asarray(volume.data), volume.spacing, recipe.smooth)
    dims = None
    if recipe.dims is not None:
        dims = tuple(d for d in recipe.dims if d < volume.ndim) or None
    return persistence(image, walls=walls, connectivity=connectivity, mask=mask, dims=dims)


def diagram_sources(paths: Sequence[str | os.PathLike],
                    recipe: DiagramRecipe | None = None) -> list[DiagramSource]:
    """The diagram of each input, all of one polarity, connectivity and dimension.

    Parameters
    ----------
    paths : sequence of path-like
        Images (any format :func:`cavitas.io.read` reads) and diagram files.
    recipe : DiagramRecipe, optional
        How images become diagrams.

    Returns
    -------
    list of DiagramSource
        In the order of ``paths``.

    Raises
    ------
    InputFileError
        If an input cannot be read, or a saved diagram's polarity or connectivity differs
        from the one asked for or from another's, or 2D and 3D inputs are mixed.
    ParameterError
        If ``smooth`` is asked for and an input is a saved diagram (it cannot be smoothed).

    Examples
    --------
    >>> import tempfile, pathlib, cavitas
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> ring = np.zeros((7, 7), np.uint8); ring[1:6, 1:6] = 9; ring[3, 3] = 2
    >>> _ = cavitas.write(folder / "ring.tif", ring)
    >>> cavitas.persistence(ring).save(folder / "ring.npz")
    >>> [(s.kind, len(s.diagram.pairs(1))) for s in diagram_sources(
    ...     [folder / "ring.tif", folder / "ring.npz"])]
    [('image', 1), ('diagram', 1)]
    """
    recipe = recipe or DiagramRecipe()
    smooth = _checks.number("smooth", recipe.smooth, low=0.0)
    saved = {str(p): load_diagram(p) for p in paths if is_diagram_file(p)}
    for path in paths:
        if Path(path).suffix.lower() == ".csv" and str(path) not in saved:
            if not Path(path).is_file():
                load_diagram(path)  # says that it does not exist
            raise InputFileError(
                f"'{path}' is not a diagram file that `cavitas diagram` writes (its first "
                "line would be '# cavitas persistence diagram (format N)'); the diagram.csv "
                "of `cavitas segment` lists the cavities only and is not compared.")
    if smooth and saved:
        raise ParameterError(
            f"smooth= applies to images; '{next(iter(saved))}' is a saved diagram, which "
            "cannot be smoothed (compute it from its image with the same smoothing).",
            parameters=("smooth",))
    walls = _settled("walls", recipe.walls, {p: d.walls for p, d in saved.items()}, "bright")
    _checks.walls(walls)
    connectivity = _settled("connectivity", recipe.connectivity,
                            {p: d.connectivity for p, d in saved.items()}, 1)
    sources = []
    for path in paths:
        text = str(path)
        if text in saved:
            sources.append(DiagramSource(text, "diagram", saved[text]))
        else:
            sources.append(DiagramSource(text, "image",
                                         _image_diagram(text, recipe, walls, connectivity)))
    ndims = {s.diagram.ndim for s in sources}
    if len(ndims) > 1:
        first = next(s for s in sources if s.diagram.ndim != sources[0].diagram.ndim)
        raise InputFileError(
            f"'{first.path}' is {first.diagram.ndim}D but '{sources[0].path}' is "
            f"{sources[0].diagram.ndim}D; their diagrams are not compared (a cavity is H1 "
            "in 2D and H2 in 3D).")
    return sources
