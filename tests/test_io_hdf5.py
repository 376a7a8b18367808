"""HDF5 (``.h5``, ``.hdf5``): reading datasets and their spacing, writing labels.

Source: h5py (general-purpose reference library) writes the inputs and reads back what
cavitas wrote. The attribute names are common practice of HDF5 image pipelines:
``element_size_um`` (one size per axis, in µm, in the dataset's axis order) and
``spacing`` / ``resolution`` with a ``unit``.
"""

import numpy as np
import pytest

from cavitas._caution import RESEARCH_ONLY
from cavitas._errors import EXIT_INPUT, EXIT_PARAMETER, InputFileError
from cavitas.cli import main
from cavitas.io import read, write

h5py = pytest.importorskip("h5py")


def _volume(rng):
    return rng.integers(0, 4000, size=(4, 5, 6), dtype=np.uint16)


def test_the_only_image_dataset_with_element_size_um(tmp_path, rng):
    data = _volume(rng)
    path = tmp_path / "scan.h5"
    with h5py.File(path, "w") as f:
        f.attrs["note"] = "root attributes are not an image"
        node = f.create_dataset("exported/raw", data=data)
        node.attrs["element_size_um"] = [1.5, 0.25, 0.25]
        f.create_dataset("exported/histogram", data=np.arange(10))  # 1D: not an image
    vol = read(path)
    np.testing.assert_array_equal(np.asarray(vol.data), data)
    assert vol.spacing == (1.5, 0.25, 0.25) and vol.unit == "µm"
    assert vol.meta["dataset"] == "/exported/raw"


@pytest.mark.parametrize(("attrs", "spacing", "unit"), [
    ({"spacing": [2.0, 0.5, 0.5], "unit": "nm"}, (2.0, 0.5, 0.5), "nm"),
    ({"resolution": [3.0, 1.0, 1.0]}, (3.0, 1.0, 1.0), "unknown"),
    ({}, (1.0, 1.0, 1.0), "voxel"),
])
def test_spacing_attributes(tmp_path, rng, attrs, spacing, unit):
    path = tmp_path / "scan.hdf5"
    with h5py.File(path, "w") as f:
        f.create_dataset("image", data=_volume(rng))
        f.attrs.update(attrs)  # on the root: read when the dataset has none
    vol = read(path)
    assert vol.spacing == spacing and vol.unit == unit


def test_contiguous_datasets_are_memory_mapped_chunked_ones_read(tmp_path, rng):
    data = _volume(rng)
    with h5py.File(tmp_path / "c.h5", "w") as f:
        f.create_dataset("flat", data=data)
    with h5py.File(tmp_path / "z.h5", "w") as f:
        f.create_dataset("packed", data=data, compression="gzip")
    flat, packed = read(tmp_path / "c.h5"), read(tmp_path / "z.h5")
    assert isinstance(flat.data, np.memmap) and not isinstance(packed.data, np.memmap)
    np.testing.assert_array_equal(np.asarray(flat.data), data)
    np.testing.assert_array_equal(np.asarray(packed.data), data)


@pytest.fixture
def two_datasets(tmp_path, rng):
    path = tmp_path / "two.h5"
    with h5py.File(path, "w") as f:
        f.create_dataset("raw", data=_volume(rng))
        f.create_dataset("probabilities", data=np.zeros((4, 5, 6), np.float32))
    return path


def test_several_datasets_need_a_choice_that_names_them(two_datasets):
    with pytest.raises(InputFileError, match=r"two\.h5.*2 image datasets.*/probabilities.*"
                                             r"/raw.*--dataset NAME"):
        read(two_datasets)
    assert read(two_datasets, dataset="raw").dtype == np.uint16
    with pytest.raises(InputFileError, match=r"'nope' does not exist in .*two\.h5.*/raw"):
        read(two_datasets, dataset="nope")


def test_hdf5_problems_exit_with_the_input_code(two_datasets, tmp_path, capsys):
    out = str(tmp_path / "out")
    assert main(["segment", str(two_datasets), "-o", out, "-q"]) == EXIT_INPUT
    assert main(["segment", str(two_datasets), "-o", out, "--dataset", "nope", "-q"]) == EXIT_INPUT
    with h5py.File(tmp_path / "empty.h5", "w") as f:
        f.create_group("nothing")
    assert main(["info", str(tmp_path / "empty.h5")]) == EXIT_INPUT
    errors = [line for line in capsys.readouterr().err.splitlines() if "error" in line]
    assert len(errors) == 3 and all(line.count(".h5") >= 1 for line in errors)


def test_dataset_option_on_another_format_is_a_parameter_error(tmp_path, rng):
    np.save(tmp_path / "a.npy", _volume(rng))
    assert main(["info", str(tmp_path / "a.npy"), "--dataset", "raw"]) == EXIT_PARAMETER


def test_write_then_h5py_reads_data_spacing_and_caution(tmp_path):
    labels = np.arange(120, dtype=np.int32).reshape(4, 5, 6)
    path = write(tmp_path / "labels.h5", labels, spacing=(2.0, 0.5, 0.25), unit="nm")
    with h5py.File(path, "r") as f:
        node = f["image"]
        np.testing.assert_array_equal(node[()], labels)
        assert node.dtype == np.int32
        assert list(node.attrs["spacing"]) == [2.0, 0.5, 0.25] and node.attrs["unit"] == "nm"
        np.testing.assert_allclose(node.attrs["element_size_um"], [0.002, 0.0005, 0.00025])
        assert node.attrs["caution"] == RESEARCH_ONLY
    back = read(path)
    assert back.spacing == (2.0, 0.5, 0.25) and back.unit == "nm" and back.dtype == np.int32


def test_segment_writes_hdf5_labels_when_asked(tmp_path, square_ring):
    source = write(tmp_path / "ring.tif", square_ring, spacing=(0.5, 0.5))
    out = tmp_path / "out"
    assert main(["segment", str(source), "-o", str(out), "--label-format", ".h5",
                 "--no-report", "--no-thickness", "-q"]) == 0
    with h5py.File(out / "labels.h5", "r") as f:
        labels = f["image"][()]
        assert list(f["image"].attrs["element_size_um"]) == [0.5, 0.5]
    assert labels.max() == 1 and labels[12, 12] == 1 and labels[0, 0] == 0


def test_without_h5py_reading_and_asking_for_hdf5_labels_say_how_to_install(
        tmp_path, rng, monkeypatch, capsys):
    # common practice: a missing optional package is named with the command that adds it
    path = tmp_path / "scan.h5"
    with h5py.File(path, "w") as f:
        f.create_dataset("raw", data=_volume(rng))
    np.save(tmp_path / "scan.npy", _volume(rng))
    monkeypatch.setitem(__import__("sys").modules, "h5py", None)  # import h5py now fails
    monkeypatch.setattr("cavitas._run_options.find_spec", lambda name: None)
    with pytest.raises(InputFileError, match=r"scan\.h5.*cavitas\[hdf5\]"):
        read(path)
    out = tmp_path / "out"
    assert main(["segment", str(tmp_path / "scan.npy"), "-o", str(out),
                 "--label-format", ".h5", "-q"]) == EXIT_PARAMETER
    assert "--label-format .h5 needs the h5py package" in capsys.readouterr().err
    assert not (out / "run.json").exists()
