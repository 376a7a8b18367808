"""Write → read round trips for every written format (common practice: round trip).

Each case checks data, dtype, spacing and unit; NIfTI also the affine. Arrays are random
with a fixed seed (generated test data, not reference values).
"""

import numpy as np
import pytest
import tifffile

from cavitas.io import Volume, read, write

FORMATS = [".tif", ".ome.tif", ".nii", ".nii.gz", ".npz", ".npy"]
DTYPES = ["uint8", "uint16", "int16", "float32", "int32"]
SPACING = {2: (0.5, 0.25), 3: (2.0, 0.5, 0.25)}  # exact in float32 (NIfTI-1 zooms)


def _array(rng, ndim, dtype):
    shape = (5, 7, 6)[-ndim:]
    if np.dtype(dtype).kind == "f":
        return rng.normal(size=shape).astype(dtype)
    info = np.iinfo(dtype)
    return rng.integers(info.min, info.max, size=shape, endpoint=True, dtype=dtype)


@pytest.mark.parametrize("suffix", FORMATS)
@pytest.mark.parametrize("ndim", [2, 3])
@pytest.mark.parametrize("dtype", DTYPES)
def test_round_trip_keeps_data_dtype_and_spacing(tmp_path, rng, suffix, ndim, dtype):
    # common practice: round trip
    data = _array(rng, ndim, dtype)
    target = write(tmp_path / f"vol{suffix}", data, spacing=SPACING[ndim], unit="um")
    back = read(target)
    assert back.dtype == data.dtype
    np.testing.assert_array_equal(np.asarray(back.data), data)
    if suffix == ".npy":  # .npy holds no metadata (documented)
        assert back.unit == "voxel" and back.spacing == (1.0,) * ndim
    else:
        assert back.spacing == SPACING[ndim]
        assert back.unit == "µm"


@pytest.mark.parametrize("suffix", FORMATS)
@pytest.mark.parametrize("ndim", [2, 3])
def test_round_trip_of_a_volume_through_like(tmp_path, rng, suffix, ndim):
    # common practice: labels written "like" their input keep the input's geometry
    source = Volume(_array(rng, ndim, "uint16"), spacing=SPACING[ndim], unit="mm")
    labels = (np.asarray(source.data) % 5).astype(np.int32)
    back = read(write(tmp_path / f"labels{suffix}", labels, like=source))
    assert back.dtype == np.int32
    np.testing.assert_array_equal(np.asarray(back.data), labels)
    if suffix != ".npy":
        assert (back.spacing, back.unit) == (SPACING[ndim], "mm")


@pytest.mark.parametrize("suffix", [".nii", ".nii.gz"])
@pytest.mark.parametrize("ndim", [2, 3])
def test_nifti_round_trip_keeps_an_oblique_affine(tmp_path, rng, suffix, ndim):
    # common practice: round trip; a rotated, shifted affine (values exact in float32)
    angle = np.deg2rad(30.0)
    rotation = np.array([[np.cos(angle), -np.sin(angle), 0], [np.sin(angle), np.cos(angle), 0],
                         [0, 0, 1]])
    affine = np.eye(4)
    affine[:3, :3] = rotation @ np.diag([0.25, 0.5, 2.0])
    affine[:3, 3] = [10.0, -4.5, 3.0]
    affine = affine.astype(np.float32).astype(np.float64)
    vol = Volume(_array(rng, ndim, "int16"), spacing=SPACING[ndim], affine=affine, unit="mm")
    first = read(write(tmp_path / f"a{suffix}", vol))
    second = read(write(tmp_path / f"b{suffix}", first))
    for back in (first, second):
        np.testing.assert_array_equal(back.affine, affine)
        np.testing.assert_array_equal(np.asarray(back.data), vol.data)
        assert back.spacing == SPACING[ndim]


def test_uncompressed_tiff_and_npy_are_memory_mapped(tmp_path, rng):
    # tifffile.memmap / numpy.load(mmap_mode) are the reference behaviours
    data = _array(rng, 3, "uint16")
    tif = read(write(tmp_path / "a.tif", data, compress=False))
    npy = read(write(tmp_path / "a.npy", data))
    assert isinstance(tif.data, np.memmap) and isinstance(npy.data, np.memmap)
    assert not isinstance(read(tmp_path / "a.npy", mmap=False).data, np.memmap)
    with tifffile.TiffFile(tmp_path / "a.tif") as tif_file:
        assert tif_file.pages.first.compression == 1  # tifffile: 1 = no compression


def test_bool_masks_are_written_as_uint8(tmp_path):
    # common practice: masks stored as 0/1 bytes
    mask = np.zeros((3, 4, 5), bool)
    mask[1, 1:3, 2:4] = True
    back = read(write(tmp_path / "mask.tif", mask))
    assert back.dtype == np.uint8
    np.testing.assert_array_equal(np.asarray(back.data), mask.astype(np.uint8))
