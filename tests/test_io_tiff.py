"""TIFF specifics: ImageJ hyperstacks and OME-TIFF written here with tifffile (known axes,
spacing and unit), resolution tags, and the metadata cavitas writes.

Sources: tifffile (general-purpose reference library) writes the inputs and reads back
what cavitas wrote; the TIFF 6.0 specification defines ResolutionUnit (1 none, 2 inch,
3 centimetre) and resolution as pixels per unit.
"""

import json

import numpy as np
import pytest
import tifffile

from cavitas._caution import RESEARCH_ONLY
from cavitas._errors import InputFileError, ParameterError
from cavitas.io import read, write
from cavitas.io._units import normalise_unit


@pytest.fixture
def hyperstack(tmp_path, rng):
    """An ImageJ hyperstack T=2, Z=3, C=4 written by tifffile, 0.5 x 0.25 µm, z step 2.5."""
    data = rng.integers(0, 4096, size=(2, 3, 4, 5, 6), dtype=np.uint16)
    path = tmp_path / "hyper.tif"
    tifffile.imwrite(path, data, imagej=True, resolution=(1 / 0.25, 1 / 0.5),
                     metadata={"axes": "TZCYX", "spacing": 2.5, "unit": "micron"})
    return path, data


def test_imagej_hyperstack_channel_and_time(hyperstack):
    # source: tifffile writes the ImageJ hyperstack with these axes and calibration
    path, data = hyperstack
    vol = read(path, channel=2, time=1)
    np.testing.assert_array_equal(np.asarray(vol.data), data[1, :, 2])
    assert vol.spacing == (2.5, 0.5, 0.25)  # (z, y, x): size = 1 / (pixels per unit)
    assert vol.unit == "µm"  # 'micron' normalised
    assert vol.meta["axes"] == "TZCYX"
    assert (vol.meta["channel"], vol.meta["time"]) == (2, 1)


def test_hyperstack_without_choice_names_axes_and_option(hyperstack):
    path, _ = hyperstack
    with pytest.raises(InputFileError, match=r"hyper\.tif.*2 time point.*TZCYX.*time="):
        read(path)
    with pytest.raises(InputFileError, match=r"4 channel.*channel="):
        read(path, time=0)
    with pytest.raises(ParameterError, match=r"channel=4 is out of range.*0 to 3"):
        read(path, time=0, channel=4)


def test_ome_tiff_physical_sizes_and_units(tmp_path, rng):
    # source: OME-TIFF written by tifffile; OME schema: PhysicalSize*Unit, default µm
    data = rng.integers(0, 255, size=(3, 2, 4, 5, 6), dtype=np.uint8)
    path = tmp_path / "cells.ome.tif"
    tifffile.imwrite(path, data, ome=True, metadata={
        "axes": "TCZYX", "PhysicalSizeX": 0.5, "PhysicalSizeY": 0.25,
        "PhysicalSizeZ": 1500.0, "PhysicalSizeZUnit": "nm"})
    vol = read(path, channel=1, time=2)
    np.testing.assert_array_equal(np.asarray(vol.data), data[2, 1])
    assert vol.spacing == (1.5, 0.25, 0.5)  # 1500 nm = 1.5 µm
    assert vol.unit == "µm" and vol.meta["format"] == "OME-TIFF"


@pytest.mark.parametrize(("unit_code", "per_unit", "expected"), [
    (3, 2000.0, 5.0),        # 2000 pixels/cm -> 5 µm (TIFF 6.0 ResolutionUnit 3)
    (2, 5080.0, 5.0),        # 5080 pixels/inch -> 25400/5080 = 5 µm (ResolutionUnit 2)
])
def test_resolution_tags_in_physical_units(tmp_path, unit_code, per_unit, expected):
    path = tmp_path / "plain.tif"
    tifffile.imwrite(path, np.zeros((4, 5), np.uint8), resolution=(per_unit, per_unit),
                     resolutionunit=unit_code)
    vol = read(path)
    assert vol.spacing == (expected, expected) and vol.unit == "µm"


def test_stack_without_slice_distance_warns(tmp_path):
    path = tmp_path / "stack.tif"
    tifffile.imwrite(path, np.zeros((3, 4, 5), np.uint8), photometric="minisblack",
                     resolution=(1000.0, 1000.0), resolutionunit=3)  # 10 µm pixels
    vol = read(path)
    assert vol.spacing == (10.0, 10.0, 10.0)
    assert any("slice distance" in w for w in vol.meta["warnings"])


def test_ome_tiff_without_physical_sizes_has_no_unit(tmp_path):
    # OME-XML without PhysicalSize* attributes: nothing is known about the voxel size
    tifffile.imwrite(tmp_path / "bare.ome.tif", np.zeros((2, 3, 4), np.uint8), ome=True,
                     photometric="minisblack",
                     metadata={"axes": "ZYX"})
    vol = read(tmp_path / "bare.ome.tif")
    assert vol.unit == "voxel" and vol.spacing == (1.0, 1.0, 1.0)


