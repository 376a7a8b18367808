"""Saving and loading a :class:`Diagram` as ``.npz`` (exact, compact) or ``.csv`` (readable).

Both formats keep everything a :class:`Diagram` holds (image shape, wall polarity,
connectivity, ROI flag, the computed dimensions and every pair), so a round trip is exact.
Callers may add per-pair columns (e.g. ``significance``, ``kept``) with ``extra``.

The CSV starts with ``#`` lines (format, shape, walls, connectivity, masked, dimensions and
the research-only caution), then one row per pair::

    dimension,birth,death,persistence,birth_y,birth_x,death_y,death_x

Voxel coordinates are array indices in ``(z, y, x)`` / ``(y, x)`` order; they are blank for
the death of an essential class, whose death is ``-inf`` (bright walls) or ``inf`` (dark).
"""

from __future__ import annotations

import csv
import os
import re
import zipfile
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np

from .._caution import RESEARCH_ONLY
from .._errors import InputFileError, ParameterError
from .._shared.atomic import atomic_path
from ._diagram import PAIR_DTYPE, Diagram

__all__ = ["FORMAT_VERSION", "is_diagram_file", "load_diagram", "save_diagram"]

#: Version of both file layouts; bumped when a layout changes incompatibly.
FORMAT_VERSION = 1
_FORMAT_NAME = "cavitas persistence diagram"
_AXES = "zyx"
_EXTRA_NAME = re.compile(r"^[a-z][a-z0-9_]*$")
_Extra = Mapping[str, Mapping[int, Any]]


def _suffix(path: Path) -> str:
    suffix = path.suffix.lower()
    if suffix not in (".npz", ".csv"):
        raise ParameterError(
            f"A diagram file must end in .npz or .csv; got '{path.name}'."
        )
    return suffix


def _coord_names(ndim: int) -> tuple[list[str], list[str]]:
    axes = _AXES[-ndim:]
    return [f"birth_{a}" for a in axes], [f"death_{a}" for a in axes]


def _check_extra(dgm: Diagram, extra: _Extra | None) -> dict[str, dict[int, np.ndarray]]:
    """Validate ``extra``: lower-case names, known dims, one value per pair, no objects."""
    birth_cols, death_cols = _coord_names(3)
    reserved = {"dimension", "birth", "death", "persistence", *birth_cols, *death_cols}
    checked: dict[str, dict[int, np.ndarray]] = {}
    for name, per_dim in dict(extra or {}).items():
        if not _EXTRA_NAME.match(str(name)) or name in reserved:
            raise ParameterError(
                f"extra column names must be lower-case identifiers other than {sorted(reserved)}; "
                f"got {name!r}."
            )
        checked[name] = {}
        for dim, values in per_dim.items():
            values = np.asarray(values)
            n = len(dgm.pairs(dim))
            if values.shape != (n,) or values.dtype.kind not in "biuf":
                raise ParameterError(
                    f"extra column {name!r} for H{dim} must hold {n} numbers or booleans "
                    f"(one per pair); got dtype {values.dtype} and shape {values.shape}."
                )
            checked[name][int(dim)] = values
    return checked


def save_diagram(dgm: Diagram, path: str | os.PathLike, *, force: bool = False,
                 extra: _Extra | None = None) -> None:
    """Write ``dgm`` to ``path`` (``.npz`` or ``.csv``, chosen by the suffix), atomically.

    Parameters
    ----------
    dgm : Diagram
        The diagram to write.
    path : str or path-like
        Target file; its suffix picks the format.
    force : bool, optional
        Replace an existing file.
    extra : mapping of str to mapping of int to array_like, optional
        Additional per-pair columns: ``{"kept": {1: mask}, "significance": {1: values}}``,
        one number or boolean per pair of that dimension. Dimensions left out get blank
        cells (CSV) or no array (NPZ).

    Raises
    ------
    ParameterError
        If the suffix is not ``.npz``/``.csv`` or ``extra`` does not fit the diagram.
    OutputError
        If ``path`` exists without ``force`` or cannot be written.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> rows = np.array([(5.0, 1.0, 7, 3), (4.0, -np.inf, 2, -1)], dtype=PAIR_DTYPE)
    >>> dgm = Diagram({0: rows}, shape=(4, 4), walls="bright", connectivity=1)
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "diagram.csv"
    >>> save_diagram(dgm, target, extra={"kept": {0: [True, False]}})
    >>> print(target.read_text().splitlines()[-1])
    0,4.0,-inf,inf,0,2,,,false
    """
    path = Path(path)
    suffix = _suffix(path)
    extras = _check_extra(dgm, extra)
    with atomic_path(path, force=force) as tmp:
        if suffix == ".npz":
            _write_npz(dgm, tmp, extras)
        else:
            _write_csv(dgm, tmp, extras)


