"""Run a batch: expand the inputs, process each (locally or on Dask), write the batch tables."""

from __future__ import annotations

import logging
import os
import sys
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

from .._caution import RESEARCH_ONLY
from .._cores import usable_cores
from .._errors import (
    EXIT_INPUT,
    EXIT_OK,
    EXIT_SOME_FAILED,
    InputFileError,
    OutputError,
    ParameterError,
)
from .._json import dumps
from .._shared.atomic import atomic_path
from .._version import __version__
from ._index import write_index
from ._inputs import expand_inputs, missing_sentence
from ._lock import folder_lock
from ._memory import MEMORY_SHARE, available_memory, estimate_task_bytes
from ._reference import add_reference_distances, reference_source
from ._resume import json_ready, remove_stale
from ._summary import combined_regions, summary_table
from ._task import DEFAULT_WORKER, FAILED, Task

__all__ = ["BatchResult", "run_batch"]

log = logging.getLogger(__name__)

#: Files the batch writes at the top of its output folder (and owns: rewritten each run).
SUMMARY_NAME, REGIONS_NAME, INDEX_NAME, RECORD_NAME = (
    "summary.csv", "regions.csv", "index.html", "batch.json")


@dataclass
class BatchResult:
    """What a batch did: one result per input (in input order) and the files it wrote."""

    results: list[dict[str, Any]]
    root: Path
    files: dict[str, Path] = field(default_factory=dict)

    @property
    def failed(self) -> list[dict[str, Any]]:
        """Results of the inputs that failed (each with its one-sentence ``error``)."""
        return [r for r in self.results if r["status"] == FAILED]

    @property
    def missing(self) -> list[dict[str, Any]]:
        """Results of the inputs named on the command line that do not exist."""
        return [r for r in self.failed if r.get("missing")]

    @property
    def exit_code(self) -> int:
        """0 if every input is complete, 3 if a named input is missing, else 1 if some failed."""
        if self.missing:
            return EXIT_INPUT
        return EXIT_SOME_FAILED if self.failed else EXIT_OK


def params_record(*groups: Any) -> dict[str, Any]:
    """Parameter groups as one flat JSON-ready dict (``to_dict()`` of each, or mappings).

    Examples
    --------
    >>> params_record({"walls": "dark", "spacing": (1, 2)}, None)
    {'spacing': [1, 2], 'walls': 'dark'}
    """
    record: dict[str, Any] = {}
    for params in groups:
        if params is None:
            continue
        if hasattr(params, "to_dict"):
            record.update(json_ready(params.to_dict()))
        elif isinstance(params, Mapping):
            record.update(json_ready(dict(params)))
        else:
            raise ParameterError(f"params must be a parameters object or a mapping; got "
                                 f"{type(params).__name__}.")
    return record


def default_jobs() -> int:
    """Worker processes by default: the cores this process may use."""
    return usable_cores()


def _check_owned(root: Path, force: bool) -> None:
    if (root / RECORD_NAME).exists() or force:
        return
    for name in (SUMMARY_NAME, REGIONS_NAME, INDEX_NAME):
        if (root / name).exists():
            raise OutputError(f"Output '{root / name}' already exists and was not written by "
                              "a cavitas batch; use --force to replace it.")


