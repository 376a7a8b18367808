"""``cavitas segment`` and :func:`cavitas.workflow.segment_file`: outputs, geometry, errors."""

import base64
import json

import numpy as np
import pytest

from cavitas import RESEARCH_ONLY
from cavitas._table import Table
from cavitas.cli import main
from cavitas.io import read, write
from cavitas.segment import SegmentParams
from cavitas.workflow import RunOptions, segment_file


def _rings():
    """Two square rings side by side and one ring inside another (hand-made geometry)."""
    img = np.zeros((40, 40), np.uint16)
    img[3:17, 3:17] = 200
    img[5:15, 5:15] = 10
    img[3:17, 20:34] = 200
    img[5:15, 22:32] = 10
    img[20:38, 3:37] = 200
    img[22:36, 5:35] = 10
    img[25:33, 15:25] = 200
    img[27:31, 17:23] = 10
    return img


@pytest.fixture
def scan(tmp_path):
    path = tmp_path / "rings.tif"
    write(path, _rings(), spacing=(0.5, 0.5))
    return path


def test_segment_command_writes_every_output(scan, tmp_path, capsys):
    out = tmp_path / "out"
    code = main(["segment", str(scan), "-o", str(out), "--min-persistence", "50",
                 "--shells", "--enclosures", "-q"])
    assert code == 0
    labels = read(out / "labels.tif")
    assert labels.spacing == (0.5, 0.5) and labels.dtype == np.int32
    assert int(np.asarray(labels.data).max()) == 4
    regions = Table.from_csv(out / "regions.csv")
    assert (regions["kind"] == "chamber").sum() == 4
    nested = regions["parent"][regions["kind"] == "chamber"]
    small, host = np.asarray(labels.data)[29, 20], np.asarray(labels.data)[23, 10]
    assert sorted(nested.tolist()) == [0, 0, 0, host]  # the small ring sits inside the big
    assert regions["parent"][regions["label"] == small][0] == host
    diagram = Table.from_csv(out / "diagram.csv")
    assert diagram["kept"].sum() == 4
    record = json.loads((out / "run.json").read_text(encoding="utf-8"))
    assert record["caution"] == RESEARCH_ONLY
    assert len(record["input_sha256"]) == 64
    assert record["parameters"]["min_persistence"] == 50.0
    assert (out / "shells.tif").exists() and (out / "enclosures.tif").exists()
    drawn = (out / "diagram.png").read_bytes()
    assert drawn[:4] == b"\x89PNG"
    # the report shows this very picture (drawn once), titled with the scale it is of
    page = (out / "report.html").read_text(encoding="utf-8")
    assert base64.b64encode(drawn).decode("ascii") in page
    assert "Persistence diagram on the image without smoothing" in page


def test_summary_and_caution_are_printed(scan, tmp_path, capsys):
    assert main(["segment", str(scan), "-o", str(tmp_path / "o"), "--min-persistence",
                 "50"]) == 0
    printed = capsys.readouterr().out
    assert "4 regions found" in printed and RESEARCH_ONLY in printed
    # a hand threshold never changes the scale silently: the summary says where it applies
    assert "given by hand and applies to the image without smoothing" in printed
    record = json.loads((tmp_path / "o" / "run.json").read_text(encoding="utf-8"))
    assert record["parameters"]["smooth_sigma"] == 0.0
    assert record["parameters"]["scale_basis"] == "none"


def test_existing_output_needs_force(scan, tmp_path, capsys):
    args = ["segment", str(scan), "-o", str(tmp_path / "o"), "--min-persistence", "50", "-q"]
    assert main(args) == 0
    assert main(args) == 4  # OutputError: exists without --force
    assert "force" in capsys.readouterr().err
    assert main(args + ["--force"]) == 0


@pytest.mark.parametrize("extra", [["--level-fraction", "0.5"],
                                   ["--region", "breach", "--level-fraction", "2"],
                                   ["--min-volume", "9", "--max-volume", "3"]])
def test_bad_options_exit_2(scan, tmp_path, extra, capsys):
    assert main(["segment", str(scan), "-o", str(tmp_path / "o"), *extra]) == 2
    assert not (tmp_path / "o" / "labels.tif").exists()


def test_params_file_and_overrides(scan, tmp_path):
    toml = tmp_path / "p.toml"
    toml.write_text("[segment]\nmin_persistence = 50.0\ntop = 1\n", encoding="utf-8")
    out = tmp_path / "o"
    assert main(["segment", str(scan), "-o", str(out), "--params", str(toml), "--top", "2",
                 "-q"]) == 0
    assert int(np.asarray(read(out / "labels.tif").data).max()) == 2


def test_nothing_selected_writes_empty_outputs(tmp_path):
    path = tmp_path / "flat.tif"
    write(path, np.zeros((16, 16), np.uint8))
    summary = segment_file(path, tmp_path / "o", SegmentParams(), progress=False)
    assert summary["regions"] == 0 and "no region" in summary["message"]
    assert np.asarray(read(tmp_path / "o" / "labels.tif").data).max() == 0


def test_mask_makes_the_roi_border_an_outside(scan, tmp_path):
    roi = np.ones((40, 40), np.uint8)
    roi[:, :10] = 0  # cuts the first ring open
    write(tmp_path / "roi.tif", roi)
    summary = segment_file(scan, tmp_path / "o", SegmentParams(min_persistence=50.0),
                           options=RunOptions(mask=str(tmp_path / "roi.tif")), progress=False)
    # The ROI's edge cuts the first ring and the big one open; the second ring and the
    # small ring inside the big one stay enclosed.
    assert summary["regions"] == 2
    regions = Table.from_csv(tmp_path / "o" / "regions.csv")
    cut = regions["kind"] == "cut"
    assert cut.sum() >= 2 and regions["touches_border"][cut].all()


def test_mesh_option_writes_one_file_per_chamber(tmp_path):
    vol = np.zeros((16, 16, 16), np.float32)
    vol[2:14, 2:14, 2:14] = 1
    vol[4:12, 4:12, 4:12] = 0
    path = tmp_path / "box.npy"
    np.save(path, vol)
    segment_file(path, tmp_path / "o", SegmentParams(min_persistence=0.5),
                 options=RunOptions(mesh="stl"), progress=False)
    assert len(list((tmp_path / "o" / "meshes").glob("*.stl"))) == 1


def test_help_teaches(capsys):
    assert main(["segment", "--help"]) == 0
    text = capsys.readouterr().out
    assert "examples:" in text and "--min-persistence" in text and RESEARCH_ONLY[:20] in text