def _write_npz(dgm: Diagram, tmp: Path, extras: dict[str, dict[int, np.ndarray]]) -> None:
    arrays: dict[str, np.ndarray] = {
        "format": np.array(_FORMAT_NAME),
        "format_version": np.array(FORMAT_VERSION),
        "shape": np.array(dgm.shape, dtype=np.int64),
        "walls": np.array(dgm.walls),
        "connectivity": np.array(dgm.connectivity),
        "masked": np.array(dgm.masked),
        "dims": np.array(dgm.dims, dtype=np.int64),
        "caution": np.array(RESEARCH_ONLY),
    }
    for dim in dgm.dims:
        arrays[f"h{dim}"] = np.ascontiguousarray(dgm.pairs(dim))
    for name, per_dim in extras.items():
        for dim, values in per_dim.items():
            arrays[f"extra__{name}__h{dim}"] = values
    with open(tmp, "wb") as fh:
        # numpy's stub lets **arrays fill its allow_pickle flag (numpy >= 2.1); no key of
        # ours is named so, and older numpy would store the flag as an array
        np.savez_compressed(fh, **arrays)  # type: ignore[arg-type]


def _text(values: np.ndarray) -> list[str]:
    """One CSV cell per value: ``repr`` of floats (exact), ``true``/``false``, blank for NaN."""
    if values.dtype == bool:
        return ["true" if v else "false" for v in values.tolist()]
    if values.dtype.kind == "f":
        return ["" if v != v else repr(v) for v in values.tolist()]
    return [str(v) for v in values.tolist()]


def _coords(voxels: np.ndarray, shape: tuple[int, ...]) -> list[list[str]]:
    """Per axis, the cells of each flat voxel index; blank where the index is ``-1``."""
    coords = np.unravel_index(np.maximum(voxels, 0), shape)
    return [np.where(voxels < 0, "", c.astype(str)).tolist() for c in coords]


def _write_csv(dgm: Diagram, tmp: Path, extras: dict[str, dict[int, np.ndarray]]) -> None:
    birth_cols, death_cols = _coord_names(dgm.ndim)
    header = ["dimension", "birth", "death", "persistence", *birth_cols, *death_cols, *extras]
    with open(tmp, "w", newline="", encoding="utf-8") as fh:
        fh.write(f"# {_FORMAT_NAME} (format {FORMAT_VERSION})\n")
        fh.write(f"# shape: {' x '.join(str(s) for s in dgm.shape)}\n")
        fh.write(f"# walls: {dgm.walls}\n")
        fh.write(f"# connectivity: {dgm.connectivity}\n")
        fh.write(f"# masked: {'true' if dgm.masked else 'false'}\n")
        fh.write(f"# dimensions: {' '.join(str(d) for d in dgm.dims)}\n")
        fh.write(f"# {RESEARCH_ONLY}\n")
        writer = csv.writer(fh)
        writer.writerow(header)
        for dim in dgm.dims:
            rows = dgm.pairs(dim)
            columns = [[str(dim)] * len(rows), _text(rows["birth"]), _text(rows["death"]),
                       _text(dgm.persistence(dim)), *_coords(rows["birth_voxel"], dgm.shape),
                       *_coords(rows["death_voxel"], dgm.shape)]
            for per_dim in extras.values():
                columns.append(_text(per_dim[dim]) if dim in per_dim else [""] * len(rows))
            writer.writerows(zip(*columns, strict=True))


def is_diagram_file(path: str | os.PathLike) -> bool:
    """Whether ``path`` looks like a file :func:`save_diagram` wrote (a quick look at its
    first line or its list of arrays; :func:`load_diagram` checks the rest).

    A ``.csv`` file is one when it starts with the format line; an ``.npz`` file when it
    holds a ``format`` array (other ``.npz`` files are images).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> np.savez(folder / "image.npz", data=np.zeros((4, 4)))
    >>> is_diagram_file(folder / "image.npz"), is_diagram_file(folder / "missing.csv")
    (False, False)
    """
    path = Path(path)
    try:
        if path.suffix.lower() == ".csv":
            with open(path, encoding="utf-8", errors="replace") as fh:
                return fh.readline().startswith(f"# {_FORMAT_NAME} (format ")
        if path.suffix.lower() == ".npz":
            with zipfile.ZipFile(path) as archive:
                return "format.npy" in archive.namelist()
    except (OSError, zipfile.BadZipFile):
        return False
    return False


