"""One batch input, start to finish: skip if complete, else segment into staging and publish.

:func:`run_task` is what every backend (local processes, Dask) runs, so their results are
the same by construction. It never raises for a problem with the input: the problem comes
back as one sentence in the result, and the other inputs go on.
"""

from __future__ import annotations

import importlib
import inspect
import shutil
import time
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .._errors import CavitasError
from .._shared.memory import out_of_memory
from .._version import __version__
from ._resume import (
    input_checksum,
    new_staging,
    publish,
    read_record,
    reusable,
    write_record,
)

__all__ = ["Task", "resolve_worker", "run_task"]

#: The default worker: reads, segments and writes one input into a folder.
DEFAULT_WORKER = "cavitas.workflow:segment_file"

#: Statuses of a task result.
DONE, REUSED, FAILED = "done", "reused", "failed"


@dataclass(frozen=True)
class Task:
    """What a worker needs to process one input.

    Parameters
    ----------
    path : str
        The input file (absolute).
    name : str
        Name of its output folder under ``root``.
    root : str
        The batch output folder.
    params : object
        Segmentation parameters handed to the worker function unchanged.
    options : object
        The run's options (mask file, extra outputs), handed to the worker as
        ``options=`` when given.
    record : mapping
        The same parameters as a JSON-ready dict, compared on resume.
    force : bool
        Redo the input even if its outputs are complete.
    worker : str
        ``"module:function"`` called as ``worker(path, outdir, params, force=True,
        progress=False)``, plus ``options=`` and ``read_options=`` when the task has them;
        it must write its outputs into ``outdir`` and return a dict. A worker that takes
        an ``input_sha256`` keyword also gets the input's checksum.
    read_options : mapping
        Options for reading the input (channel, time); passed to the worker when given.
    skip_memory_check : bool
        Passed to a worker that takes it: run even beyond the memory available.
    report : bool
        False: passed as ``report=False`` to a worker that takes it (no report page).
    """

    path: str
    name: str
    root: str
    params: Any
    options: Any = None
    record: Mapping[str, Any] = field(default_factory=dict)
    force: bool = False
    worker: str = DEFAULT_WORKER
    read_options: Mapping[str, Any] = field(default_factory=dict)
    skip_memory_check: bool = False
    report: bool = True
    version: str = __version__


def resolve_worker(spec: str) -> Callable[..., Mapping[str, Any]]:
    """Import the worker function named ``"module:function"``.

    Examples
    --------
    >>> resolve_worker("os.path:basename")("/a/b.tif")
    'b.tif'
    """
    module, _, name = spec.partition(":")
    return getattr(importlib.import_module(module), name)


def _accepts(function: Callable[..., Any], keyword: str) -> bool:
    """Whether ``function`` takes the keyword argument ``keyword``."""
    try:
        return keyword in inspect.signature(function).parameters
    except (TypeError, ValueError):  # a builtin without a signature
        return False


def failure_sentence(exc: BaseException, path: str) -> str:
    """One sentence for a failed input: the error's own sentence, or a plain note for a bug.

    Examples
    --------
    >>> failure_sentence(ValueError("bad"), "/d/a.tif")
    "Internal error on '/d/a.tif' (ValueError: bad); please report it."
    """
    if isinstance(exc, CavitasError):
        return str(exc)
    if isinstance(exc, MemoryError):
        return str(out_of_memory(path))
    return f"Internal error on '{path}' ({type(exc).__name__}: {exc}); please report it."


def run_task(task: Task) -> dict[str, Any]:
    """Process one input and return its result row (never raises for input problems).

    The result has ``input``, ``name``, ``status`` (``"done"``, ``"reused"`` or
    ``"failed"``), ``error`` (one sentence or ``""``), ``seconds`` and ``summary`` (the
    worker's figures); a failure also has ``parameters``, those its sentence names (see
    :class:`cavitas._errors.CavitasError`).
    """
    start = time.perf_counter()
    result: dict[str, Any] = {"input": task.path, "name": task.name, "status": FAILED,
                              "error": "", "seconds": 0.0, "summary": {}}
    root, final = Path(task.root), Path(task.root) / task.name
    staging = None
    try:
        checksum = input_checksum(task.path)
        if final.exists() and not task.force:
            ok, why = reusable(final, checksum=checksum, params=task.record,
                               version=task.version)
            if ok:
                record = read_record(final) or {}
                result.update(status=REUSED, summary=record.get("summary", {}),
                              seconds=record.get("seconds", 0.0))
                return result
            result["error"] = (f"Output folder '{final}' exists but {why}; "
                               "use force=True to replace it.")
            result["parameters"] = ["force"]
            return result
        staging = new_staging(root, task.name)
        worker = resolve_worker(task.worker)
        extra: dict[str, Any] = {}
        if task.options is not None:
            extra["options"] = task.options
        if task.read_options:
            extra["read_options"] = dict(task.read_options)
        if _accepts(worker, "input_sha256"):  # spare the worker a second pass over the input
            extra["input_sha256"] = checksum
        if task.skip_memory_check and _accepts(worker, "skip_memory_check"):
            extra["skip_memory_check"] = True
        if not task.report and _accepts(worker, "report"):
            extra["report"] = False
        figures = worker(task.path, staging, task.params, force=True, progress=False,
                         **extra)
        seconds = time.perf_counter() - start
        summary = _plain_figures(figures or {})
        write_record(staging, input_path=task.path, checksum=checksum, params=task.record,
                     version=task.version, summary=summary, seconds=seconds)
        publish(staging, final)
        staging = None
        result.update(status=DONE, summary=summary, seconds=round(seconds, 3))
    except Exception as exc:  # one failing input must not stop the others
        result["error"] = failure_sentence(exc, task.path)
        result["parameters"] = list(getattr(exc, "parameters", ()))
    finally:
        if staging is not None:
            shutil.rmtree(staging, ignore_errors=True)
        if result["status"] == FAILED:
            result["seconds"] = round(time.perf_counter() - start, 3)
    return result


def _plain_figures(figures: Mapping[str, Any]) -> dict[str, Any]:
    """The scalar entries of a worker's result (numpy scalars become Python ones)."""
    plain = {}
    for key, value in figures.items():
        if hasattr(value, "item") and getattr(value, "ndim", 1) == 0:
            value = value.item()
        if value is None or isinstance(value, (bool, int, float, str)):
            plain[str(key)] = value
    return plain
