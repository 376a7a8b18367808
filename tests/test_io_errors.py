"""Bad input: each case gives one sentence naming the file (or option) and the problem.

The expected behaviours are the project's own contract (design notes: "bad input gets one
clear sentence naming the file and the problem"); inputs are generated here."""

import numpy as np
import pytest

from cavitas._errors import InputFileError, OutputError, ParameterError
from cavitas.io import READ_SUFFIXES, Volume, check_finite, read, write


def test_missing_file(tmp_path):
    with pytest.raises(InputFileError, match=r"^File '.*nope\.tif' does not exist\.$"):
        read(tmp_path / "nope.tif")


def test_unknown_extension_lists_the_supported_ones(tmp_path):
    path = tmp_path / "photo.jpg"
    path.write_bytes(b"\xff\xd8\xff")
    with pytest.raises(InputFileError, match=r"photo\.jpg.*\(\.jpg\)") as caught:
        read(path)
    assert all(suffix in str(caught.value) for suffix in READ_SUFFIXES)


def test_empty_file_and_empty_array(tmp_path):
    (tmp_path / "zero.tif").write_bytes(b"")
    with pytest.raises(InputFileError, match=r"zero\.tif' is empty"):
        read(tmp_path / "zero.tif")
    np.save(tmp_path / "none.npy", np.zeros((0, 4, 5), np.uint8))
    with pytest.raises(InputFileError, match=r"none\.npy' holds no voxels"):
        read(tmp_path / "none.npy")


def test_non_numeric_data(tmp_path):
    np.save(tmp_path / "complex.npy", np.zeros((3, 3), np.complex64))
    with pytest.raises(InputFileError, match=r"complex\.npy.*complex64"):
        read(tmp_path / "complex.npy")


def test_nan_and_inf_read_fine_but_fail_check_finite(tmp_path):
    data = np.ones((3, 4, 5), np.float32)
    data[0, 0, 0], data[1, 2, 3], data[2, 3, 4] = np.nan, np.inf, -np.inf
    np.save(tmp_path / "holes.npy", data)
    vol = read(tmp_path / "holes.npy")
    with pytest.raises(InputFileError, match=r"holes\.npy' holds 3 NaN or infinite voxel"):
        check_finite(vol)
    check_finite(vol.with_data(np.nan_to_num(np.asarray(vol.data))))  # no error
    check_finite(Volume(np.zeros((2, 2), np.uint8)))  # integers are always finite


@pytest.mark.parametrize("spacing", [(0.0, 1.0, 1.0), (1.0, -2.0, 1.0), (1.0, np.nan, 1.0),
                                     (1.0, 1.0)])
def test_bad_spacing_option(tmp_path, spacing):
    np.save(tmp_path / "a.npy", np.zeros((2, 3, 4), np.uint8))
    with pytest.raises(ParameterError, match="spacing"):
        read(tmp_path / "a.npy", spacing=spacing)
    with pytest.raises(ParameterError, match="spacing"):
        write(tmp_path / "b.tif", np.zeros((2, 3, 4), np.uint8), spacing=spacing)


def test_bad_spacing_in_the_file(tmp_path):
    np.savez(tmp_path / "a.npz", image=np.zeros((2, 3, 4)), spacing=[1.0, 0.0, 1.0])
    with pytest.raises(InputFileError, match=r"a\.npz' states a voxel spacing.*spacing="):
        read(tmp_path / "a.npz")
    assert read(tmp_path / "a.npz", spacing=(1, 1, 1)).spacing == (1.0, 1.0, 1.0)


def test_channel_on_a_single_channel_file(tmp_path):
    np.save(tmp_path / "a.npy", np.zeros((2, 3)))
    assert read(tmp_path / "a.npy", channel=0).shape == (2, 3)
    with pytest.raises(ParameterError, match=r"channel=1.*a\.npy"):
        read(tmp_path / "a.npy", channel=1)


def test_write_refusals(tmp_path):
    data = np.zeros((2, 3, 4), np.uint8)
    with pytest.raises(OutputError, match=r"out\.jpg.*\.tif"):
        write(tmp_path / "out.jpg", data)
    write(tmp_path / "out.tif", data)
    with pytest.raises(OutputError, match=r"out\.tif' already exists.*force"):
        write(tmp_path / "out.tif", data)
    write(tmp_path / "out.tif", data + 1, force=True)
    assert np.asarray(read(tmp_path / "out.tif").data).max() == 1
    source = read(tmp_path / "out.tif")
    with pytest.raises(OutputError, match="input file"):
        write(tmp_path / "out.tif", source, force=True)
    with pytest.raises(OutputError, match="input file"):
        write(tmp_path / "out.tif", data, like=source, force=True)
    with pytest.raises(ParameterError, match=r"4D|2D or 3D"):
        write(tmp_path / "four.tif", np.zeros((2, 2, 2, 2)))
    with pytest.raises(ParameterError, match="non-empty"):
        write(tmp_path / "empty.tif", np.zeros((0, 2)))


def test_zarr_store_is_read_through_read(tmp_path, rng):
    # source: zarr (optional extra) writes the store; the reader itself is tested with batch
    zarr = pytest.importorskip("zarr")
    data = rng.integers(0, 100, size=(3, 4, 5), dtype=np.uint8)
    zarr.open_array(str(tmp_path / "cube.zarr"), mode="w", shape=data.shape,
                    dtype=data.dtype)[:] = data
    vol = read(tmp_path / "cube.zarr")
    np.testing.assert_array_equal(np.asarray(vol.data), data)
    assert vol.meta["format"] == "zarr"