def load_diagram(path: str | os.PathLike, *, extra: bool = False) -> Any:
    """Read a diagram written by :func:`save_diagram` (``.npz`` or ``.csv``).

    Parameters
    ----------
    path : str or path-like
        The file; its suffix picks the format.
    extra : bool, optional
        Also return the additional per-pair columns, as ``{name: {dim: array}}``.

    Returns
    -------
    Diagram, or (Diagram, dict) when ``extra`` is true

    Raises
    ------
    InputFileError
        If the file is missing, is not a diagram written by cavitas, or is damaged.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> rows = np.array([(5.0, 1.0, 7, 3)], dtype=PAIR_DTYPE)
    >>> dgm = Diagram({1: rows}, shape=(4, 4), walls="bright", connectivity=1)
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "diagram.npz"
    >>> save_diagram(dgm, target)
    >>> load_diagram(target).pairs(1)["birth_voxel"]
    array([7])
    """
    path = Path(path)
    suffix = _suffix(path)
    if not path.is_file():
        raise InputFileError(f"Diagram file '{path}' does not exist or is not a file.")
    reader = _read_npz if suffix == ".npz" else _read_csv
    try:
        fields, pairs, extras = reader(path)
        dgm = _build(fields, pairs, path)
    except InputFileError:
        raise
    except (OSError, ValueError, KeyError, IndexError, TypeError, EOFError,
            zipfile.BadZipFile, UnicodeDecodeError) as exc:
        raise InputFileError(
            f"'{path}' is not a readable cavitas diagram file ({type(exc).__name__}: {exc})."
        ) from exc
    if not extra:
        return dgm
    for name, per_dim in extras.items():
        for dim, values in per_dim.items():
            if dim not in dgm.dims or len(values) != len(dgm.pairs(dim)):
                raise InputFileError(
                    f"'{path}': extra column {name!r} does not match the H{dim} pairs."
                )
    return dgm, extras


def _read_npz(path: Path) -> tuple[dict[str, Any], dict[int, np.ndarray], dict]:
    with open(path, "rb") as fh:
        if fh.read(4) not in (b"PK\x03\x04", b"PK\x05\x06"):
            raise InputFileError(f"'{path}' is not an .npz (zip) archive.")
        fh.seek(0)
        with np.load(fh, allow_pickle=False) as data:
            return _npz_fields(path, data)


def _npz_fields(path: Path, data: Any) -> tuple[dict[str, Any], dict[int, np.ndarray], dict]:
    if "format" not in data.files or str(data["format"]) != _FORMAT_NAME:
        raise InputFileError(f"'{path}' is an .npz file but not a cavitas diagram.")
    fields = {
        "version": int(data["format_version"]),
        "shape": tuple(int(s) for s in data["shape"]),
        "walls": str(data["walls"]),
        "connectivity": int(data["connectivity"]),
        "masked": bool(data["masked"]),
    }
    pairs = {int(d): data[f"h{int(d)}"] for d in data["dims"]}
    extras: dict[str, dict[int, np.ndarray]] = {}
    for key in data.files:
        if key.startswith("extra__"):
            _, name, dim = key.split("__")
            extras.setdefault(name, {})[int(dim[1:])] = data[key]
    return fields, pairs, extras


