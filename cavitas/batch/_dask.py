"""Dask distributed backend: each input is one task on a cluster (extra ``cluster``).

Workers run the same :func:`~cavitas.batch._task.run_task` as the local backend, so the
outputs are the same; the output folder must be reachable from every worker (a shared
file system). Imported only when used.
"""

from __future__ import annotations

import contextlib
import uuid
from collections.abc import Callable, Sequence
from typing import Any

from .._errors import ParameterError
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
    on_result : callable
        Called with each result as it arrives (progress display).
    """
    distributed = _import_distributed()
    with contextlib.ExitStack() as stack:
        if scheduler is None:
            cluster = stack.enter_context(distributed.LocalCluster(
                n_workers=jobs, threads_per_worker=1, processes=True, host="127.0.0.1",
                dashboard_address="127.0.0.1:0"))
            client = stack.enter_context(distributed.Client(cluster))
        else:
            try:
                client = stack.enter_context(distributed.Client(scheduler, timeout=CONNECT_TIMEOUT))
            except (OSError, TimeoutError) as exc:
                raise ParameterError(
                    f"Cannot reach the Dask scheduler at --scheduler {scheduler!r}: {exc}."
                ) from exc
        batch_id = uuid.uuid4().hex[:8]
        futures = [client.submit(run_task, task, key=f"cavitas-{batch_id}-{i}", pure=False)
                   for i, task in enumerate(tasks)]
        order = {future.key: i for i, future in enumerate(futures)}
        results: dict[int, dict[str, Any]] = {}
        try:
            for future in distributed.as_completed(futures):
                i = order[future.key]
                try:
                    result = future.result()
                except Exception as exc:  # a lost worker, a task the cluster gave up on
                    result = {"input": tasks[i].path, "name": tasks[i].name, "status": FAILED,
                              "seconds": 0.0, "summary": {},
                              "error": f"The cluster could not process '{tasks[i].path}' "
                                       f"({type(exc).__name__}: {exc}); nothing was kept."}
                results[i] = result
                on_result(result)
        except BaseException:
            client.cancel(futures)
            raise
    return [results[i] for i in range(len(tasks))]
