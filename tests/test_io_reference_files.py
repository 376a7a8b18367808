"""Reading real files that general-purpose packages ship, compared with what those
packages report themselves: nibabel's test data (``nibabel.testing.data_path``) and the
TIFF / PNG files of ``skimage.data``."""

import json
from pathlib import Path

import nibabel as nib
import numpy as np
import pytest
import skimage
import skimage.data
import tifffile
from nibabel.testing import data_path

from cavitas._errors import InputFileError
from cavitas.io import read, write

NIBABEL = Path(data_path)
SKIMAGE = Path(skimage.data.__file__).parent


def _nibabel_view(name, **index):
    """What nibabel itself reports: data (x, y, z[, t]) -> (z, y, x), affine, zooms."""
    img = nib.load(NIBABEL / name)
    data = np.asanyarray(img.dataobj)
    if "time" in index:
        data = data[..., index["time"]]
    return data.T, img.affine, img.header.get_zooms()[:3], img


@pytest.mark.parametrize(("name", "index"), [
    ("example4d.nii.gz", {"time": 1}),      # 4D NIfTI-1, gzip (nibabel test data)
    ("example_nifti2.nii.gz", {"time": 0}),  # NIfTI-2 (nibabel test data)
    ("anatomical.nii", {}),                  # 3D, big-endian int16 (nibabel test data)
    ("functional.nii", {"time": 7}),         # 4D NIfTI-1 (nibabel test data)
])
def test_nifti_matches_nibabel(name, index):
    # source: nibabel's own reading of its test files
    data, affine, zooms, img = _nibabel_view(name, **index)
    vol = read(NIBABEL / name, **index)
    np.testing.assert_array_equal(np.asarray(vol.data), data)
    assert vol.dtype == data.dtype  # the stored type, or nibabel's type after scaling
    scaled = (img.dataobj.slope, img.dataobj.inter) != (1.0, 0.0)
    assert vol.meta.get("scaled", False) == scaled
    np.testing.assert_array_equal(vol.affine, affine)
    np.testing.assert_array_equal(np.asarray(vol.spacing, zooms[0].dtype), zooms[::-1])
    assert vol.unit == "mm"  # xyzt_units of these files: ('mm', 'sec') per nibabel
    assert vol.meta["format"] == ("NIfTI-2" if "nifti2" in name else "NIfTI-1")


def test_uncompressed_nifti_is_memory_mapped():
    # source: nibabel memory-maps uncompressed .nii (mmap=True)
    assert isinstance(read(NIBABEL / "anatomical.nii").data, np.memmap)


def test_4d_nifti_needs_time():
    # source: nibabel reports example4d.nii.gz as shape (128, 96, 24, 2)
    with pytest.raises(InputFileError, match=r"2 time point.*time="):
        read(NIBABEL / "example4d.nii.gz")


def test_nifti_without_unit_warns_and_keeps_zooms():
    # source: nibabel reports standard.nii.gz zooms (1, 3, 2) with xyzt_units 'unknown'
    vol = read(NIBABEL / "standard.nii.gz")
    assert vol.spacing == (2.0, 3.0, 1.0)
    assert any("no unit" in w for w in vol.meta["warnings"])


@pytest.mark.parametrize(("name", "time"), [("example4d.nii.gz", 0),
                                            ("example_nifti2.nii.gz", 1)])
def test_nifti_read_write_read_is_exact(tmp_path, name, time):
    # common practice: round trip on real files; the header class must survive (NIfTI-1/2)
    vol = read(NIBABEL / name, time=time)
    back_path = write(tmp_path / "copy.nii.gz", vol)
    back = read(back_path)
    np.testing.assert_array_equal(np.asarray(back.data), np.asarray(vol.data))
    assert back.dtype == vol.dtype
    np.testing.assert_array_equal(back.affine, vol.affine)
    assert back.spacing == vol.spacing and back.unit == vol.unit
    assert type(nib.load(back_path)) is type(nib.load(NIBABEL / name))
    labels = (np.asarray(vol.data) > np.median(vol.data)).astype(np.int32)
    label_path = write(tmp_path / "labels.nii", labels, like=vol)
    written = nib.load(label_path)
    assert written.get_data_dtype() == np.int32  # labels stay integer (nibabel reports it)
    np.testing.assert_array_equal(written.affine, vol.affine)
    np.testing.assert_array_equal(np.asanyarray(written.dataobj).T, labels)


def test_skimage_multipage_tiff_matches_tifffile():
    # source: tifffile.imread of skimage's multipage.tif (2 pages of 15 x 10, uint8)
    vol = read(SKIMAGE / "multipage.tif")
    reference = tifffile.imread(SKIMAGE / "multipage.tif")
    np.testing.assert_array_equal(np.asarray(vol.data), reference)
    assert vol.shape == (2, 15, 10)
    # its 72 pixels-per-inch tags are the common placeholder, not a physical size
    assert vol.unit == "voxel" and any("72" in w for w in vol.meta["warnings"])


def test_skimage_multipage_rgb_tiff_needs_a_channel():
    # source: tifffile reports skimage's multipage_rgb.tif as axes 'QSYX', shape (2, 3, 10, 10)
    reference = tifffile.imread(SKIMAGE / "multipage_rgb.tif")
    with pytest.raises(InputFileError, match=r"3 channel.*QSYX.*channel="):
        read(SKIMAGE / "multipage_rgb.tif")
    for channel in range(3):
        vol = read(SKIMAGE / "multipage_rgb.tif", channel=channel)
        np.testing.assert_array_equal(np.asarray(vol.data), reference[:, channel])


def test_skimage_png_images_match_skimage_data():
    # source: skimage.data.camera() / astronaut() load the same files
    np.testing.assert_array_equal(np.asarray(read(SKIMAGE / "camera.png").data),
                                  skimage.data.camera())
    with pytest.raises(InputFileError, match="channel="):
        read(SKIMAGE / "astronaut.png")
    np.testing.assert_array_equal(np.asarray(read(SKIMAGE / "astronaut.png", channel=2).data),
                                  skimage.data.astronaut()[..., 2])


@pytest.mark.parametrize("name", ["anatomical.nii", "standard.nii.gz"])
def test_nifti_orientation_codes_survive_and_meta_is_json(tmp_path, name):
    # source: nibabel's header (sform_code, qform_code) of its test files
    vol = read(NIBABEL / name)
    json.dumps(vol.meta)  # metadata stay plain data (run files may store them)
    back = nib.load(write(tmp_path / "copy.nii", vol)).header
    original = nib.load(NIBABEL / name).header
    assert (back["sform_code"], back["qform_code"]) == (original["sform_code"],
                                                        original["qform_code"])
    np.testing.assert_array_equal(read(tmp_path / "copy.nii").affine, vol.affine)
