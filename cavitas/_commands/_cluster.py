"""The options that send one large image to Dask workers chunk by chunk, and the client.

``--scheduler ADDRESS`` joins a running Dask scheduler; ``--dask-local [N]`` starts a
cluster of ``N`` worker processes on this machine (loopback only). Either one makes the
command read its Zarr or HDF5 input lazily (:func:`cavitas.io._lazy.open_chunked`) and
compute on the workers.
"""

from __future__ import annotations

import argparse
import contextlib
from collections.abc import Iterator
from typing import Any

from .._cores import usable_cores
from .._errors import InputFileError

__all__ = ["add_cluster_options", "chunked_route", "dask_client"]


def add_cluster_options(parser: argparse.ArgumentParser, *, what: str) -> None:
    """Add ``--scheduler`` and ``--dask-local``; ``what`` says what runs on the workers."""
    group = parser.add_argument_group(
        "one image larger than memory, chunk by chunk on Dask workers (extra 'cluster'; "
        "the input must be a Zarr store or an HDF5 file, read in its own chunks)")
    where = group.add_mutually_exclusive_group()
    where.add_argument("--scheduler", metavar="ADDRESS",
                       help=f"address of a running Dask scheduler (e.g. "
                            f"tcp://10.0.0.5:8786): {what} is computed on its workers, "
                            f"which must be able to read the input file at the same path")
    where.add_argument("--dask-local", type=_worker_count, nargs="?", const=0, metavar="N",
                       help=f"start N Dask worker processes on this machine (default: one per "
                            f"usable core, at most 4) and compute {what} on them; no process "
                            f"holds the whole image (`cavitas info FILE` says what each "
                            f"worker needs)")


def _worker_count(text: str) -> int:
    """An argparse type: a whole number of workers, at least 1."""
    try:
        count = int(text)
    except ValueError:
        count = 0
    if count < 1:
        raise argparse.ArgumentTypeError(f"expected a whole number of workers (1 or more), "
                                         f"got {text!r}")
    return count


def chunked_route(args: argparse.Namespace) -> bool:
    """Whether ``--scheduler`` or ``--dask-local`` was given."""
    return args.scheduler is not None or args.dask_local is not None


@contextlib.contextmanager
def dask_client(args: argparse.Namespace, source: str) -> Iterator[Any]:
    """A ``distributed.Client`` for ``--scheduler`` or ``--dask-local``, closed afterwards.

    Errors: exit code 2 when distributed is not installed, for an address that is not one,
    or a scheduler that does not answer within
    :data:`cavitas.batch._dask.CONNECT_TIMEOUT`; exit code 3 when workers die while
    computing on ``source`` (the file's chunks were too large for them, most likely).
    """
    from ..batch._dask import _import_distributed, connect

    distributed = _import_distributed()
    with contextlib.ExitStack() as stack:
        workers = args.dask_local or min(4, usable_cores())  # 0: given without N
        client = connect(stack, args.scheduler, workers)
        try:
            yield client
        except distributed.KilledWorker as exc:
            raise InputFileError(
                f"Dask workers died while computing on '{source}' (most likely out of "
                "memory: `cavitas info` says what each needs for its chunks; give the workers "
                "more memory, start fewer of them, or store the file in smaller chunks)."
            ) from exc
