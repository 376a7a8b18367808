"""Folders and glob patterns of 2D slices: natural order, consistency, pixel size.

Slices are written with tifffile and Pillow (general-purpose libraries) and their contents
encode their index, so the order read back is checked directly (common practice)."""

import numpy as np
import pytest
import tifffile
from PIL import Image

from cavitas._errors import InputFileError
from cavitas.io import read
from cavitas.io._slices import natural_key


def _write_slices(folder, count, suffix=".tif"):
    folder.mkdir()
    for index in range(1, count + 1):
        plane = np.full((4, 5), index, dtype=np.uint8)
        if suffix == ".png":
            Image.fromarray(plane).save(folder / f"slice_{index}.png")
        else:
            tifffile.imwrite(folder / f"slice_{index}{suffix}", plane,
                             resolution=(2000.0, 2000.0), resolutionunit=3)  # 5 µm pixels
    return folder


def test_natural_sort_key():
    # common practice: numbers inside names compare by value
    names = ["slice_10.tif", "slice_2.tif", "Slice_1.tif", "slice_1b.tif"]
    assert sorted(names, key=natural_key) == ["Slice_1.tif", "slice_1b.tif", "slice_2.tif",
                                              "slice_10.tif"]


@pytest.mark.parametrize("suffix", [".tif", ".png"])
def test_folder_is_stacked_in_natural_order(tmp_path, suffix):
    folder = _write_slices(tmp_path / "stack", 12, suffix)
    (folder / "notes.txt").write_text("ignored")
    (folder / ".hidden.tif").write_bytes(b"ignored")
    vol = read(folder)
    assert vol.shape == (12, 4, 5)
    assert [int(plane[0, 0]) for plane in np.asarray(vol.data)] == list(range(1, 13))
    if suffix == ".tif":  # pixel size from the resolution tags, z assumed equal (warned)
        assert vol.spacing == pytest.approx((5.0, 5.0, 5.0)) and vol.unit == "µm"
        assert any("slice distance" in w for w in vol.meta["warnings"])


def test_glob_pattern(tmp_path):
    folder = _write_slices(tmp_path / "stack", 11)
    vol = read(str(folder / "slice_1*.tif"))  # 1, 10, 11
    assert [int(p[0, 0]) for p in np.asarray(vol.data)] == [1, 10, 11]


def test_odd_slice_is_named(tmp_path):
    folder = _write_slices(tmp_path / "stack", 3)
    tifffile.imwrite(folder / "slice_4.tif", np.zeros((4, 6), np.uint8))
    with pytest.raises(InputFileError, match=r"slice_4\.tif.*\(4, 6\).*slice_1\.tif"):
        read(folder)


def test_empty_folder_and_pattern(tmp_path):
    (tmp_path / "empty").mkdir()
    with pytest.raises(InputFileError, match=r"empty' holds no slice files"):
        read(tmp_path / "empty")
    with pytest.raises(InputFileError, match=r"matches no slice files"):
        read(str(tmp_path / "nothing_*.tif"))


def test_16_bit_png_keeps_its_type(tmp_path):
    # source: Pillow stores a uint16 array as a 16-bit grey PNG (mode 'I;16')
    plane = (np.arange(20, dtype=np.uint16) * 3000).reshape(4, 5)
    Image.fromarray(plane).save(tmp_path / "deep.png")
    vol = read(tmp_path / "deep.png")
    assert vol.dtype == np.uint16
    np.testing.assert_array_equal(np.asarray(vol.data), plane)
