"""One volume too large for a worker: chunked persistence of 1024^3 uint16 on a local cluster.

Run on its own (it takes many minutes and several GiB, so ``python -m bench`` leaves it out):
``python -m bench.chunked_big`` (``--side 256 --chunk 64 --worker-gib 1`` tries it small).

Input (invented, for this measurement only): white noise smoothed by a Gaussian (sigma 2
voxels), plane ``z`` of the noise drawn from ``numpy.random.default_rng([seed, z])``. It is
written to a Zarr store in the temporary folder (/tmp) slab by slab, each slab filtered
with a halo of the kernel's radius, so the volume equals the whole-volume filter without
ever being whole (:func:`smoothed_noise_slab`), and scaled to uint16 by the filtered
noise's exact standard deviation (32768 + 5000 per standard deviation).

Cluster: ``distributed.LocalCluster`` of ``--workers`` single-threaded worker processes on
loopback, each with a memory limit of ``--worker-gib`` (default 4 GiB: the in-memory
persistence of 1024^3 uint16 needs 14 GiB, 2 bytes of input and 12 of sweeps per voxel, so
it cannot run in one worker, nor in two together; the in-memory run at 512^3, 1.75 GiB,
fits in one, and runs there as one task for the comparison). Dask's nanny restarts a
worker whose memory passes 95 % of the limit.

Rows: the generation; at the comparison side (half the side) the in-memory run inside a
worker and the chunked run, diagram against diagram row for row; at the full side the
chunked run's wall time, each worker's peak RSS (absolute, against the limit) and the
client's extra peak, beside ``worker_need``; the last join's and a chunk sweep's duration;
then the in-memory run of the full volume in this process, only if the memory available
allows it once the cluster is closed. A failure (a worker killed, memory exhausted) is a
row naming the step and the size, not an exception.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy import ndimage as ndi

from bench.chunked import _peak, _reset_peak, _same, stored_chunks
from cavitas._shared.memory import available_memory
from cavitas.cubical import Diagram, persistence
from cavitas.cubical._chunk_memory import worker_need

NAME = "chunked_big"
SIGMA = 2.0
SEED = 1
#: Memory of the in-memory persistence per voxel beyond the input (its order and two
#: union-find arrays, the sweeps in two threads: ``persistence``'s notes, measured by
#: bench/persistence.py).
IN_MEMORY_BYTES_PER_VOXEL = 12
GIB = 2**30


def noise_std(sigma: float) -> float:
    """Standard deviation of unit white noise after scipy's 3D Gaussian filter (exact:
    the root of the sum of the squared weights of the separable kernel)."""
    radius = int(4.0 * sigma + 0.5)
    impulse = np.zeros(2 * radius + 1)
    impulse[radius] = 1.0
    weights = ndi.gaussian_filter1d(impulse, sigma, mode="constant")
    return float(np.sum(weights**2) ** 1.5)


def smoothed_noise_slab(side: int, z0: int, z1: int, *, seed: int = SEED,
                        sigma: float = SIGMA) -> np.ndarray:
    """Planes ``z0:z1`` of the invented volume (uint16, ``side``^3), computed alone.

    The noise planes around the slab, up to the kernel's radius, are drawn too, so the
    slab equals the same planes of ``scipy.ndimage.gaussian_filter`` of the whole noise.

    Examples
    --------
    >>> smoothed_noise_slab(16, 4, 8).shape
    (4, 16, 16)
    """
    radius = int(4.0 * sigma + 0.5)
    lo, hi = max(0, z0 - radius), min(side, z1 + radius)
    noise = np.empty((hi - lo, side, side), np.float32)
    for z in range(lo, hi):
        noise[z - lo] = np.random.default_rng([seed, z]).standard_normal((side, side),
                                                                          dtype=np.float32)
    field = ndi.gaussian_filter(noise, sigma, output=np.float32)[z0 - lo:z1 - lo]
    del noise
    field *= 5000.0 / noise_std(sigma)
    field += 32768.0
    return np.clip(np.rint(field), 0, 65535).astype(np.uint16)


def write_volume(path: Path, side: int, chunk: int) -> None:
    """The invented ``side``^3 volume as a Zarr array of ``chunk``^3 chunks, one slab of
    ``chunk`` planes at a time."""
    import zarr

    store = zarr.open_array(str(path), mode="w", shape=(side,) * 3, chunks=(chunk,) * 3,
                            dtype=np.uint16)
    for z0 in range(0, side, chunk):
        z1 = min(side, z0 + chunk)
        store[z0:z1] = smoothed_noise_slab(side, z0, z1)


@dataclass(frozen=True)
class InMemoryRun:
    """One ``persistence(numpy array)`` run: the diagram, its wall time (s), the extra
    and the absolute peak RSS of the process that ran it (bytes)."""

    diagram: Diagram
    seconds: float
    extra_peak: int
    peak: int


def in_memory_run(path: str) -> InMemoryRun:
    """Read the Zarr array at ``path`` whole and compute its diagram in memory."""
    import zarr

    before = _reset_peak()
    image = zarr.open_array(path, mode="r")[...]
    start = time.perf_counter()
    dgm = persistence(image)
    seconds = time.perf_counter() - start
    return InMemoryRun(dgm, seconds, _peak() - before, _peak())


@dataclass(frozen=True)
class ChunkedRun:
    """One chunked run on the cluster: the diagram, wall time (s), every worker's peak RSS
    (absolute, bytes) and its extra over the worker's RSS before the run, the client's
    extra peak, the workers restarted on the way, and the compute time of the last join
    and the median chunk sweep (s)."""

    diagram: Diagram
    seconds: float
    worker_peaks: list[int]
    worker_extra: list[int]
    client_peak: int
    restarted: int
    last_join: float
    median_sweep: float


def _compute_seconds(stream: list[dict], name: str) -> list[tuple[float, float]]:
    """(stop, seconds) of the tasks whose key starts with ``name``."""
    found = []
    for task in stream:
        key = task["key"] if isinstance(task["key"], str) else str(task["key"][0])
        if key.startswith(name):
            for step in task["startstops"]:
                if step["action"] == "compute":
                    found.append((step["stop"], step["stop"] - step["start"]))
    return sorted(found)


def chunked_run(client, path: str, chunk: int) -> ChunkedRun:
    """The chunked diagram of the Zarr array at ``path`` read in ``chunk``^3 chunks."""
    import dask.array as da
    from distributed import get_task_stream

    lazy = da.from_zarr(path, chunks=(chunk,) * 3)
    workers = set(client.scheduler_info()["workers"])
    before = client.run(_reset_peak)
    client_before = _reset_peak()
    with get_task_stream(client) as stream:
        start = time.perf_counter()
        dgm = persistence(lazy)
        seconds = time.perf_counter() - start
    client_peak = _peak() - client_before
    peaks = client.run(_peak)
    restarted = len(workers - set(client.scheduler_info()["workers"]))
    joins = _compute_seconds(stream.data, "_join_task")
    sweeps = [s for _, s in _compute_seconds(stream.data, "_chunk_task")]
    return ChunkedRun(dgm, seconds, [peaks[w] for w in sorted(peaks)],
                      [peaks[w] - before[w] for w in sorted(peaks) if w in before],
                      client_peak, restarted,
                      joins[-1][1] if joins else 0.0,
                      float(np.median(sweeps)) if sweeps else 0.0)


def _gib(nbytes: float) -> str:
    return f"{nbytes / GIB:.2f} GiB" if abs(nbytes) >= GIB else f"{nbytes / 2**20:.0f} MiB"


def _sizes(values: list[int]) -> str:
    return ", ".join(_gib(v) for v in values)


def _failure(step: str, error: BaseException) -> dict:
    """A row for a step that failed: the exception's type and first line."""
    first = (str(error).splitlines() or [""])[0][:200]
    return {"metric": step, "value": "FAILED", "note": f"{type(error).__name__}: {first}"}


