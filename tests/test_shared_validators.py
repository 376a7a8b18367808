"""Every stage checks spacing, shape, walls and finiteness with one shared validator
(``cavitas/_checks.py``), so each entry point refuses the same fault with the same sentence.

The expected sentences follow the project's error convention (DEVELOPERS.md: one sentence
naming the parameter, listed in ``parameters`` for the command line); common practice, no
outside reference value is involved.
"""

from __future__ import annotations

import numpy as np
import pytest

from cavitas import InputFileError, ParameterError, Volume, _checks
from cavitas._run_options import ReadOptions
from cavitas.cubical import Diagram, cavity_sweep, euler_curve, persistence
from cavitas.io import check_finite, read
from cavitas.measure import measure_regions
from cavitas.report._html import write_report
from cavitas.scenes import foam
from cavitas.segment import SegmentParams, segment

BAD_SPACING = (1.0, 0.0)


def _refusal(call) -> ParameterError | InputFileError:
    with pytest.raises((ParameterError, InputFileError)) as caught:
        call()
    return caught.value


def test_every_stage_refuses_a_bad_spacing_with_one_sentence(tmp_path):
    np.save(tmp_path / "a.npy", np.zeros((4, 5), np.uint8))
    image = np.zeros((4, 5), np.uint8)
    entries = {
        "io.read": lambda: read(tmp_path / "a.npy", spacing=BAD_SPACING),
        "Volume": lambda: Volume(image, spacing=BAD_SPACING),
        "measure": lambda: measure_regions(image, spacing=BAD_SPACING),
        "scenes": lambda: foam((16, 16), spacing=BAD_SPACING),
        "report": lambda: write_report(tmp_path / "r.html", image=image, labels=image,
                                       spacing=BAD_SPACING, unit="µm", regions=None,
                                       params={}, figures={}),
        "reading options": lambda: ReadOptions(spacing=BAD_SPACING),
    }
    expected = _refusal(lambda: _checks.spacing(BAD_SPACING))
    for stage, call in entries.items():
        refused = _refusal(call)
        assert (type(refused), str(refused), refused.parameters) == (
            ParameterError, str(expected), ("spacing",)), stage


def test_every_stage_refuses_a_spacing_of_the_wrong_length_alike(tmp_path):
    image = np.zeros((2, 4, 5), np.uint8)
    np.save(tmp_path / "a.npy", image)
    expected = str(_refusal(lambda: _checks.spacing((1.0, 1.0), 3)))
    assert "one value per axis (3" in expected
    for call in (lambda: read(tmp_path / "a.npy", spacing=(1.0, 1.0)),
                 lambda: Volume(image, spacing=(1.0, 1.0)),
                 lambda: measure_regions(image, spacing=(1.0, 1.0))):
        assert str(_refusal(call)) == expected


def test_every_stage_refuses_a_bad_walls_with_one_sentence():
    image = np.zeros((4, 5), np.uint8)
    entries = {
        "persistence": lambda: persistence(image, walls="grey"),
        "cavity_sweep": lambda: cavity_sweep(image, walls="grey"),
        "euler_curve": lambda: euler_curve(image, walls="grey"),
        "Diagram": lambda: Diagram({}, shape=(4, 5), walls="grey", connectivity=1),
        "segment": lambda: SegmentParams(walls="grey"),
        "scenes": lambda: foam((16, 16), walls="grey"),
    }
    for stage, call in entries.items():
        refused = _refusal(call)
        assert (str(refused), refused.parameters) == (
            "walls must be 'bright' or 'dark'; got 'grey'.", ("walls",)), stage


def test_raw_shape_and_reading_options_share_the_shape_check(tmp_path):
    (tmp_path / "a.raw").write_bytes(bytes(20))
    expected = str(_refusal(lambda: _checks.shape((4, 0))))
    assert str(_refusal(lambda: read(tmp_path / "a.raw", shape=(4, 0), dtype="uint8"))) \
        == expected
    assert str(_refusal(lambda: ReadOptions(shape=(4, 0)))) == expected


@pytest.mark.parametrize("masked", [False, True])
def test_every_stage_refuses_nonfinite_values_alike(masked):
    image = np.zeros((6, 7), np.float32)
    image[2, 3] = np.nan
    mask = np.ones(image.shape, bool) if masked else None
    vol = Volume(image, source="holes.npy")
    expected = str(_refusal(lambda: _checks.refuse_nonfinite(1, image="'holes.npy'",
                                                             masked=masked)))
    assert str(_refusal(lambda: segment(vol, mask=mask))) == expected
    assert str(_refusal(lambda: persistence(vol, mask=mask))) == expected
    engine = str(_refusal(lambda: persistence(image, mask=mask)))  # an array has no name
    assert engine == expected.replace("'holes.npy'", "image")
    if not masked:
        assert str(_refusal(lambda: check_finite(vol))).replace(" out of 42", "") == expected
