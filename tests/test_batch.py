"""Batch scheduling, resume and fault isolation, run against a stand-in worker.

The stand-in (tests/batch_standin.py) writes invented outputs; these tests check the
batch machinery (what runs, what is skipped, what survives a crash), not segmentation.
Expected behaviour is common practice for resumable batch tools unless a source is named.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pytest

from cavitas._errors import InputFileError, OutputError, ParameterError
from cavitas._table import Table
from cavitas.batch import _local, expand_inputs, output_name, run_batch
from cavitas.batch._local import WORKER_BASE_BYTES, run_local
from cavitas.batch._resume import DONE_NAME
from cavitas.batch._task import Task

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))  # spawned workers import the stand-in by module name
STANDIN = "batch_standin:segment"


def _volume(rng, shape=(6, 7, 8)):
    return rng.integers(0, 100, size=shape).astype(np.uint16)


@pytest.fixture
def good_inputs(tmp_path, rng):
    """Three readable volumes; two share a file name in different folders."""
    for folder, name in (("a", "scan.npy"), ("b", "scan.npy"), ("b", "scan2.npy")):
        (tmp_path / folder).mkdir(exist_ok=True)
        np.save(tmp_path / folder / name, _volume(rng))
    return [tmp_path / "a", tmp_path / "b"]


@pytest.fixture
def standin_log(tmp_path, monkeypatch):
    log = tmp_path / "calls.log"
    monkeypatch.setenv("CAVITAS_STANDIN_LOG", str(log))
    return log


def _events(log: Path, event: str) -> list[str]:
    if not log.exists():
        return []
    return [line.split()[1] for line in log.read_text().splitlines()
            if line.split()[0] == event]


def test_expand_inputs_files_folders_globs(tmp_path):
    for name in ("s10.tif", "s2.tif", "s1.nii.gz", ".hidden.tif", "notes.txt"):
        (tmp_path / name).write_bytes(b"x")
    (tmp_path / "sub").mkdir()
    (tmp_path / "sub" / "s3.tif").write_bytes(b"x")
    (tmp_path / "vol.zarr").mkdir()
    (tmp_path / "vol.zarr" / "zarr.json").write_text("{}")
    found = expand_inputs([tmp_path, str(tmp_path / "sub" / "*.tif"), tmp_path / "s2.tif"])
    # natural order, each file once, a Zarr store is one input, hidden/unknown files skipped
    assert [i.path.name for i in found] == ["s1.nii.gz", "s2.tif", "s10.tif", "s3.tif",
                                            "vol.zarr"]
    assert len({i.name for i in found}) == len(found)
    with pytest.raises(InputFileError, match="does not exist"):
        expand_inputs([tmp_path / "missing.tif"])
    missing: list[str] = []
    assert expand_inputs([tmp_path / "s2.tif", tmp_path / "gone.tif"], missing=missing)
    assert missing == [str(tmp_path / "gone.tif")]
    with pytest.raises(ParameterError, match="No input files"):
        expand_inputs([str(tmp_path / "*.png")])


def test_output_names_never_collide_and_are_stable(tmp_path):
    a, b = tmp_path / "x" / "scan.tif", tmp_path / "y" / "scan.tif"
    assert output_name(a) != output_name(b)
    assert output_name(a) == output_name(str(a))
    assert output_name(tmp_path / "odd name!.tif").startswith("odd_name-")


def test_batch_writes_one_folder_per_input_and_combined_tables(tmp_path, good_inputs,
                                                               standin_log):
    out = run_batch(good_inputs, tmp_path / "out", {"level": 50}, jobs=2, progress=False,
                    worker=STANDIN)
    assert out.exit_code == 0
    assert [r["status"] for r in out.results] == ["done"] * 3
    folders = sorted(p.name for p in (tmp_path / "out").iterdir() if p.is_dir())
    assert len(folders) == 3 and len(set(folders)) == 3
    for result in out.results:
        record = json.loads((tmp_path / "out" / result["name"] / DONE_NAME).read_text())
        assert record["params"] == {"level": 50} and record["input"] == result["input"]
    summary = Table.from_csv(out.files["summary.csv"])
    assert summary["status"].tolist() == ["done"] * 3
    combined = Table.from_csv(out.files["regions.csv"])
    per_input = [Table.from_csv(tmp_path / "out" / r["name"] / "regions.csv") for r in
                 out.results]
    assert len(combined) == sum(len(t) for t in per_input)
    assert summary["regions"].tolist() == [len(t) for t in per_input]
    for result, table in zip(out.results, per_input, strict=True):
        rows = combined["source"] == result["input"]
        assert np.array_equal(combined["volume"][rows], table["volume"])
    page = out.files["index.html"].read_text()
    assert "research use only" in page and all(r["name"] in page for r in out.results)


def test_failing_inputs_are_recorded_and_the_rest_goes_on(tmp_path, rng, standin_log):
    folder = tmp_path / "in"
    folder.mkdir()
    np.save(folder / "good1.npy", _volume(rng))
    np.save(folder / "good2.npy", _volume(rng, (9, 9)))
    np.save(folder / "four_d.npy", np.zeros((2, 3, 4, 5), np.uint8))
    (folder / "empty.npy").write_bytes(b"")
    (folder / "corrupt.npy").write_bytes(rng.bytes(300))
    out = run_batch([folder], tmp_path / "out", jobs=2, progress=False, worker=STANDIN)
    status = {Path(r["input"]).name: r for r in out.results}
    assert out.exit_code == 1
    assert {n for n, r in status.items() if r["status"] == "done"} == {"good1.npy",
                                                                       "good2.npy"}
    for name in ("four_d.npy", "empty.npy", "corrupt.npy"):
        error = status[name]["error"]
        assert status[name]["status"] == "failed" and name in error
        assert error.count(". ") == 0 and error.endswith(".")  # one sentence
    summary = Table.from_csv(out.files["summary.csv"])
    assert sorted(summary["status"].tolist()) == ["done"] * 2 + ["failed"] * 3
    assert not any(p.name.startswith(".") and "partial" in p.name
                   for p in (tmp_path / "out").iterdir())


def test_rerun_skips_complete_inputs_and_needs_force_for_changes(tmp_path, good_inputs,
                                                                 standin_log):
    first = run_batch(good_inputs, tmp_path / "out", {"level": 50}, jobs=1, progress=False,
                      worker=STANDIN)
    done = {r["name"]: (tmp_path / "out" / r["name"] / DONE_NAME).stat().st_mtime_ns
            for r in first.results}
    again = run_batch(good_inputs, tmp_path / "out", {"level": 50}, jobs=1, progress=False,
                      worker=STANDIN)
    assert [r["status"] for r in again.results] == ["reused"] * 3
    assert again.files["summary.csv"].exists()
    assert {n: (tmp_path / "out" / n / DONE_NAME).stat().st_mtime_ns for n in done} == done
    assert len(_events(standin_log, "start")) == 3  # nothing was run twice
    # other parameters: existing outputs are kept unless forced
    other = run_batch(good_inputs, tmp_path / "out", {"level": 60}, jobs=1, progress=False,
                      worker=STANDIN)
    assert other.exit_code == 1 and "other parameters" in other.failed[0]["error"]
    forced = run_batch(good_inputs, tmp_path / "out", {"level": 60}, jobs=1, force=True,
                       progress=False, worker=STANDIN)
    assert [r["status"] for r in forced.results] == ["done"] * 3
    # a changed input is detected by its checksum
    np.save(good_inputs[0] / "scan.npy", np.ones((4, 4), np.uint16))
    changed = run_batch(good_inputs, tmp_path / "out", {"level": 60}, jobs=1,
                        progress=False, worker=STANDIN)
    assert [r["status"] for r in changed.results] == ["failed", "reused", "reused"]
    assert "changed" in changed.results[0]["error"]


def test_a_killed_worker_fails_only_its_input(tmp_path, rng, standin_log):
    folder = tmp_path / "in"
    folder.mkdir()
    for name in ("a.npy", "die.npy", "z.npy"):
        np.save(folder / name, _volume(rng))
    out = run_batch([folder], tmp_path / "out", jobs=2, progress=False, worker=STANDIN)
    status = {Path(r["input"]).name: r for r in out.results}
    assert [status[n]["status"] for n in ("a.npy", "die.npy", "z.npy")] == ["done", "failed",
                                                                         "done"]
    assert "killed by signal 9" in status["die.npy"]["error"]
    assert not (tmp_path / "out" / status["die.npy"]["name"]).exists()
    assert not [p for p in (tmp_path / "out").iterdir() if "partial" in p.name]


def test_memory_budget_runs_large_inputs_one_at_a_time(tmp_path, rng, standin_log,
                                                       monkeypatch):
    monkeypatch.setenv("CAVITAS_STANDIN_SLEEP", "0.2")
    tasks = []
    for i in range(3):
        np.save(tmp_path / f"v{i}.npy", _volume(rng))
        tasks.append(Task(path=str(tmp_path / f"v{i}.npy"), name=f"v{i}",
                          root=str(tmp_path / "out"), params={}, worker=STANDIN))
    seen = []
    budget = WORKER_BASE_BYTES + 15  # room for one worker with a 10-byte task, not two
    results = run_local(tasks, jobs=3, estimates=[10, 10, 10], budget=budget,
                        on_result=seen.append)
    assert [r["status"] for r in results] == ["done"] * 3 and len(seen) == 3
    # one worker at a time: each start follows the previous finish in the log
    events = [line.split()[0] for line in standin_log.read_text().splitlines()]
    assert events == ["start", "finish"] * 3


def test_estimates_grow_when_workers_need_more(tmp_path, rng, monkeypatch, caplog):
    monkeypatch.setattr(_local, "WORKER_BASE_BYTES", 0)
    monkeypatch.setattr(_local, "LEARN_ABOVE_BYTES", 0)
    np.save(tmp_path / "v.npy", _volume(rng))
    task = Task(path=str(tmp_path / "v.npy"), name="v", root=str(tmp_path / "out"),
                params={}, worker=STANDIN)
    with caplog.at_level("INFO", logger="cavitas.batch._local"):
        run_local([task], jobs=1, estimates=[1], budget=None, on_result=lambda r: None)
    assert "scaling estimates" in caplog.text  # a worker surely needs more than 1 byte


def test_outputs_of_something_else_need_force(tmp_path, good_inputs):
    (tmp_path / "out").mkdir()
    (tmp_path / "out" / "regions.csv").write_text("mine\n")
    with pytest.raises(OutputError, match="--force"):
        run_batch(good_inputs, tmp_path / "out", progress=False, worker=STANDIN)
    assert (tmp_path / "out" / "regions.csv").read_text() == "mine\n"


def test_outputs_are_never_taken_as_inputs(tmp_path, good_inputs, standin_log):
    pattern = str(tmp_path / "**" / "*.npy")  # also matches the labels.npy written below
    first = run_batch([pattern], tmp_path / "out", jobs=1, progress=False, worker=STANDIN)
    again = run_batch([pattern], tmp_path / "out", jobs=1, progress=False, worker=STANDIN)
    assert len(first.results) == len(again.results) == 3
    assert [r["status"] for r in again.results] == ["reused"] * 3


def test_jobs_must_be_positive(tmp_path, good_inputs):
    with pytest.raises(ParameterError, match="jobs must be a whole number"):
        run_batch(good_inputs, tmp_path / "out", jobs=0, worker=STANDIN)


_DRIVER = textwrap.dedent("""
    import sys
    sys.path.insert(0, {here!r})
    from cavitas.batch import run_batch
    try:
        out = run_batch([{src!r}], {out!r}, jobs=2, progress=False,
                        worker="batch_standin:segment")
    except KeyboardInterrupt:
        sys.exit(130)
    sys.exit(out.exit_code)
