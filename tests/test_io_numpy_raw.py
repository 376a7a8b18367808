"""NumPy .npy/.npz and raw binary files, checked against numpy's own readers
(``numpy.load``, ``numpy.fromfile``: general-purpose reference library)."""

import numpy as np
import pytest

from cavitas._caution import RESEARCH_ONLY
from cavitas._errors import InputFileError, ParameterError
from cavitas.io import read, write


def test_npz_spacing_unit_and_caution(tmp_path, rng):
    data = rng.normal(size=(3, 4, 5)).astype(np.float32)
    path = write(tmp_path / "a.npz", data, spacing=(2.0, 1.0, 0.5), unit="nm")
    with np.load(path, allow_pickle=False) as archive:  # numpy reads what we wrote
        assert str(archive["caution"]) == RESEARCH_ONLY
        np.testing.assert_array_equal(archive["image"], data)
    vol = read(path)
    assert vol.spacing == (2.0, 1.0, 0.5) and vol.unit == "nm"


def test_npz_with_several_arrays_needs_key(tmp_path, rng):
    first, second = rng.random((3, 4)), rng.random((5, 6, 7))
    np.savez(tmp_path / "two.npz", first=first, second=second, spacing=[1.0, 2.0, 3.0])
    with pytest.raises(InputFileError, match=r"two\.npz.*2 arrays.*first, second.*key="):
        read(tmp_path / "two.npz")
    vol = read(tmp_path / "two.npz", key="second")
    np.testing.assert_array_equal(vol.data, second)
    assert vol.spacing == (1.0, 2.0, 3.0)
    with pytest.raises(ParameterError, match="key='third'"):
        read(tmp_path / "two.npz", key="third")


def test_pickled_npy_is_refused(tmp_path):
    # rule: never unpickle (numpy.load with allow_pickle=False refuses object arrays)
    np.save(tmp_path / "objects.npy", np.array([{"a": 1}], dtype=object), allow_pickle=True)
    with pytest.raises(InputFileError, match=r"objects\.npy"):
        read(tmp_path / "objects.npy")


def test_4d_npy_is_refused(tmp_path):
    np.save(tmp_path / "four.npy", np.zeros((2, 3, 4, 5), np.uint8))
    with pytest.raises(InputFileError, match=r"four\.npy.*\(2, 3, 4, 5\).*2D image or a 3D"):
        read(tmp_path / "four.npy")


@pytest.mark.parametrize("dtype", ["uint8", "uint16", "int16", "float32"])
@pytest.mark.parametrize("byte_order", ["little", "big"])
@pytest.mark.parametrize("ndim", [2, 3])
def test_raw_matches_numpy_fromfile(tmp_path, rng, dtype, byte_order, ndim):
    # source: numpy.fromfile with the same layout
    shape = (4, 5, 6)[-ndim:]
    kind = np.dtype(dtype).newbyteorder("<" if byte_order == "little" else ">")
    data = (rng.random(shape) * 100).astype(kind)
    path = tmp_path / "block.raw"
    path.write_bytes(b"HEADER" * 2 + data.tobytes())
    vol = read(path, shape=shape, dtype=dtype, byte_order=byte_order, offset=12)
    reference = np.fromfile(path, dtype=kind, offset=12).reshape(shape)
    np.testing.assert_array_equal(np.asarray(vol.data), reference)
    assert isinstance(vol.data, np.memmap)
    assert vol.unit == "voxel"


def test_raw_size_mismatch_states_both_sizes(tmp_path):
    path = tmp_path / "block.bin"
    path.write_bytes(bytes(100))
    with pytest.raises(InputFileError, match=r"block\.bin' has 100 bytes.*needs 120 bytes"):
        read(path, shape=(2, 3, 10), dtype="uint16")


def test_raw_needs_its_layout(tmp_path):
    path = tmp_path / "block.img"  # no .hdr beside it: raw
    path.write_bytes(bytes(24))
    with pytest.raises(ParameterError, match=r"block\.img.*raw.*shape=.*dtype="):
        read(path)
    with pytest.raises(ParameterError, match="dtype='nonsense'"):
        read(path, shape=(4, 6), dtype="nonsense")
    with pytest.raises(ParameterError, match="byte_order"):
        read(path, shape=(4, 6), dtype="uint8", byte_order="middle")
    with pytest.raises(ParameterError, match="offset"):
        read(path, shape=(4, 6), dtype="uint8", offset=-1)
    assert read(path, shape=(4, 6), dtype="uint8").shape == (4, 6)


def test_raw_options_on_other_files_are_refused(tmp_path):
    np.save(tmp_path / "a.npy", np.zeros((2, 3)))
    with pytest.raises(ParameterError, match=r"apply only to raw files.*a\.npy"):
        read(tmp_path / "a.npy", shape=(2, 3), dtype="float64")
