"""Everything one run takes, and the TOML parameter file (``--params``) that holds it.

:class:`Settings` bundles the three groups: :class:`~cavitas.segment.SegmentParams` (what
decides the regions), :class:`~cavitas._run_options.RunOptions` (the mask file and the
extra outputs) and :class:`~cavitas._run_options.ReadOptions` (how the input is read).
Their names never collide, so a flat ``name = value`` list (the command line, a parameter
file) is routed to the group each name belongs to.

A parameter file holds the names at its top level, or grouped in tables: ``[segment]``
(any name, as earlier files wrote them), ``[reading]`` (the reading options and ``mask``)
and ``[outputs]`` (``shells``, ``enclosures``, ``partition``, ``mesh``,
``label_format``). Types are strict (TOML 1.0: booleans are ``true``/``false``, texts are
quoted, numbers are not); a relative ``mask`` is taken from the file's own folder. Every
problem with the file is one sentence naming the file and the key.
"""

from __future__ import annotations

import dataclasses
import os
import sys
from collections.abc import Mapping
from dataclasses import dataclass, field, fields
from pathlib import Path
from typing import Any

from ._errors import InputFileError, ParameterError
from ._run_options import ReadOptions, RunOptions
from .segment._params import SegmentParams

__all__ = ["Settings"]

#: A parameter file is a few lines; anything larger is not one.
MAX_FILE_BYTES = 1 << 20

#: The groups of :class:`Settings`: attribute -> its class.
_GROUPS: dict[str, type] = {"params": SegmentParams, "options": RunOptions,
                            "reading": ReadOptions}


def _names(cls: type) -> set[str]:
    return {f.name for f in fields(cls)}


#: Table of a parameter file -> the names it may hold (None: any).
_TABLES: dict[str, set[str] | None] = {
    "segment": None,
    "reading": _names(ReadOptions) | {"mask"},
    "outputs": _names(RunOptions) - {"mask"},
}


@dataclass
class Settings:
    """The parameters, run options and reading options of one run.

    Examples
    --------
    >>> s = Settings().replace(walls="dark", shells=0.5, spacing=(1, 0.5, 0.5))
    >>> s.params.walls, s.options.shells, s.reading.spacing
    ('dark', 0.5, (1.0, 0.5, 0.5))
    """

    params: SegmentParams = field(default_factory=SegmentParams)
    options: RunOptions = field(default_factory=RunOptions)
    reading: ReadOptions = field(default_factory=ReadOptions)

    @staticmethod
    def names() -> set[str]:
        """Every name a run takes, of all three groups."""
        return set().union(*(_names(cls) for cls in _GROUPS.values()))

    def replace(self, **values: Any) -> Settings:
        """A copy with the named values changed, each in its own group (checked again)."""
        unknown = set(values) - self.names()
        if unknown:
            raise ParameterError(f"Unknown parameter(s): {sorted(unknown)}; known: "
                                 f"{sorted(self.names())}.")
        changed = {}
        for attribute, cls in _GROUPS.items():
            given = {k: v for k, v in values.items() if k in _names(cls)}
            group = getattr(self, attribute)
            changed[attribute] = dataclasses.replace(group, **given) if given else group
        return Settings(**changed)

    @classmethod
    def from_toml(cls, path: str | os.PathLike) -> Settings:
        """Read a parameter file (see the module notes).

        Examples
        --------
        >>> import tempfile, pathlib
        >>> f = pathlib.Path(tempfile.mkdtemp()) / "p.toml"
        >>> _ = f.write_text('walls = "dark"\\n[outputs]\\nshells = 0.5\\n'
        ...                  '[reading]\\nspacing = [2, 0.5, 0.5]\\n')
        >>> s = Settings.from_toml(f)
        >>> s.params.walls, s.options.shells, s.reading.spacing
        ('dark', 0.5, (2.0, 0.5, 0.5))
        """
        data = _load(Path(path))
        try:
            values = _flatten(data)
            if isinstance(values.get("mask"), str) and values["mask"]:
                values["mask"] = str(Path(path).parent / values["mask"])
            return cls().replace(**values)
        except ParameterError as exc:  # keys as the file writes them, not as options
            raise ParameterError(f"In parameter file '{path}': {exc}") from None


def _load(path: Path) -> dict[str, Any]:
    """The parsed file, or one sentence on why it is not a TOML parameter file."""
    if sys.version_info >= (3, 11):
        import tomllib
    else:  # pragma: no cover
        import tomli as tomllib
    try:
        if path.stat().st_size > MAX_FILE_BYTES:
            raise InputFileError(f"Parameter file '{path}' has {path.stat().st_size} bytes; a "
                                 f"parameter file is a few lines (at most {MAX_FILE_BYTES}).")
        with open(path, "rb") as fh:
            return tomllib.load(fh)
    except OSError as exc:
        raise InputFileError(f"Cannot read parameter file '{path}': "
                             f"{exc.strerror or exc}.") from exc
    except UnicodeDecodeError:
        raise InputFileError(f"Parameter file '{path}' is not a text file (TOML is UTF-8 "
                             "text).") from None
    except tomllib.TOMLDecodeError as exc:
        raise InputFileError(f"Parameter file '{path}' is not valid TOML: {exc}.") from None
    except RecursionError:
        raise InputFileError(f"Parameter file '{path}' nests brackets too deeply to be a "
                             "parameter file.") from None


def _flatten(data: Mapping[str, Any]) -> dict[str, Any]:
    """Top-level names and the names of the tables, each given once."""
    values: dict[str, Any] = {}
    for key, value in data.items():
        if key not in _TABLES:
            values[key] = value
            continue
        if not isinstance(value, dict):
            raise ParameterError(f"{key} must be a table of parameters ([{key}]); got "
                                 f"{value!r}.")
        allowed = _TABLES[key]
        for name, item in value.items():
            if allowed is not None and name not in allowed:
                raise ParameterError(f"[{key}] holds {name!r}, which does not belong there; "
                                     f"it holds {sorted(allowed)}.")
            if name in values or name in data:
                raise ParameterError(f"{name} is given twice (at the top level or in "
                                     "another table).")
            values[name] = item
    return values
