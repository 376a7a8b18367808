"""NIfTI specifics, checked against nibabel (general-purpose reference library) and the
NIfTI-1 header definition (NIfTI Data Format Working Group: dim, pixdim, xyzt_units,
scl_slope/scl_inter, 80-byte descrip)."""

import gzip

import nibabel as nib
import numpy as np
import pytest

from cavitas._errors import InputFileError
from cavitas.io import read, write
from cavitas.io._nifti import CAUTION_SHORT


def test_2d_nifti_reads_as_2d(tmp_path, rng):
    # source: nibabel writes an (x, y, 1) image; z of length 1 means a 2D image
    data = rng.integers(0, 100, size=(6, 4, 1), dtype=np.int16)  # (x, y, z)
    image = nib.Nifti1Image(data, np.diag([0.5, 0.25, 3.0, 1.0]))
    image.header.set_xyzt_units("micron")
    nib.save(image, tmp_path / "flat.nii")
    vol = read(tmp_path / "flat.nii")
    assert vol.shape == (4, 6)
    np.testing.assert_array_equal(np.asarray(vol.data), data[:, :, 0].T)
    assert vol.spacing == (0.25, 0.5) and vol.unit == "µm"


def test_float32_zooms_are_given_as_short_decimals(tmp_path):
    # NIfTI-1 pixdim is float32: 0.1 is stored as 0.100000001490116...; read back 0.1
    target = write(tmp_path / "a.nii", np.zeros((2, 3, 4), np.uint8), spacing=(0.3, 0.1, 0.7),
                   unit="mm")
    assert read(target).spacing == (0.3, 0.1, 0.7)
    zooms = nib.load(target).header.get_zooms()
    assert zooms == tuple(np.float32(v) for v in (0.7, 0.1, 0.3))  # nibabel: (x, y, z)


def test_scaling_is_applied_and_identity_scaling_keeps_type(tmp_path):
    # source: nibabel applies scl_slope/scl_inter in get_fdata
    stored = np.arange(24, dtype=np.int16).reshape(2, 3, 4)
    image = nib.Nifti1Image(stored, np.eye(4))
    image.header.set_slope_inter(2.0, -1.0)
    image.set_data_dtype(np.int16)
    nib.save(image, tmp_path / "scaled.nii")
    vol = read(tmp_path / "scaled.nii")
    np.testing.assert_allclose(np.asarray(vol.data),
                               nib.load(tmp_path / "scaled.nii").get_fdata().T)
    assert vol.meta["scaled"] is True
    plain = nib.Nifti1Image(stored, np.eye(4))
    nib.save(plain, tmp_path / "plain.nii")
    assert read(tmp_path / "plain.nii").dtype == np.int16


def test_written_header_holds_units_caution_and_no_scaling(tmp_path):
    # source: nibabel's header accessors
    path = write(tmp_path / "labels.nii.gz", np.ones((2, 3, 4), np.int32),
                 spacing=(2.0, 0.5, 0.5), unit="µm")
    header = nib.load(path).header
    assert header.get_xyzt_units()[0] == "micron"
    assert header["descrip"].item().decode() == CAUTION_SHORT and len(CAUTION_SHORT) < 80
    assert header.get_data_dtype() == np.int32
    assert np.isnan(header["scl_slope"]) or header["scl_slope"] == 1


def test_units_without_nifti_code_are_stored_in_mm(tmp_path):
    # NIfTI-1 xyzt_units has codes for m, mm and µm only: 5 nm = 5e-6 mm
    path = write(tmp_path / "a.nii", np.zeros((2, 3), np.uint8), spacing=(5.0, 5.0), unit="nm")
    vol = read(path)
    assert vol.unit == "mm" and vol.spacing == pytest.approx((5e-6, 5e-6))


def test_impossible_dimensions(tmp_path):
    # NIfTI-1: dim[1..dim[0]] must be >= 1; nibabel loads a negative dim without complaint
    header = nib.Nifti1Header()
    header.set_data_shape((3, 4, 5))
    header["dim"][2] = -4
    path = tmp_path / "bad.nii"
    path.write_bytes(header.binaryblock + b"\0" * 4 + bytes(3 * 4 * 5))
    with pytest.raises(InputFileError, match=r"bad\.nii.*impossible dimensions"):
        read(path)


def test_truncated_and_corrupt_gzip(tmp_path, rng):
    data = rng.integers(0, 1000, size=(8, 9, 10), dtype=np.int16)
    path = write(tmp_path / "full.nii.gz", data, spacing=(1.0, 1.0, 1.0))
    cut = tmp_path / "cut.nii.gz"
    cut.write_bytes(path.read_bytes()[:-200])
    with pytest.raises(InputFileError, match=r"cut\.nii\.gz.*NIfTI"):
        read(cut)
    junk = tmp_path / "junk.nii.gz"
    junk.write_bytes(b"this is not gzip data at all" * 20)
    with pytest.raises(InputFileError, match=r"junk\.nii\.gz"):
        read(junk)
    with gzip.open(tmp_path / "short.nii.gz", "wb") as stream:
        stream.write(b"\x00" * 100)  # a gzip file too short to hold a header
    with pytest.raises(InputFileError, match=r"short\.nii\.gz"):
        read(tmp_path / "short.nii.gz")


@pytest.mark.parametrize("suffix", [".img", ".hdr"])
def test_analyze_pair_is_read_by_nibabel_not_as_raw(tmp_path, rng, suffix):
    # source: nibabel writes and reads the Analyze 7.5 .hdr/.img pair
    data = rng.integers(0, 500, size=(5, 6, 7), dtype=np.int16)  # (x, y, z)
    image = nib.AnalyzeImage(data, np.diag([0.5, 0.5, 2.0, 1.0]))
    nib.save(image, tmp_path / "pair.img")
    vol = read(tmp_path / f"pair{suffix}")
    assert vol.meta["format"] == "Analyze"
    np.testing.assert_array_equal(np.asarray(vol.data), data.T)
    assert vol.spacing == (2.0, 0.5, 0.5)
