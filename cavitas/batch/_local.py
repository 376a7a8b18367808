"""Local backend: worker processes on this machine, started as memory allows.

The parent hands one task at a time to each worker, so it always knows which input a
worker holds: a worker that dies (killed, out of memory) fails only that input, and a new
worker takes its place. A task starts only while the estimated memory of all running tasks
stays within the budget; an input larger than the budget runs alone. Workers ignore Ctrl-C;
the parent stops them, and their unfinished staging folders never become outputs.

Estimates are corrected as the batch goes: each worker reports its peak memory, and when a
task of a sizeable estimate turned out to need more, later estimates are scaled up by the
largest ratio seen (never down), so a poor first guess costs parallelism, not a crash.
"""

from __future__ import annotations

import contextlib
import logging
import multiprocessing
import resource
import signal
from collections import deque
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from multiprocessing.connection import Connection, wait
from pathlib import Path
from typing import Any

from ._memory import admits
from ._resume import remove_stale
from ._task import FAILED, Task, run_task

__all__ = ["run_local"]

log = logging.getLogger(__name__)

_PR_SET_PDEATHSIG = 1  # Linux prctl option: signal this process when its parent dies
#: Memory of a worker process before any data (Python, numpy, numba, scipy, the kernels);
#: measured at about 240 MiB with cavitas 0.1 on CPython 3.11.
WORKER_BASE_BYTES = 256 << 20
#: Only tasks estimated above this size teach the correction (below it the base dominates).
LEARN_ABOVE_BYTES = 256 << 20


def _die_with_parent() -> None:
    """Ask Linux to kill this worker if the batch process is killed (no orphans left)."""
    with contextlib.suppress(Exception):
        import ctypes

        ctypes.CDLL(None, use_errno=True).prctl(_PR_SET_PDEATHSIG, int(signal.SIGKILL))


def _worker_main(conn: Connection) -> None:
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    _die_with_parent()
    while True:
        try:
            message = conn.recv()
        except (EOFError, OSError):
            return
        if message is None:
            return
        index, task = message
        result = run_task(task)
        conn.send((index, result, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024))


@dataclass
class _Worker:
    process: Any
    conn: Connection
    index: int | None = None
    bytes: int = 0


def _died(task: Task, exitcode: int | None, others: int) -> dict[str, Any]:
    """The failure of a worker that died; ``others``: how many inputs ran beside it.

    Examples
    --------
    >>> _died(Task("a.tif", "a", "/out", None), -9, 0)["error"]  # doctest: +ELLIPSIS
    "The worker process was killed by signal 9 while processing 'a.tif' ... alone: ..."
    >>> "fewer --jobs" in _died(Task("a.tif", "a", "/out", None), -9, 2)["error"]
    True
    """
    how = (f"was killed by signal {-exitcode}" if exitcode is not None and exitcode < 0
           else f"ended with exit code {exitcode}")
    advice = (f"{others} other input(s) ran beside it: if memory ran out, fewer --jobs may "
              "let it finish" if others else
              "it ran alone: if memory ran out, crop or downsample it")
    return {"input": task.path, "name": task.name, "status": FAILED, "seconds": 0.0,
            "summary": {}, "error": f"The worker process {how} while processing "
            f"'{task.path}' (killed, or out of memory; {advice}); nothing was kept."}


def run_local(tasks: Sequence[Task], *, jobs: int, estimates: Sequence[int],
              budget: int | None, on_result: Callable[[dict[str, Any]], None]
              ) -> list[dict[str, Any]]:
    """Run ``tasks`` on up to ``jobs`` worker processes; return one result per task, in order.

    Parameters
    ----------
    tasks : sequence of Task
        The inputs to process.
    jobs : int
        Most worker processes at once (>= 1).
    estimates : sequence of int
        Estimated peak memory of each task's data, in bytes (the worker's own
        ``WORKER_BASE_BYTES`` come on top).
    budget : int or None
        Memory the running tasks may use together; ``None`` for no limit.
    on_result : callable
        Called with each result as it arrives (progress display).
    """
    ctx = multiprocessing.get_context("spawn")  # safe with threaded numeric libraries
    pending = deque(range(len(tasks)))
    results: dict[int, dict[str, Any]] = {}
    workers: list[_Worker] = []
    root = Path(tasks[0].root) if tasks else None
    scale = 1.0  # learned correction of the estimates (only ever grows)

    def need(index: int) -> int:
        return WORKER_BASE_BYTES + int(estimates[index] * scale)

    def start_worker() -> _Worker:
        parent_end, child_end = ctx.Pipe()
        process = ctx.Process(target=_worker_main, args=(child_end,), daemon=True,
                              name="cavitas-batch-worker")
        process.start()
        child_end.close()
        worker = _Worker(process, parent_end)
        workers.append(worker)
        return worker

    def finish(worker: _Worker, index: int, result: dict[str, Any], peak: int = 0) -> None:
        nonlocal scale
        estimate = estimates[index]
        if estimate > LEARN_ABOVE_BYTES and peak - WORKER_BASE_BYTES > estimate * scale:
            scale = (peak - WORKER_BASE_BYTES) / estimate
            log.info("Tasks need more memory than estimated; scaling estimates by %.2f.",
                     scale)
        results[index] = result
        worker.index, worker.bytes = None, 0
        on_result(result)

    def dispatch() -> None:
        while pending:
            busy = [w for w in workers if w.index is not None]
            wanted = need(pending[0])
            if not admits(wanted, sum(w.bytes for w in busy), len(busy), budget,
                          tasks[pending[0]].path):
                return
            worker = next((w for w in workers if w.index is None), None)
            if worker is None:
                if len(workers) >= jobs:
                    return
                worker = start_worker()
            index = pending.popleft()
            worker.index, worker.bytes = index, wanted
            try:
                worker.conn.send((index, tasks[index]))
            except OSError:  # the idle worker is gone: forget it and try again
                worker.index = None
                pending.appendleft(index)
                workers.remove(worker)

    try:
        dispatch()
        while pending or any(w.index is not None for w in workers):
            running = [(w, w.index) for w in workers if w.index is not None]
            ready = wait([w.conn for w, _ in running] + [w.process.sentinel for w, _ in running])
            for worker, index in running:
                if worker.conn in ready or worker.conn.poll():
                    try:
                        _, result, peak = worker.conn.recv()
                    except (EOFError, OSError):
                        result = None
                    if result is not None:
                        finish(worker, index, result, peak)
                        continue
                if worker.process.sentinel in ready or not worker.process.is_alive():
                    worker.process.join()
                    task = tasks[index]
                    others = sum(w.index is not None for w in workers) - 1
                    finish(worker, index, _died(task, worker.process.exitcode, others))
                    workers.remove(worker)
                    remove_stale(Path(task.root), task.name)
            dispatch()
    finally:
        for worker in workers:
            with contextlib.suppress(OSError):
                worker.conn.send(None)
        for worker in workers:
            if worker.index is not None:  # interrupted mid-task: stop it now
                worker.process.terminate()
            worker.process.join(timeout=5)
            if worker.process.is_alive():
                worker.process.kill()
                worker.process.join()
            worker.conn.close()
        if root is not None and len(results) < len(tasks):
            remove_stale(root)
    return [results[i] for i in range(len(tasks))]
