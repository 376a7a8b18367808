"""Completion records: a ``done.json`` per input, written last, that makes a re-run skip it.

An input's output folder is built under a hidden staging name and renamed into place only
after its ``done.json`` is written, so a folder under its final name is always complete.
Staging folders left by an interrupted run are removed when the next run starts.
"""

from __future__ import annotations

import contextlib
import json
import os
import shutil
import uuid
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from .._caution import RESEARCH_ONLY
from .._errors import OutputError
from .._json import dumps
from .._shared.atomic import atomic_path
from .._shared.checksum import file_checksum
from ..io._checksum import input_checksum

__all__ = [
    "DONE_NAME",
    "input_checksum",
    "json_ready",
    "new_staging",
    "publish",
    "read_record",
    "remove_stale",
    "reusable",
    "write_record",
]

#: File name of the completion record inside each input's output folder.
DONE_NAME = "done.json"
_STAGING = ".partial-"
_RETIRED = ".old-"


def json_ready(value: Any) -> Any:
    """``value`` as it reads back from JSON (tuples become lists), for exact comparison.

    Examples
    --------
    >>> json_ready({"spacing": (1, 2.5), "walls": "bright"})
    {'spacing': [1, 2.5], 'walls': 'bright'}
    """
    return json.loads(dumps(value, sort_keys=True, default=str))


def write_record(folder: Path, *, input_path: str, checksum: str, params: Mapping[str, Any],
                 version: str, summary: Mapping[str, Any], seconds: float) -> Path:
    """Write ``folder/done.json`` listing every file already in ``folder`` with its size and
    SHA-256 (a later run reuses the folder only if every file still matches both)."""
    outputs = {
        p.relative_to(folder).as_posix(): {"bytes": p.stat().st_size,
                                           "sha256": file_checksum(p)}
        for p in sorted(folder.rglob("*")) if p.is_file() and p.name != DONE_NAME
    }
    record = {
        "input": str(input_path),
        "input_sha256": checksum,
        "params": json_ready(dict(params)),
        "version": version,
        "summary": json_ready(dict(summary)),
        "seconds": round(float(seconds), 3),
        "outputs": outputs,
        "caution": RESEARCH_ONLY,
    }
    target = folder / DONE_NAME
    with atomic_path(target, force=True) as tmp:
        tmp.write_text(dumps(record, indent=1, ensure_ascii=False), encoding="utf-8")
    return target


def read_record(folder: Path) -> dict[str, Any] | None:
    """The completion record of ``folder``, or ``None`` if it is missing or unreadable."""
    try:
        record = json.loads((folder / DONE_NAME).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return record if isinstance(record, dict) else None


def reusable(folder: Path, *, checksum: str, params: Mapping[str, Any],
             version: str) -> tuple[bool, str]:
    """Whether ``folder`` holds a complete run with these parameters, input and version.

    Returns ``(True, "")`` or ``(False, reason)``; the reason is one sentence.
    """
    record = read_record(folder)
    if record is None:
        return False, f"has no readable {DONE_NAME} (no finished batch run wrote it)"
    if record.get("input_sha256") != checksum:
        return False, "the input file changed since it was processed"
    if record.get("params") != json_ready(dict(params)):
        return False, "it was processed with other parameters"
    if record.get("version") != version:
        return False, f"it was processed by cavitas {record.get('version')}, not {version}"
    for name, entry in dict(record.get("outputs", {})).items():
        file = folder / name
        if not isinstance(entry, dict) or "sha256" not in entry:
            return False, f"{DONE_NAME} holds no checksum of '{file}' (an older record)"
        if (file.is_symlink() or not file.is_file() or file.stat().st_size != entry.get("bytes")
                or file_checksum(file) != entry["sha256"]):
            return False, f"its output '{file}' is missing or changed"
    return True, ""


def new_staging(root: Path, name: str) -> Path:
    """Create and return an empty hidden staging folder for output ``name`` under ``root``."""
    staging = root / f".{name}{_STAGING}{uuid.uuid4().hex[:12]}"
    try:
        staging.mkdir(parents=True)
    except OSError as exc:
        raise OutputError(f"Cannot create the folder '{staging}': {exc.strerror or exc}.") \
            from exc
    return staging


def publish(staging: Path, final: Path) -> None:
    """Rename a finished staging folder to ``final``, retiring an older ``final`` first."""
    retired = None
    try:
        if final.exists():
            retired = final.with_name(f".{final.name}{_RETIRED}{uuid.uuid4().hex[:12]}")
            os.replace(final, retired)
        os.replace(staging, final)
    except OSError as exc:
        raise OutputError(f"Cannot move the finished outputs to '{final}': "
                          f"{exc.strerror or exc}.") from exc
    if retired is not None:
        shutil.rmtree(retired, ignore_errors=True)


def remove_stale(root: Path, name: str = "") -> list[Path]:
    """Remove staging and retired folders that an interrupted run left in ``root``.

    With ``name``, only those of that output (another worker's may be in use).
    """
    removed = []
    if root.is_dir():
        for entry in root.iterdir():
            for marker in (_STAGING, _RETIRED):
                base, found, _ = entry.name[1:].partition(marker)
                if entry.name.startswith(".") and found and (not name or base == name):
                    with contextlib.suppress(OSError):
                        shutil.rmtree(entry) if entry.is_dir() else entry.unlink()
                        removed.append(entry)
                    break
    return removed
