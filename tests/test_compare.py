"""Region matching and Dice scores (cavitas.compare).

Reference: the Dice coefficient 2|A∩B| / (|A| + |B|) (Dice 1945), computed here plainly per
pair of regions with numpy as an independent check; border handling against
``skimage.segmentation.clear_border`` (general-purpose reference library).
"""

import numpy as np
import pytest
from skimage.segmentation import clear_border

from cavitas import ParameterError
from cavitas.cli import main
from cavitas.compare import border_labels, compare_labels
from cavitas.io import write


def _plain_dice(a, b):
    """Dice 1945, one pair of boolean masks."""
    return 2.0 * np.logical_and(a, b).sum() / (a.sum() + b.sum())


def _random_labels(rng, shape, n):
    seeds = rng.integers(0, n + 1, size=shape)
    return seeds


@pytest.mark.parametrize("ndim", [2, 3])
def test_dice_of_every_best_match_equals_the_plain_definition(rng, ndim):
    shape = (24, 24) if ndim == 2 else (10, 12, 12)
    truth = _random_labels(rng, shape, 6)
    pred = np.where(rng.random(shape) < 0.8, truth, rng.integers(0, 9, size=shape))
    table, summary = compare_labels(pred, truth)
    for row in table:
        t = truth == row["truth_label"]
        best = max(_plain_dice(t, pred == p) for p in np.unique(pred[pred > 0]))
        assert row["dice"] == pytest.approx(best)
        assert row["found"] == (best >= 0.7)
    assert summary["found"] == int(table["found"].sum())


def test_identical_maps_score_perfectly_with_other_label_numbers(rng):
    truth = _random_labels(rng, (30, 30), 5)
    relabelled = np.where(truth > 0, truth + 100, 0)
    _, summary = compare_labels(relabelled, truth)
    assert summary["found_percent"] == 100.0
    assert summary["median_dice"] == 1.0
    assert summary["spurious"] == 0


def test_a_split_region_is_missed_and_its_halves_spurious():
    truth = np.zeros((10, 20), int)
    truth[2:8, 2:18] = 1
    pred = np.zeros_like(truth)
    pred[2:8, 2:10], pred[2:8, 10:18] = 1, 2   # each half has Dice 2/3 < 0.7
    table, summary = compare_labels(pred, truth)
    assert table["dice"][0] == pytest.approx(2 / 3)
    assert summary["found"] == 0 and summary["spurious"] == 2


def test_border_labels_agree_with_clear_border(rng):
    labels = np.zeros((20, 20, 20), int)
    for label in range(1, 16):  # boxes at random places, some touching the border
        z, y, x = rng.integers(0, 17, size=3)
        labels[z:z + 3, y:y + 3, x:x + 3] = label
    # clear_border removes exactly the regions that touch the array border
    cleared = clear_border(labels)
    kept = np.unique(labels[labels > 0])
    expected = np.setdiff1d(kept, np.unique(cleared[cleared > 0]))
    assert border_labels(labels).tolist() == expected.tolist()
    assert 0 < len(expected) < len(kept)


def test_ignored_reference_regions_are_not_scored():
    truth = np.zeros((12, 12), int)
    truth[0:4, 0:4], truth[5:9, 5:9] = 1, 2
    pred = np.where(truth == 2, 7, 0)
    table, summary = compare_labels(pred, truth, ignore=border_labels(truth))
    assert table["truth_label"].tolist() == [2]
    assert summary["found_percent"] == 100.0


def test_bad_arguments_are_rejected():
    with pytest.raises(ParameterError, match="shape"):
        compare_labels(np.zeros((3, 3), int), np.zeros((3, 4), int))
    with pytest.raises(ParameterError, match="min_dice"):
        compare_labels(np.zeros((3, 3), int), np.zeros((3, 3), int), min_dice=0.5)
    with pytest.raises(ParameterError, match="integers"):
        compare_labels(np.zeros((3, 3)), np.zeros((3, 3), int))


def test_compare_command_prints_and_writes(tmp_path, capsys):
    truth = np.zeros((12, 12), np.int32)
    truth[2:6, 2:6], truth[7:11, 7:11] = 1, 2
    write(tmp_path / "truth.tif", truth)
    write(tmp_path / "pred.tif", np.where(truth == 1, 5, 0).astype(np.int32))
    code = main(["compare", str(tmp_path / "pred.tif"), str(tmp_path / "truth.tif"),
                 "-o", str(tmp_path / "scores.csv"), "--json"])
    assert code == 0
    out = capsys.readouterr().out
    assert '"found": 1' in out and '"reference_regions": 2' in out
    assert (tmp_path / "scores.csv").read_text(encoding="utf-8-sig").startswith(
        "truth_label,label,dice,found")
    # an existing table needs --force: exit code 4 (output problem)
    assert main(["compare", str(tmp_path / "pred.tif"), str(tmp_path / "truth.tif"),
                 "-o", str(tmp_path / "scores.csv")]) == 4
