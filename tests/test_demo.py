"""The demo: the whole job on the bundled samples, scored against their ground truth.

The samples are invented scenes of our own (sample_volumes/README.md); this is a smoke and
regression test of the end-to-end job, not a validation. The floors below are the figures
stated in the README's demo section (keep them in step).
"""

import json

import pytest

from cavitas.cli import main

#: sample -> (least share of enclosed truth cells found at Dice >= 0.7, least median Dice,
#: most spurious regions in percent), as stated in README.md ("Set-up: two commands").
FLOORS = {
    "cell_sheet": (0.97, 0.95, 1.0),
    "capsules": (0.97, 0.92, 1.0),
    "foam": (0.97, 0.93, 1.0),
}


@pytest.mark.slow
def test_demo_runs_every_sample_and_meets_the_stated_figures(tmp_path, capsys):
    out = tmp_path / "demo"
    assert main(["demo", "--out", str(out), "--no-report"]) == 0
    printed = capsys.readouterr().out
    assert "For research use only" in printed
    record = json.loads((out / "demo.json").read_text(encoding="utf-8"))
    assert set(record["samples"]) == set(FLOORS)
    for name, (found, dice, spurious) in FLOORS.items():
        score = record["samples"][name]["score"]
        assert score["found"] >= found * score["reference_regions"], name
        assert score["median_dice"] >= dice, name
        assert score["spurious_percent"] <= spurious, name
        assert (out / name / "regions.csv").is_file()
    # a second run without --force refuses before doing any work (exit 4: output exists)
    assert main(["demo", "--out", str(out), "--no-report", "-q"]) == 4