@dataclass(frozen=True)
class Setup:
    """What is measured: the volume's side, the chunks' side, the cluster."""

    side: int
    chunk: int
    workers: int
    worker_bytes: int

    @property
    def half(self) -> int:
        return self.side // 2

    def in_memory_need(self, side: int) -> int:
        """Model of the in-memory run's memory at ``side``^3 uint16, input included."""
        return side**3 * (2 + IN_MEMORY_BYTES_PER_VOXEL)


def _comparison_rows(client, setup: Setup, folder: Path) -> tuple[list[dict], float | None]:
    """In-memory (in one worker) and chunked at half the side: time, peaks, identity; and
    the in-memory time (None if it failed)."""
    side = setup.half
    path = folder / f"v{side}.zarr"
    write_volume(path, side, setup.chunk)
    tag = f"{side}^3"
    try:
        ref = client.submit(in_memory_run, str(path), pure=False).result()
    except Exception as error:  # a worker killed or out of memory is the finding
        return [_failure(f"{tag} in memory, in one worker", error)], None
    rows = [{"metric": f"{tag} in memory, in one worker", "value": f"{ref.seconds:.1f} s",
             "note": f"worker peak {_gib(ref.peak)} (extra {_gib(ref.extra_peak)}; model "
                     f"{_gib(setup.in_memory_need(side))} with the input); "
                     f"{len(ref.diagram)} pairs"}]
    try:
        got = chunked_run(client, str(path), setup.chunk)
    except Exception as error:
        return rows + [_failure(f"{tag} chunked, chunks {setup.chunk}^3", error)], ref.seconds
    rows.append({"metric": f"{tag} chunked, chunks {setup.chunk}^3",
                 "value": f"{got.seconds:.1f} s ({got.seconds / ref.seconds:.1f}x)",
                 "target": "identical",
                 "note": f"{'identical' if _same(ref.diagram, got.diagram) else 'DIFFERENT'}"
                         f" row for row; worker peaks {_sizes(got.worker_peaks)} (extra "
                         f"{_sizes(got.worker_extra)}); client extra {_gib(got.client_peak)}"})
    return rows, ref.seconds


