"""Dask distributed backend: each input is one task on a cluster (extra ``cluster``).

Workers run the same :func:`~cavitas.batch._task.run_task` as the local backend, so the
outputs are the same; the output folder must be reachable from every worker (a shared
file system). Imported only when used.

Memory: like the local backend, inputs are handed to the cluster only while the estimated
peak memory of those in flight fits the budget (that of this machine for a local cluster;
for a scheduler, 80 % of its workers' memory limits when they all have one); an input
larger than the budget is sent alone.
"""

from __future__ import annotations

import contextlib
import uuid
from collections import deque
from collections.abc import Callable, Sequence
from typing import Any

from .._errors import ParameterError
from ._local import WORKER_BASE_BYTES
from ._memory import MEMORY_SHARE, admits
from ._task import FAILED, Task, run_task

__all__ = ["run_dask"]


#: How long to try reaching a scheduler before giving up.
CONNECT_TIMEOUT = "20s"


def _import_distributed() -> Any:
    try:
        import distributed
    except ImportError as exc:
        raise ParameterError(
            "--scheduler and --dask-local need Dask distributed, which is not installed; "
            "install the optional extra with: pip install 'cavitas[cluster]'."
        ) from exc
    return distributed


def run_dask(tasks: Sequence[Task], *, scheduler: str | None, jobs: int,
             estimates: Sequence[int], budget: int | None,
             on_result: Callable[[dict[str, Any]], None]) -> list[dict[str, Any]]:
    """Run ``tasks`` on a Dask cluster; return one result per task, in order.

    Parameters
    ----------
    tasks : sequence of Task
        The inputs to process.
    scheduler : str or None
        Address of a running scheduler (``tcp://host:8786``); ``None`` starts a local
        cluster of ``jobs`` single-threaded worker processes on the loopback interface.
    jobs : int
        Workers of the local cluster (ignored with a scheduler address).
    estimates : sequence of int
        Estimated peak memory of each task's data, in bytes (a worker's own
        ``WORKER_BASE_BYTES`` come on top).
    budget : int or None
        Memory the tasks in flight may use together; ``None``: for a scheduler, 80 % of
        its workers' memory limits (no limit if a worker has none), else no limit.
    on_result : callable
        Called with each result as it arrives (progress display).
    """
    distributed = _import_distributed()
    with contextlib.ExitStack() as stack:
        client = connect(stack, scheduler, jobs)
        if scheduler is not None and budget is None:
            budget = _cluster_budget(client)
        batch_id = uuid.uuid4().hex[:8]
        pending = deque(range(len(tasks)))
        in_flight: dict[str, tuple[int, int, Any]] = {}  # key: (task, bytes, future)
        arrivals = distributed.as_completed()

        def submit_more() -> None:
            while pending:
                need = WORKER_BASE_BYTES + int(estimates[pending[0]])
                used = sum(b for _, b, _ in in_flight.values())
                if not admits(need, used, len(in_flight), budget, tasks[pending[0]].path):
                    return
                i = pending.popleft()
                future = client.submit(run_task, tasks[i], key=f"cavitas-{batch_id}-{i}",
                                       pure=False)
                in_flight[future.key] = (i, need, future)
                arrivals.add(future)

        results: dict[int, dict[str, Any]] = {}
        try:
            submit_more()
            for future in arrivals:
                i, _, _ = in_flight.pop(future.key)
                try:
                    result = future.result()
                except Exception as exc:  # a lost worker, a task the cluster gave up on
                    result = {"input": tasks[i].path, "name": tasks[i].name, "status": FAILED,
                              "seconds": 0.0, "summary": {},
                              "error": f"The cluster could not process '{tasks[i].path}' "
                                       f"({type(exc).__name__}: {exc}); nothing was kept."}
                results[i] = result
                on_result(result)
                submit_more()
        except BaseException:
            client.cancel([f for _, _, f in in_flight.values()])
            raise
    return [results[i] for i in range(len(tasks))]


def _cluster_budget(client: Any) -> int | None:
    """80 % of the workers' memory limits together, or ``None`` if one has no limit."""
    workers = client.scheduler_info().get("workers", {}).values()
    limits = [int(w.get("memory_limit") or 0) for w in workers]
    if not limits or min(limits) <= 0:
        return None
    return int(sum(limits) * MEMORY_SHARE)


def connect(stack: contextlib.ExitStack, scheduler: str | None, workers: int) -> Any:
    """A ``distributed.Client`` entered on ``stack``: of the scheduler at ``scheduler``, or
    of a new local cluster of ``workers`` single-threaded processes on the loopback
    interface (its dashboard on a free port).

    An address that is not one, or a scheduler that does not answer within
    :data:`CONNECT_TIMEOUT`, is refused in one sentence (exit code 2).
    """
    distributed = _import_distributed()
    if scheduler is None:
        cluster = stack.enter_context(distributed.LocalCluster(
            n_workers=workers, threads_per_worker=1, processes=True, host="127.0.0.1",
            dashboard_address="127.0.0.1:0"))
        return stack.enter_context(distributed.Client(cluster))
    try:
        return stack.enter_context(distributed.Client(scheduler, timeout=CONNECT_TIMEOUT))
    except (OSError, TimeoutError, ValueError, TypeError) as exc:
        text = str(exc).strip()
        reason = (text.splitlines()[0] if text else type(exc).__name__).rstrip(".")
        raise ParameterError(f"Cannot reach a Dask scheduler at --scheduler {scheduler!r}: "
                             f"{reason}.") from exc
