"""``cavitas batch`` with the real worker (``segment_file``), through the command line.

Volumes are invented (hollow bright boxes on a dark background with a little noise):
regression data for the batch machinery, not check values for the segmentation. The
checks compare a batch with single ``segment_file`` runs (same code path expected to give
identical files) and the failure handling with what the readers report (tifffile/numpy
write the good and the 4D files).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import tifffile

from cavitas._table import Table
from cavitas.cli import main
from cavitas.segment import SegmentParams
from cavitas.workflow import Settings, segment_file


def _boxes(rng, ndim, dtype):
    """Invented scan: two bright hollow boxes (walls 2 voxels) on a dark noisy background."""
    shape = (16, 24, 24)[-ndim:]
    image = np.full(shape, 40.0)
    for lo, hi in ((2, 11), (12, 22)):
        box = tuple(slice(2, 14) if ax == 0 and ndim == 3 else slice(lo, hi)
                    for ax in range(ndim))
        inner = tuple(slice(s.start + 2, s.stop - 2) for s in box)
        image[box] = 200.0
        image[inner] = 40.0
    image += rng.normal(0, 3, shape)
    return image.clip(0, 255).astype(dtype)


@pytest.fixture
def folder(tmp_path, rng):
    src = tmp_path / "in"
    (src / "sub").mkdir(parents=True)
    tifffile.imwrite(src / "a3.tif", _boxes(rng, 3, np.uint16))
    tifffile.imwrite(src / "b2.tif", _boxes(rng, 2, np.uint8))
    np.save(src / "sub" / "c3.npy", _boxes(rng, 3, np.float32))
    return src


def _same_files(a, b):
    names = sorted(p.name for p in a.iterdir() if p.name not in ("run.json", "done.json"))
    assert names == sorted(p.name for p in b.iterdir() if p.name != "run.json")
    for name in names:
        if name.endswith(".csv"):
            assert (a / name).read_bytes() == (b / name).read_bytes(), name
        elif name.startswith("labels"):
            load = np.load if name.endswith(".npy") else tifffile.imread
            np.testing.assert_array_equal(load(a / name), load(b / name))
    ra, rb = json.loads((a / "run.json").read_text()), json.loads((b / "run.json").read_text())
    for record in (ra, rb):
        record["parameters"].pop("timings_s", None)  # wall-clock times differ run to run
    for key in ("input_sha256", "parameters", "cavitas_version", "summary", "spacing"):
        assert ra[key] == rb[key], key


@pytest.mark.slow
def test_batch_equals_single_segment_runs_file_by_file(tmp_path, folder, capsys):
    toml = tmp_path / "p.toml"
    toml.write_text('[segment]\nwalls = "bright"\nmin_persistence = 60.0\n')
    code = main(["batch", str(folder), str(folder / "sub"), "-o", str(tmp_path / "out"),
                 "--config", str(toml), "--jobs", "2", "-q"])
    assert code == 0
    batch = json.loads((tmp_path / "out" / "batch.json").read_text())
    settings = Settings.from_toml(toml)
    flat = {**settings.params.to_dict(), **settings.options.to_dict()}  # one namespace
    assert batch["params"] == json.loads(json.dumps(flat))
    regions = 0
    for item in batch["inputs"]:
        single = tmp_path / "single" / item["name"]
        summary = segment_file(item["input"], single, settings.params,
                               options=settings.options, progress=False)
        _same_files(tmp_path / "out" / item["name"], single)
        record = json.loads((tmp_path / "out" / item["name"] / "done.json").read_text())
        assert record["params"] == batch["params"]  # exact parameters recorded per input
        regions += summary["regions"] + summary["border_cut"] + summary["enclosures"]
    assert regions > 0
    combined = Table.from_csv(tmp_path / "out" / "regions.csv")
    assert len(combined) == regions
    # the same command again reuses everything
    assert main(["batch", str(folder), str(folder / "sub"), "-o", str(tmp_path / "out"),
                 "--params", str(toml), "-j", "1", "-q"]) == 0
    statuses = Table.from_csv(tmp_path / "out" / "summary.csv")["status"].tolist()
    assert statuses == ["reused"] * 3


@pytest.mark.slow
def test_bad_files_among_good_ones_fail_alone(tmp_path, folder, rng, capsys):
    tifffile.imwrite(folder / "four_d.tif", rng.integers(0, 9, (2, 3, 8, 8), np.uint8),
                     photometric="minisblack", metadata={"axes": "TCYX"})
    (folder / "empty.tif").write_bytes(b"")
    (folder / "corrupt.tif").write_bytes(b"II*\x00" + rng.bytes(200))
    code = main(["batch", str(folder), "-o", str(tmp_path / "out"), "-j", "2", "-q"])
    err = capsys.readouterr().err
    assert code == 1
    summary = {r["input"].rsplit("/", 1)[-1]: r
               for r in Table.from_csv(tmp_path / "out" / "summary.csv")}
    assert [summary[n]["status"] for n in ("a3.tif", "b2.tif")] == ["done", "done"]
    for name in ("four_d.tif", "empty.tif", "corrupt.tif"):
        assert summary[name]["status"] == "failed"
        line = next(x for x in err.splitlines() if name in x)
        assert line.startswith("cavitas batch: failed: ") and line.endswith(".")
        assert "internal error" not in summary[name]["error"]
    page = (tmp_path / "out" / "index.html").read_text()
    assert page.count('class="failed"') == 3


def test_batch_help_teaches(capsys):
    assert main(["batch", "--help"]) == 0
    text = capsys.readouterr().out
    assert "examples:" in text and "--jobs" in text and "--min-persistence" in text
    assert "research use only" in text


def test_the_batch_hashes_each_input_once(tmp_path, folder, monkeypatch):
    # The batch passes its checksum to segment_file instead of letting it hash the input
    # again; both records hold the same value (reference: hashlib.sha256 of the file).
    import hashlib

    import cavitas.batch._task as task_module
    import cavitas.workflow as workflow
    from cavitas.batch._task import Task, run_task

    calls = []
    real = task_module.input_checksum
    monkeypatch.setattr(task_module, "input_checksum", lambda p: calls.append(p) or real(p))
    monkeypatch.setattr(workflow, "input_checksum", lambda p: pytest.fail("hashed twice"))
    source = folder / "b2.tif"
    result = run_task(Task(path=str(source), name="b2", root=str(tmp_path / "out"),
                           params=SegmentParams()))
    assert result["status"] == "done", result["error"]
    assert calls == [str(source)]
    run = json.loads((tmp_path / "out" / "b2" / "run.json").read_text())
    done = json.loads((tmp_path / "out" / "b2" / "done.json").read_text())
    assert run["input_sha256"] == hashlib.sha256(source.read_bytes()).hexdigest()
    assert done["input_sha256"] == run["input_sha256"]


def _in_this_process(tasks, *, on_result, **_budget):
    """The local runner's job without worker processes (test helper)."""
    from cavitas.batch._task import run_task

    results = [run_task(task) for task in tasks]
    for result in results:
        on_result(result)
    return results


def test_no_report_writes_everything_but_the_report_pages(tmp_path, rng, monkeypatch):
    # Regression on invented data (the hollow boxes): with --no-report each input gets its
    # label map and tables and the batch its index, but no report.html; a later run
    # with reports does not reuse those folders silently.
    monkeypatch.setattr("cavitas.batch._local.run_local", _in_this_process)
    src = tmp_path / "in"
    src.mkdir()
    tifffile.imwrite(src / "b2.tif", _boxes(rng, 2, np.uint8))
    out = tmp_path / "out"
    assert main(["batch", str(src), "-o", str(out), "--no-report", "-q"]) == 0
    (folder,) = [p for p in out.iterdir() if p.is_dir()]
    written = {p.name for p in folder.iterdir()}
    assert {"labels.tif", "regions.csv", "run.json"} <= written
    assert "report.html" not in written and (out / "index.html").is_file()
    assert main(["batch", str(src), "-o", str(out), "-q"]) == 1
    assert main(["batch", str(src), "-o", str(out), "--force", "-q"]) == 0
    assert (folder / "report.html").is_file()