def _full_rows(client, setup: Setup, path: Path, half_seconds: float | None) -> tuple[
        list[dict], Diagram | None]:
    """The chunked run at the full side: time, peaks against limit and model."""
    tag = f"{setup.side}^3"
    shape = (setup.side,) * 3
    need = worker_need(shape, stored_chunks(shape, (setup.chunk,) * 3), 2)
    try:
        got = chunked_run(client, str(path), setup.chunk)
    except Exception as error:
        return [_failure(f"{tag} chunked, chunks {setup.chunk}^3 on {setup.workers} workers "
                         f"of {_gib(setup.worker_bytes)}", error)], None
    versus = (f"; {got.seconds / (8 * half_seconds):.1f}x eight times the in-memory "
              f"{setup.half}^3 time" if half_seconds else "")
    rows = [
        {"metric": f"{tag} chunked, chunks {setup.chunk}^3",
         "value": f"{got.seconds:.1f} s",
         "note": f"{setup.workers} workers of {_gib(setup.worker_bytes)}; {len(got.diagram)} "
                 f"pairs; workers restarted: {got.restarted}{versus}"},
        {"metric": f"{tag} worker peaks", "value": _sizes(got.worker_peaks),
         "target": f"< {_gib(0.95 * setup.worker_bytes)}",
         "note": f"extra over the run's start {_sizes(got.worker_extra)}; model's largest "
                 f"task {_gib(need.peak_bytes)} (sweep "
                 f"{_gib(need.sweep_bytes)}, last join {_gib(need.join_bytes)}); "
                 f"{need.chunks} chunks"},
        {"metric": f"{tag} client extra peak", "value": _gib(got.client_peak),
         "note": f"the volume is {_gib(2 * setup.side**3)}"},
        {"metric": f"{tag} task times", "value": f"last join {got.last_join:.2f} s",
         "note": f"median chunk sweep {got.median_sweep:.2f} s (compute, on a worker)"},
    ]
    return rows, got.diagram