def _read_csv(path: Path) -> tuple[dict[str, Any], dict[int, np.ndarray], dict]:
    with open(path, newline="", encoding="utf-8") as fh:
        lines = fh.read().splitlines()
    head = [ln[2:] for ln in lines if ln.startswith("# ")]
    match = re.fullmatch(rf"{_FORMAT_NAME} \(format (\d+)\)", head[0]) if head else None
    if match is None:
        raise InputFileError(
            f"'{path}' does not start with the line '# {_FORMAT_NAME} (format N)'."
        )
    meta = dict(ln.split(": ", 1) for ln in head[1:] if ": " in ln)
    ndim = len(meta["shape"].split(" x "))
    fields: dict[str, Any] = {
        "version": int(match.group(1)),
        "shape": tuple(int(s) for s in meta["shape"].split(" x ")),
        "walls": meta["walls"],
        "connectivity": int(meta["connectivity"]),
        "masked": {"true": True, "false": False}[meta["masked"]],
    }
    dims = [int(d) for d in meta["dimensions"].split()]
    table = list(csv.reader(ln for ln in lines if not ln.startswith("#")))
    birth_cols, death_cols = _coord_names(ndim)
    fixed = ["dimension", "birth", "death", "persistence", *birth_cols, *death_cols]
    if table[0][: len(fixed)] != fixed:
        raise InputFileError(f"'{path}': the header should start with {','.join(fixed)}.")
    extra_names = table[0][len(fixed):]
    body = table[1:]
    if any(len(r) != len(table[0]) for r in body):
        raise InputFileError(f"'{path}': some rows do not have {len(table[0])} cells.")
    columns = np.array(body, dtype=str).reshape(len(body), len(table[0])).T
    row_dims = columns[0].astype(np.int64)
    if not np.isin(row_dims, dims).all():
        raise InputFileError(f"'{path}': a row has a dimension not listed in '# dimensions'.")
    pairs: dict[int, np.ndarray] = {}
    extras: dict[str, dict[int, np.ndarray]] = {name: {} for name in extra_names}
    for dim in dims:
        cells = columns[:, row_dims == dim]
        out = np.zeros(cells.shape[1], dtype=PAIR_DTYPE)
        out["birth"] = cells[1].astype(np.float64)
        out["death"] = cells[2].astype(np.float64)
        for field, start in (("birth_voxel", 4), ("death_voxel", 4 + ndim)):
            out[field] = _flat(cells[start:start + ndim], fields["shape"])
        pairs[dim] = out
        for k, name in enumerate(extra_names):
            values = cells[len(fixed) + k]
            if len(values) and np.all(values != ""):
                extras[name][dim] = _parse_cells(values)
    return fields, pairs, {k: v for k, v in extras.items() if v}


def _flat(cells: np.ndarray, shape: tuple[int, ...]) -> np.ndarray:
    """Flat indices from per-axis coordinate cells; ``-1`` where all cells are blank."""
    blank = np.all(cells == "", axis=0)
    if np.any(np.any(cells == "", axis=0) & ~blank):
        raise ValueError("a voxel has some coordinates blank and others not")
    coords = np.where(cells == "", "0", cells).astype(np.int64)
    return np.where(blank, -1, np.ravel_multi_index(tuple(coords), shape))


def _parse_cells(cells: np.ndarray) -> np.ndarray:
    if np.all((cells == "true") | (cells == "false")):
        return cells == "true"
    try:
        return cells.astype(np.int64)
    except ValueError:
        return cells.astype(np.float64)


def _build(fields: dict[str, Any], pairs: dict[int, np.ndarray], path: Path) -> Diagram:
    """Check what was read and make the :class:`Diagram`."""
    if fields["version"] > FORMAT_VERSION:
        raise InputFileError(
            f"'{path}' has diagram format {fields['version']}; this cavitas reads up to "
            f"{FORMAT_VERSION}. Update cavitas."
        )
    shape = fields["shape"]
    if len(shape) not in (2, 3) or min(shape) < 1:
        raise InputFileError(f"'{path}': image shape {shape} is not a 2D or 3D shape.")
    size = int(np.prod(shape))
    for dim, rows in pairs.items():
        if not 0 <= dim < len(shape):
            raise InputFileError(f"'{path}': H{dim} cannot occur in a {len(shape)}D image.")
        if rows.dtype != PAIR_DTYPE or rows.ndim != 1:
            raise InputFileError(f"'{path}': the H{dim} pairs have an unexpected layout.")
        voxels = np.concatenate([rows["birth_voxel"], rows["death_voxel"]])
        if len(rows) and (voxels.min() < -1 or voxels.max() >= size):
            raise InputFileError(f"'{path}': an H{dim} voxel index lies outside the image.")
        if not np.all(np.isfinite(rows["birth"])) or np.any(np.isnan(rows["death"])):
            raise InputFileError(f"'{path}': an H{dim} birth is not finite or a death is NaN.")
    try:
        return Diagram(pairs, shape=shape, walls=fields["walls"],
                       connectivity=fields["connectivity"], masked=fields["masked"])
    except ParameterError as exc:
        raise InputFileError(f"'{path}': {exc}") from exc