def run_batch(inputs: Sequence[str | os.PathLike], outdir: str | os.PathLike,
              params: Any = None, *, options: Any = None, jobs: int | None = None,
              scheduler: str | None = None, dask: bool = False, force: bool = False,
              progress: bool = True, read_options: Mapping[str, Any] | None = None,
              worker: str = DEFAULT_WORKER, memory_budget: int | None = None,
              skip_memory_check: bool = False, report: bool = True,
              reference: str | os.PathLike | None = None) -> BatchResult:
    """Process many inputs into ``outdir``: one folder per input plus batch-wide tables.

    Each input gets ``outdir/<name>-<hash>/`` (its segmentation outputs and a ``done.json``
    completion record); the batch writes ``summary.csv`` (one row per input),
    ``regions.csv`` (every region, with its source file), ``index.html`` and
    ``batch.json``. A failing input is recorded with one sentence and the others go on.
    Running the same batch again reuses every input whose outputs are complete and whose
    parameters, input checksum and cavitas version match.

    Parameters
    ----------
    inputs : sequence of path or str
        Files, folders (their image files) and glob patterns.
    outdir : path or str
        The batch output folder (created if needed).
    params : SegmentParams or mapping, optional
        Segmentation parameters, passed to the worker and recorded with every output.
    options : RunOptions, optional
        The mask file (give its full path when workers run elsewhere) and the extra
        outputs; passed to the worker as ``options=`` and recorded like the parameters.
    jobs : int, optional
        Most inputs processed at once (default: the usable cores). Locally, fewer run
        together when their estimated memory would exceed what is available.
    scheduler : str, optional
        Address of a Dask scheduler to send the inputs to (needs the ``cluster`` extra).
    dask : bool, optional
        Use Dask: a local cluster of ``jobs`` workers unless ``scheduler`` is given.
    force : bool, optional
        Redo every input and replace existing outputs.
    progress : bool, optional
        Show a progress bar with an ETA on stderr.
    read_options : mapping, optional
        Options for reading every input (``channel``, ``time``), recorded like parameters.
    worker : str, optional
        ``"module:function"`` that processes one input (default: ``segment_file``).
    memory_budget : int, optional
        Bytes the concurrent tasks may use together (default: 80% of what this machine
        has available, or with ``scheduler`` 80% of the workers' memory limits).
    skip_memory_check : bool, optional
        Let each worker run an input whose estimated memory exceeds what its machine has
        available (by default that input fails with one sentence, the others go on).
    report : bool, optional
        Write each input's ``report.html`` (False: tables, maps and ``run.json`` only;
        recorded like the parameters, so a folder made with the other choice is not reused).
    reference : path or str, optional
        An image, or a diagram file ``cavitas diagram`` wrote, to compare every input
        with: the summary gets the bottleneck distance of each input's diagram to the
        reference's per dimension (``to_reference_H0`` ...; unsmoothed images, the run's
        walls, connectivity, mask and reading options). Computed by this process after
        the inputs are done, so a new reference never makes an input run again.

    Returns
    -------
    BatchResult

    Notes
    -----
    Local workers are new Python processes (the ``spawn`` start method), so a script that
    calls this function must do so under ``if __name__ == "__main__":``, as with any
    process pool. A task starts only while the estimated peak memory of the running tasks
    (see ``_memory.estimate_task_bytes``) fits in ``memory_budget``.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "blank.tif").write_bytes(b"")
    >>> out = run_batch([d], d / "out", jobs=1, progress=False)
    >>> out.exit_code, [r["status"] for r in out.results], sorted(out.files)
    (1, ['failed'], ['batch.json', 'index.html', 'regions.csv', 'summary.csv'])
    """
    jobs = default_jobs() if jobs is None else jobs
    if not isinstance(jobs, int) or jobs < 1:
        raise ParameterError(f"jobs must be a whole number >= 1; got {jobs!r}.",
                             parameters=("jobs",))
    root = Path(os.path.abspath(outdir))
    missing: list[str] = []
    try:
        found = expand_inputs(list(inputs), missing=missing)
    except ParameterError:  # nothing found: name what is missing, if something is
        if missing:
            raise InputFileError(missing_sentence(missing[0])) from None
        raise
    items = [i for i in found if root not in i.path.parents]
    if not items:  # e.g. a glob that only matched earlier outputs
        raise ParameterError(f"Every input found lies inside the output folder '{root}'.")
    if root.exists() and not root.is_dir():
        raise OutputError(f"Output '{root}' is a file; expected a folder for the batch.")
    _check_owned(root, force)
    record = params_record(params, options)
    if read_options:
        record["read_options"] = json_ready(dict(read_options))
    if not report:
        record["report"] = False
    ref = None if reference is None else reference_source(str(reference), params, options,
                                                          read_options)
    tasks = [Task(path=str(item.path), name=item.name, root=str(root), params=params,
                  options=options, record=record, force=force, worker=worker,
                  read_options=dict(read_options or {}),
                  skip_memory_check=skip_memory_check, report=report) for item in items]
    started = datetime.now(timezone.utc)
    with folder_lock(root):
        remove_stale(root)
        results = _execute(tasks, jobs=jobs, scheduler=scheduler, dask=dask,
                           progress=progress, memory_budget=memory_budget)
        if ref is not None:
            add_reference_distances(results, ref, params, options, read_options)
        results += [_missing_result(text) for text in missing]
        files = _write_batch_files(root, results, record, started,
                                   reference=None if ref is None else ref.path)
    return BatchResult(results, root, files)


def _missing_result(text: str) -> dict[str, Any]:
    """The failed result of an input named on the command line that does not exist."""
    return {"input": text, "name": "", "status": FAILED, "missing": True, "seconds": 0.0,
            "summary": {}, "parameters": [], "error": missing_sentence(text)}


def _execute(tasks: list[Task], *, jobs: int, scheduler: str | None, dask: bool,
             progress: bool, memory_budget: int | None) -> list[dict[str, Any]]:
    from tqdm import tqdm

    failed = 0
    with tqdm(total=len(tasks), unit="input", desc="batch", disable=not progress,
              file=sys.stderr, dynamic_ncols=True) as bar:

        def on_result(result: dict[str, Any]) -> None:
            nonlocal failed
            if result["status"] == FAILED:
                failed += 1
                bar.set_postfix_str(f"{failed} failed", refresh=False)
                log.info("%s: %s", result["input"], result["error"])
            bar.update(1)

        estimates = [estimate_task_bytes(t.path) for t in tasks]
        if memory_budget is None and not scheduler:  # a scheduler reports its own
            available = available_memory()
            memory_budget = None if available is None else int(available * MEMORY_SHARE)
        if dask or scheduler:
            from ._dask import run_dask

            return run_dask(tasks, scheduler=scheduler, jobs=jobs, estimates=estimates,
                            budget=memory_budget, on_result=on_result)
        from ._local import run_local

        return run_local(tasks, jobs=jobs, estimates=estimates, budget=memory_budget,
                         on_result=on_result)


def _write_batch_files(root: Path, results: list[dict[str, Any]], record: dict[str, Any],
                       started: datetime, *, reference: str | None = None) -> dict[str, Path]:
    files = {name: root / name for name in (SUMMARY_NAME, REGIONS_NAME, INDEX_NAME,
                                             RECORD_NAME)}
    summary = summary_table(results)
    summary.to_csv(files[SUMMARY_NAME], force=True)
    combined_regions(results, root).to_csv(files[REGIONS_NAME], force=True)
    write_index(files[INDEX_NAME], summary, root=root, params=record, version=__version__,
                tables={"summary": SUMMARY_NAME, "all regions": REGIONS_NAME,
                        "run record": RECORD_NAME}, reference_name=reference)
    batch = {
        "version": __version__,
        "params": record,
        "reference": reference,
        "started": started.isoformat(timespec="seconds"),
        "finished": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "inputs": [{k: r[k] for k in ("input", "name", "status", "error")} for r in results],
        "caution": RESEARCH_ONLY,
    }
    with atomic_path(files[RECORD_NAME], force=True) as tmp:
        tmp.write_text(dumps(batch, indent=1, ensure_ascii=False), encoding="utf-8")
    return files
