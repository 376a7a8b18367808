"""The batch's distance of every input to a reference scan (``--reference``).

The inputs are hand-made rings whose diagrams follow from the definition of the
superlevel filtration: a ring of level 9 around an inside of level c has H0 = {(9, -inf)}
and H1 = {(9, c)}. Bottleneck distances by hand (Cohen-Steiner, Edelsbrunner & Harer
2007: L∞ between points, half the persistence to the diagonal): (9,2)-(9,5) is 3,
(9,2)-(9,8) is 3.5 (both to the diagonal), (9,5)-(9,8) is 2; H0 always 0. The worker is the
stand-in of tests/batch_standin.py: the distances are computed by the batch process.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np
import pytest

from cavitas._errors import InputFileError
from cavitas._table import Table
from cavitas.batch import run_batch
from cavitas.batch._reference import add_reference_distances, reference_source
from cavitas.cli import main
from cavitas.cubical import persistence

sys.path.insert(0, str(Path(__file__).resolve().parent))  # workers import the stand-in
STANDIN = "batch_standin:segment"


def ring(inside):
    image = np.zeros((9, 9), np.float32)
    image[2:7, 2:7] = 9.0
    image[3:6, 3:6] = inside
    return image


@pytest.fixture
def rings(tmp_path):
    folder = tmp_path / "in"
    folder.mkdir()
    for name, inside in (("a", 2.0), ("b", 5.0), ("c", 8.0)):
        np.save(folder / f"{name}.npy", ring(inside))
    return folder


def test_distances_to_the_reference_by_hand(tmp_path, rings):
    out = tmp_path / "out"
    first = run_batch([rings], out, jobs=1, progress=False, worker=STANDIN,
                      reference=rings / "a.npy")
    assert [r["status"] for r in first.results] == ["done"] * 3
    table = Table.from_csv(out / "summary.csv")
    assert table["to_reference_H1"].tolist() == [0.0, 3.0, 3.5]
    assert table["to_reference_H0"].tolist() == [0.0, 0.0, 0.0]
    assert json.loads((out / "batch.json").read_text())["reference"] == str(rings / "a.npy")
    assert "to reference H1 [intensity]" in (out / "index.html").read_text(encoding="utf-8")


def test_the_reference_is_compared_after_the_inputs(rings):
    # the batch process adds the distances to finished results (done or reused alike)
    # and leaves failed ones alone, so a new reference never makes an input run again
    results = [{"input": str(rings / f"{n}.npy"), "status": s, "summary": {"regions": 1}}
               for n, s in (("a", "reused"), ("b", "failed"), ("c", "done"))]
    add_reference_distances(results, reference_source(str(rings / "c.npy"), None, None, None),
                            None, None, None)
    assert [r["summary"].get("to_reference_H1") for r in results] == [3.5, None, 0.0]
    assert results[0]["summary"]["regions"] == 1


def test_a_bad_reference_fails_before_the_inputs_run(tmp_path, rings, capsys):
    out = tmp_path / "out"
    with pytest.raises(InputFileError, match="missing.npy"):
        run_batch([rings], out, jobs=1, progress=False, worker=STANDIN,
                  reference=tmp_path / "missing.npy")
    assert not (out / "summary.csv").exists()
    dark = tmp_path / "dark.npz"
    persistence(ring(2.0), walls="dark").save(dark)
    assert main(["batch", str(rings), "-o", str(out), "--reference", str(dark)]) == 3
    err = capsys.readouterr().err
    assert "dark.npz" in err and "--walls" in err