def _whole_in_memory_rows(setup: Setup, path: Path, chunked: Diagram | None) -> list[dict]:
    """The in-memory run of the full volume here, if the memory available allows it."""
    tag = f"{setup.side}^3"
    need = setup.in_memory_need(setup.side)
    wanted = int(need * 1.25) + GIB  # pairs, the allocator, and room for the rest
    free = available_memory()
    if free is None or free < wanted:
        return [{"metric": f"{tag} in memory, this process", "value": "skipped",
                 "note": f"needs about {_gib(wanted)} ({_gib(need)} model + margin); "
                         f"available {_gib(free or 0)}"}]
    try:
        ref = in_memory_run(str(path))
    except MemoryError as error:
        return [_failure(f"{tag} in memory, this process", error)]
    same = "not compared" if chunked is None else (
        "identical" if _same(ref.diagram, chunked) else "DIFFERENT")
    return [{"metric": f"{tag} in memory, this process", "value": f"{ref.seconds:.1f} s",
             "note": f"peak {_gib(ref.peak)} (extra {_gib(ref.extra_peak)}, model "
                     f"{_gib(need)}); chunked diagram: {same} row for row"}]


def measure(setup: Setup, whole_in_memory: bool = True) -> None:
    """Print every row as its step ends, with the machine's load average then."""
    from distributed import Client, LocalCluster

    from bench.__main__ import _print_table

    def report(new: list[dict]) -> None:
        load = os.getloadavg()[0]
        for row in new:
            row["note"] = f"{row.get('note', '')}; load {load:.1f}"
        _print_table(f"{NAME} (so far)", new)

    with tempfile.TemporaryDirectory(prefix="cavitas-bigvol-") as tmp:
        folder = Path(tmp)
        path = folder / f"v{setup.side}.zarr"
        before = _reset_peak()
        start = time.perf_counter()
        write_volume(path, setup.side, setup.chunk)
        report([{"metric": f"{setup.side}^3 uint16 written to Zarr",
                 "value": f"{time.perf_counter() - start:.1f} s",
                 "note": f"slabs of {setup.chunk} planes; client extra peak "
                         f"{_gib(_peak() - before)}"}])
        chunked = None
        with LocalCluster(n_workers=setup.workers, threads_per_worker=1, processes=True,
                          host="127.0.0.1", dashboard_address="127.0.0.1:0",
                          memory_limit=setup.worker_bytes) as cluster, \
                Client(cluster) as client:
            warm = folder / "warm.zarr"
            write_volume(warm, 16, 8)
            chunked_run(client, str(warm), 8)  # the workers load the kernels
            persistence(smoothed_noise_slab(16, 0, 16))  # and this process
            half, half_seconds = _comparison_rows(client, setup, folder)
            report(half)
            full, chunked = _full_rows(client, setup, path, half_seconds)
            report(full)
        if whole_in_memory:
            report(_whole_in_memory_rows(setup, path, chunked))


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="python -m bench.chunked_big",
        description="Chunked persistence of one large invented volume on a local Dask "
                    "cluster whose workers are each too small for the in-memory run.",
        epilog="Example (a quick try): python -m bench.chunked_big --side 256 --chunk 64 "
               "--worker-gib 1")
    parser.add_argument("--side", type=int, default=1024, help="volume side (default 1024)")
    parser.add_argument("--chunk", type=int, default=256, help="chunk side (default 256)")
    parser.add_argument("--workers", type=int, default=2, help="worker processes (default 2)")
    parser.add_argument("--worker-gib", type=float, default=4.0,
                        help="memory limit of each worker in GiB (default 4)")
    parser.add_argument("--no-whole-in-memory", action="store_true",
                        help="leave out the in-memory run of the whole volume in this process")
    return parser


def main(argv: list[str] | None = None) -> int:
    args = _parser().parse_args(argv)
    setup = Setup(args.side, args.chunk, args.workers, int(args.worker_gib * GIB))
    measure(setup, whole_in_memory=not args.no_whole_in_memory)
    return 0


if __name__ == "__main__":
    sys.exit(main())
