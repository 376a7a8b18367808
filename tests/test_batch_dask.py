"""The Dask backend gives the same outputs as the local one (LocalCluster on loopback only).

Expected behaviour: both backends run the same task function, so every output file must be
identical (common practice: a backend changes where work runs, not what it computes).
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

distributed = pytest.importorskip("distributed",
                                  reason="Dask distributed (extra 'cluster') is not installed")

from cavitas._table import Table  # noqa: E402
from cavitas.batch import run_batch  # noqa: E402

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))  # the stand-in worker is imported by module name
STANDIN = "batch_standin:segment"

pytestmark = pytest.mark.cluster


@pytest.fixture
def inputs(tmp_path, rng):
    folder = tmp_path / "in"
    folder.mkdir()
    for i, shape in enumerate([(5, 6, 7), (8, 9), (4, 4, 4)]):
        np.save(folder / f"v{i}.npy", rng.integers(0, 100, size=shape).astype(np.uint16))
    (folder / "broken.npy").write_bytes(b"not an array")
    return folder


def _same_outputs(a, b):
    assert [(r["name"], r["status"], r["error"]) for r in a.results] == \
        [(r["name"], r["status"], r["error"]) for r in b.results]
    for ra, rb in zip(a.results, b.results, strict=True):
        assert ra["summary"] == rb["summary"]
        if ra["status"] == "done":
            da, db = a.root / ra["name"], b.root / rb["name"]
            np.testing.assert_array_equal(np.load(da / "labels.npy"), np.load(db / "labels.npy"))
            assert (da / "regions.csv").read_bytes() == (db / "regions.csv").read_bytes()
    ta, tb = Table.from_csv(a.files["regions.csv"]), Table.from_csv(b.files["regions.csv"])
    assert ta.names == tb.names and all(np.array_equal(ta[n], tb[n]) for n in ta.names)


@pytest.fixture(scope="module")
def scheduler():
    """A threaded LocalCluster listening on the loopback interface only."""
    with distributed.LocalCluster(n_workers=1, processes=False, host="127.0.0.1",
                                  protocol="tcp", dashboard_address="127.0.0.1:0") as cluster:
        yield cluster.scheduler_address


def test_dask_scheduler_matches_local_backend(tmp_path, inputs, scheduler):
    local = run_batch([inputs], tmp_path / "local", {"level": 40}, jobs=1, progress=False,
                      worker=STANDIN)
    remote = run_batch([inputs], tmp_path / "dask", {"level": 40}, progress=False,
                       scheduler=scheduler, worker=STANDIN)
    assert local.exit_code == remote.exit_code == 1  # the broken file fails on both
    _same_outputs(local, remote)
    # a re-run through the cluster reuses what is complete, like the local backend
    again = run_batch([inputs], tmp_path / "dask", {"level": 40}, progress=False,
                      scheduler=scheduler, worker=STANDIN)
    assert [r["status"] for r in again.results] == ["failed", "reused", "reused", "reused"]


@pytest.mark.slow
def test_local_dask_cluster_of_processes(tmp_path, inputs):
    local = run_batch([inputs], tmp_path / "local", {"level": 40}, jobs=1, progress=False,
                      worker=STANDIN)
    remote = run_batch([inputs], tmp_path / "dask", {"level": 40}, jobs=1, dask=True,
                       progress=False, worker=STANDIN)
    _same_outputs(local, remote)


def test_unreachable_scheduler_is_a_parameter_error(tmp_path, inputs, monkeypatch):
    from cavitas._errors import ParameterError
    from cavitas.batch import _dask

    monkeypatch.setattr(_dask, "CONNECT_TIMEOUT", "1s")
    with pytest.raises(ParameterError, match="--scheduler"):
        run_batch([inputs], tmp_path / "out", progress=False, worker=STANDIN,
                  scheduler="tcp://127.0.0.1:9")


def test_local_cluster_keeps_to_the_memory_budget(tmp_path, inputs, monkeypatch):
    # Expected behaviour (as in the local backend): with room for one input at a time, a
    # cluster of two workers still runs the inputs one after the other.
    log = tmp_path / "calls.log"
    monkeypatch.setenv("CAVITAS_STANDIN_LOG", str(log))
    monkeypatch.setenv("CAVITAS_STANDIN_SLEEP", "0.3")
    from cavitas.batch._local import WORKER_BASE_BYTES

    out = run_batch([inputs], tmp_path / "dask", {"level": 40}, jobs=2, dask=True,
                    progress=False, worker=STANDIN, memory_budget=WORKER_BASE_BYTES + 1)
    assert sorted(r["status"] for r in out.results) == ["done"] * 3 + ["failed"]
    running = set()  # broken.npy fails on reading: it logs a start and no finish
    for event, name, _ in (line.split() for line in log.read_text().splitlines()):
        if event == "start":
            assert not running, log.read_text()
            if name != "broken.npy":
                running.add(name)
        else:
            running.remove(name)


def test_scheduler_budget_comes_from_its_workers_limits(scheduler):
    # Reference: the memory limits the scheduler itself reports (distributed's
    # scheduler_info), times the share the batch may use.
    from cavitas.batch._dask import _cluster_budget
    from cavitas.batch._memory import MEMORY_SHARE

    with distributed.Client(scheduler) as client:
        limits = [w["memory_limit"] for w in client.scheduler_info()["workers"].values()]
        expected = int(sum(limits) * MEMORY_SHARE) if all(limits) else None
        assert _cluster_budget(client) == expected
