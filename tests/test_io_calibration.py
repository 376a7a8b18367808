"""Calibration of written files as other programs read it, not as cavitas reads it back.

Sources: tifffile (general-purpose reference library) parses the ImageJ description
(``TiffFile.imagej_metadata``), the page tags and the OME-XML (``TiffFile.ome_metadata``);
the TIFF 6.0 specification defines XResolution as pixels per ResolutionUnit (1 = none);
ImageJ reads the unit and the z step from the ``unit=`` and ``spacing=`` lines of its
description (ImageJ file format, from memory); OME-XML ``PhysicalSizeX`` is the pixel
size in ``PhysicalSizeXUnit`` (OME schema 2016-06); nibabel reads NIfTI headers
(``get_xyzt_units``, ``get_zooms``).
"""

import xml.etree.ElementTree as ElementTree

import nibabel as nib
import numpy as np
import pytest
import tifffile

from cavitas.cli import main
from cavitas.io import Volume, read, write

#: ImageJ opens these pixel types (ImageJ file format, from memory; tifffile refuses others
#: with imagej=True).
IMAGEJ_TYPES = {np.dtype(t) for t in ("uint8", "uint16", "int16", "float32")}


def imagej_calibration(path):
    """(pixel type, pixel size y, pixel size x, z step, unit) as an ImageJ reader sees it."""
    with tifffile.TiffFile(path) as tif:
        assert tif.is_imagej
        page = tif.pages.first
        tags = page.tags
        assert tags["ResolutionUnit"].value == 1  # none: the unit is ImageJ's unit=
        x_num, x_den = tags["XResolution"].value
        y_num, y_den = tags["YResolution"].value
        info = tif.imagej_metadata
        return page.dtype, y_den / y_num, x_den / x_num, info.get("spacing"), info.get("unit")


@pytest.mark.parametrize(("labels_max", "stored"), [(60, "uint16"), (70_000, "float32")])
def test_int32_labels_are_written_in_a_type_imagej_opens(tmp_path, labels_max, stored):
    labels = np.linspace(0, labels_max, 60).astype(np.int32).reshape(3, 4, 5)
    path = write(tmp_path / "labels.tif", labels, spacing=(2.0, 0.25, 0.5), unit="µm")
    dtype, y, x, z, unit = imagej_calibration(path)
    assert dtype == np.dtype(stored) and dtype in IMAGEJ_TYPES
    assert (y, x, z, unit) == (pytest.approx(0.25), pytest.approx(0.5), 2.0, "um")
    np.testing.assert_array_equal(tifffile.imread(path), labels)  # every label kept exactly
    back = read(path)
    assert back.dtype == np.int32 and back.spacing == (2.0, 0.25, 0.5)


def test_negative_integers_go_to_int16(tmp_path):
    data = np.array([[-5, 0], [7, 300]], np.int32)
    path = write(tmp_path / "signed.tif", data, spacing=(0.1, 0.1), unit="mm")
    dtype, y, x, z, unit = imagej_calibration(path)
    assert dtype == np.int16 and (y, x, z, unit) == (pytest.approx(0.1), pytest.approx(0.1),
                                                     None, "mm")
    np.testing.assert_array_equal(tifffile.imread(path), data)


def test_write_like_keeps_the_geometry_of_like(tmp_path):
    source = Volume(np.zeros((3, 4, 5), np.uint16), spacing=(0.8, 0.2, 0.2), unit="µm")
    labels = np.arange(60, dtype=np.int32).reshape(3, 4, 5)
    for data in (labels, Volume(labels)):  # a plain array, or a Volume with no geometry
        path = write(tmp_path / "labels.tif", data, like=source, force=True)
        _, y, x, z, unit = imagej_calibration(path)
        assert (y, x, z, unit) == (pytest.approx(0.2), pytest.approx(0.2), 0.8, "um")