def test_rgb_tiff_needs_a_channel(tmp_path, rng):
    # source: tifffile stores an (y, x, 3) uint8 array as RGB (axes 'YXS')
    data = rng.integers(0, 255, size=(6, 7, 3), dtype=np.uint8)
    tifffile.imwrite(tmp_path / "rgb.tif", data)
    with pytest.raises(InputFileError, match="channel="):
        read(tmp_path / "rgb.tif")
    np.testing.assert_array_equal(np.asarray(read(tmp_path / "rgb.tif", channel=1).data),
                                  data[..., 1])


def test_written_imagej_file_as_tifffile_sees_it(tmp_path, rng):
    # source: tifffile's reading of ImageJ metadata and resolution tags (what viewers use)
    data = rng.integers(0, 60000, size=(3, 4, 5), dtype=np.uint16)
    path = write(tmp_path / "out.tif", data, spacing=(3.0, 0.5, 0.25), unit="µm")
    with tifffile.TiffFile(path) as tif:
        assert tif.is_imagej
        info = tif.imagej_metadata
        assert (info["spacing"], info["unit"]) == (3.0, "um")
        page = tif.pages.first
        numerator, denominator = page.tags["XResolution"].value
        assert numerator / denominator == pytest.approx(4.0)  # 1 / 0.25 µm
        assert RESEARCH_ONLY in page.description
        assert page.compression == 8  # zlib / deflate (TIFF tag value 8)


def test_labels_no_imagej_type_holds_are_plain_tiff_in_pixels_per_centimetre(tmp_path):
    # source: TIFF 6.0 (ResolutionUnit 3 = centimetre, XResolution = pixels per unit);
    # 2**24 + 1 is the first integer float32 cannot hold (IEEE 754 binary32)
    labels = np.arange(60, dtype=np.int32).reshape(3, 4, 5)
    labels[0, 0, 0] = 2**24 + 1
    path = write(tmp_path / "labels.tif", labels, spacing=(2.0, 0.25, 0.5), unit="µm")
    with tifffile.TiffFile(path) as tif:
        described = json.loads(tif.pages.first.description)
        assert described["caution"] == RESEARCH_ONLY
        assert tif.series[0].dtype == np.int32
        tags = tif.pages.first.tags
        assert tags["ResolutionUnit"].value == 3
        x_per_cm = tags["XResolution"].value[0] / tags["XResolution"].value[1]
        y_per_cm = tags["YResolution"].value[0] / tags["YResolution"].value[1]
    assert x_per_cm == pytest.approx(1e4 / 0.5) and y_per_cm == pytest.approx(1e4 / 0.25)
    assert read(path).spacing == (2.0, 0.25, 0.5)


def test_written_ome_tiff_as_tifffile_sees_it(tmp_path):
    # source: tifffile's OME-XML; physical sizes and the caution in the Image Description
    path = write(tmp_path / "out.ome.tif", np.zeros((2, 3, 4), np.int32),
                 spacing=(2.0, 0.5, 0.5), unit="nm")
    with tifffile.TiffFile(path) as tif:
        assert tif.is_ome
        xml = tif.ome_metadata
    assert 'PhysicalSizeZ="2.0"' in xml and 'PhysicalSizeZUnit="nm"' in xml
    assert RESEARCH_ONLY in xml
    assert read(path).spacing == (2.0, 0.5, 0.5) and read(path).unit == "nm"


def test_truncated_and_corrupt_tiff(tmp_path, rng):
    data = rng.integers(0, 255, size=(4, 50, 60), dtype=np.uint8)
    for compress in (False, True):
        path = write(tmp_path / f"full{compress}.tif", data, compress=compress)
        cut = tmp_path / f"cut{compress}.tif"
        cut.write_bytes(path.read_bytes()[: path.stat().st_size * 2 // 3])
        with pytest.raises(InputFileError, match=rf"cut{compress}\.tif"):
            read(cut)
    garbage = tmp_path / "garbage.tif"
    garbage.write_bytes(b"II*\x00" + bytes(range(256)) * 4)
    with pytest.raises(InputFileError, match=r"garbage\.tif.*TIFF"):
        read(garbage)
    not_tiff = tmp_path / "text.tif"
    not_tiff.write_text("hello, world")
    with pytest.raises(InputFileError, match=r"text\.tif.*not a TIFF"):
        read(not_tiff)


def test_unicode_micro_spellings():
    # the micro sign (U+00B5) and Greek mu (U+03BC) both occur (OME-XML, user options)
    assert normalise_unit("\u00b5m") == normalise_unit("\u03bcm") == "µm"


@pytest.mark.parametrize("spelling", ["micron", "um", "\\u00B5m", "Micrometer"])
def test_unit_spellings_are_normalised(tmp_path, spelling):
    # ImageJ descriptions are ASCII and escape µ as \u00B5 (from memory of ImageJ's
    # writer); tifffile refuses non-ASCII there
    path = tmp_path / "unit.tif"
    tifffile.imwrite(path, np.zeros((2, 3, 4), np.uint8), imagej=True, resolution=(2.0, 2.0),
                     metadata={"axes": "ZYX", "spacing": 1.5, "unit": spelling})
    vol = read(path)
    assert vol.unit == "µm" and vol.spacing == (1.5, 0.5, 0.5)