""")


@pytest.mark.slow
@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGKILL],
                         ids=["SIGINT", "SIGKILL"])
def test_interrupted_batch_resumes_without_loss_or_repeats(tmp_path, rng, sig):
    src, out, log = tmp_path / "in", tmp_path / "out", tmp_path / "calls.log"
    src.mkdir()
    for i in range(8):
        np.save(src / f"v{i}.npy", _volume(rng))
    env = {**os.environ, "CAVITAS_STANDIN_LOG": str(log), "CAVITAS_STANDIN_SLEEP": "0.4"}
    script = _DRIVER.format(here=str(HERE), src=str(src), out=str(out))
    # a shell's background job inherits SIGINT ignored, and Python then never raises
    # KeyboardInterrupt: the child gets the default disposition back, as from a terminal
    proc = subprocess.Popen([sys.executable, "-c", script], env=env,
                            preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL))
    deadline = time.monotonic() + 60
    while len(list(out.glob(f"*/{DONE_NAME}"))) < 2 and time.monotonic() < deadline:
        time.sleep(0.05)
    proc.send_signal(sig)
    code = proc.wait(timeout=30)
    assert code == (130 if sig == signal.SIGINT else -signal.SIGKILL)
    time.sleep(0.3)  # let workers that lost their parent finish dying
    complete = {p.parent.name: p.stat().st_mtime_ns for p in out.glob(f"*/{DONE_NAME}")}
    assert 2 <= len(complete) < 8
    # every folder under its final name is complete; unfinished work is hidden staging
    assert {p.name for p in out.iterdir() if p.is_dir() and not p.name.startswith(".")} \
        == set(complete)
    if sig == signal.SIGINT:
        assert not [p for p in out.iterdir() if "partial" in p.name]
    finished_before = _events(log, "finish")

    env["CAVITAS_STANDIN_SLEEP"] = "0"
    again = subprocess.run([sys.executable, "-c", script], env=env, timeout=120)
    assert again.returncode == 0
    batch = json.loads((out / "batch.json").read_text())
    status = {i["name"]: i["status"] for i in batch["inputs"]}
    assert len(status) == 8 and set(status.values()) <= {"done", "reused"}
    assert {n for n, s in status.items() if s == "reused"} == set(complete)
    for name, mtime in complete.items():  # nothing complete was redone
        assert (out / name / DONE_NAME).stat().st_mtime_ns == mtime
    finished = _events(log, "finish")
    assert sorted(set(finished)) == [f"v{i}.npy" for i in range(8)]  # nothing lost
    redone = [n for n in finished[len(finished_before):] if n in finished_before]
    assert redone == []
    assert len([p for p in out.iterdir() if p.is_dir()]) == 8  # no duplicates, no leftovers
    combined = Table.from_csv(out / "regions.csv")
    pairs = list(zip(combined["source"].tolist(), combined["label"].tolist(), strict=True))
    assert len(pairs) == len(set(pairs))


def test_combined_table_keeps_mixed_units_apart_and_index_links_reports(tmp_path):
    from cavitas.batch._index import index_html
    from cavitas.batch._summary import combined_regions, summary_table

    rows = []
    for name, unit in (("a-1", "µm³"), ("b-2", "mm³")):
        (tmp_path / name).mkdir()
        Table({"label": [1, 2], "volume": [1.5, 2.5]}, units={"volume": unit}).to_csv(
            tmp_path / name / "regions.csv")
        rows.append({"input": f"/d/{name}.tif", "name": name, "status": "done",
                     "seconds": 1.0, "error": "", "summary": {"regions": 2}})
    table = combined_regions(rows, tmp_path)
    assert table.header() == ["source", "output", "label", "volume", "volume unit"]
    assert table["volume unit"].tolist() == ["µm³", "µm³", "mm³", "mm³"]
    (tmp_path / "b-2" / "report.html").write_text("<html></html>")
    page = index_html(summary_table(rows), root=tmp_path, params={}, version="0",
                      tables={})
    assert 'href="b-2/report.html"' in page and 'href="a-1/report.html"' not in page