def test_ome_tiff_int32_labels_carry_physical_sizes(tmp_path):
    labels = np.arange(60, dtype=np.int32).reshape(3, 4, 5)
    path = write(tmp_path / "labels.ome.tif", labels, spacing=(2.0, 0.25, 0.5), unit="µm")
    with tifffile.TiffFile(path) as tif:
        root = ElementTree.fromstring(tif.ome_metadata)
    pixels = next(e for e in root.iter() if e.tag.endswith("}Pixels"))
    assert pixels.get("Type") == "int32"
    assert [float(pixels.get(f"PhysicalSize{a}")) for a in "ZYX"] == [2.0, 0.25, 0.5]
    assert {pixels.get(f"PhysicalSize{a}Unit") for a in "ZYX"} == {"µm"}


def test_unknown_unit_is_not_written_as_a_length(tmp_path):
    data = np.zeros((2, 3, 4), np.uint8)
    path = write(tmp_path / "u.tif", data, spacing=(3.0, 2.0, 2.0), unit="unknown")
    _, y, x, z, unit = imagej_calibration(path)
    assert (y, x, z, unit) == (2.0, 2.0, 3.0, None)
    ome = write(tmp_path / "u.ome.tif", data, spacing=(3.0, 2.0, 2.0), unit="unknown")
    with tifffile.TiffFile(ome) as tif:
        assert "PhysicalSize" not in tif.ome_metadata  # its default unit would be µm


def test_nifti_without_unit_code_is_unknown_not_microns(tmp_path):
    # the file is made by nibabel itself, with no xyzt_units set
    image = nib.Nifti1Image(np.zeros((4, 3, 2), np.uint8), np.diag([0.5, 0.5, 2.0, 1.0]))
    assert image.header.get_xyzt_units()[0] == "unknown"
    nib.save(image, tmp_path / "plain.nii.gz")
    vol = read(tmp_path / "plain.nii.gz")
    assert vol.unit == "unknown" and vol.spacing == (2.0, 0.5, 0.5)
    assert any("no unit" in w for w in vol.meta["warnings"])
    copy = write(tmp_path / "copy.nii.gz", vol)
    header = nib.load(copy).header
    assert header.get_xyzt_units()[0] == "unknown"  # still no unit, not micron
    assert tuple(float(z) for z in header.get_zooms()) == (0.5, 0.5, 2.0)


def test_nifti_micron_unit_as_nibabel_reads_it(tmp_path):
    path = write(tmp_path / "m.nii.gz", np.zeros((2, 3, 4), np.int32),
                 spacing=(2.0, 0.5, 0.25), unit="µm")
    header = nib.load(path).header
    assert header.get_xyzt_units()[0] == "micron"
    assert tuple(float(z) for z in header.get_zooms()) == (0.25, 0.5, 2.0)


def test_segment_labels_from_an_imagej_input_keep_its_calibration(tmp_path):
    # the case of the report: a 0.2 µm ImageJ input gave labels read as 25 m pixels
    img = np.zeros((9, 24, 24), np.uint8)  # a closed box (hand-made geometry)
    img[1:8, 4:20, 4:20] = 200
    img[3:6, 7:17, 7:17] = 10
    source = tmp_path / "ring.tif"
    tifffile.imwrite(source, img, imagej=True, resolution=(5.0, 5.0),
                     metadata={"axes": "ZYX", "spacing": 0.6, "unit": "micron"})
    out = tmp_path / "out"
    assert main(["segment", str(source), "-o", str(out), "--min-persistence", "50",
                 "--shells", "--enclosures", "--no-report", "--no-thickness", "-q"]) == 0
    for name in ("labels.tif", "shells.tif", "enclosures.tif"):
        dtype, y, x, z, unit = imagej_calibration(out / name)
        assert dtype in IMAGEJ_TYPES
        assert (y, x, z, unit) == (pytest.approx(0.2), pytest.approx(0.2), 0.6, "um")
    assert tifffile.imread(out / "labels.tif").max() >= 1
