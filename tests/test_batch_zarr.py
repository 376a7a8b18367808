"""Zarr and OME-Zarr reading: round trips written with the zarr library itself.

Metadata layout follows the OME-NGFF 0.4 specification ("multiscales": axes with type and
unit, per-dataset coordinateTransformations of type "scale", optional multiscale-wide
transformations) and 0.5 (the same object under the "ome" attribute of a Zarr v3 group).
Unit names are the UDUNITS-2 names the specification requires ("micrometer").
"""

from __future__ import annotations

import json

import numpy as np
import pytest

zarr = pytest.importorskip("zarr", reason="the optional extra 'zarr' is not installed")

from cavitas._errors import InputFileError, ParameterError  # noqa: E402
from cavitas.io import read  # noqa: E402
from cavitas.io._assemble import assemble  # noqa: E402
from cavitas.io._zarr import read_zarr  # noqa: E402


def _read(path, **kwargs):
    """Through the public reader, except for the level option only the Zarr reader has."""
    if "level" in kwargs:
        return assemble(path, read_zarr(path, **kwargs))
    return read(path, **kwargs)


def _ome(path, image, *, version, axes, scale, unit="micrometer", global_scale=None):
    """Write a two-level OME-Zarr image (level 1 = every other voxel in space)."""
    fmt = 2 if version == "0.4" else 3
    group = zarr.open_group(str(path), mode="w", zarr_format=fmt)
    space = [i for i, a in enumerate(axes) if a in "zyx"]
    datasets = []
    for level in (0, 1):
        step = tuple(2**level if i in space else 1 for i in range(image.ndim))
        data = image[tuple(slice(None, None, s) for s in step)]
        array = group.create_array(str(level), shape=data.shape, dtype=data.dtype,
                                   chunks=tuple(max(1, n // 2) for n in data.shape))
        array[...] = data
        datasets.append({"path": str(level), "coordinateTransformations": [
            {"type": "scale", "scale": [s * f for s, f in zip(scale, step, strict=True)]},
            {"type": "translation", "translation": [0.5] * image.ndim}]})
    multiscale = {"version": version, "name": "test", "datasets": datasets, "axes": [
        {"name": a, "type": {"t": "time", "c": "channel"}.get(a, "space"),
         **({"unit": unit} if a in "zyx" else {})} for a in axes]}
    if global_scale is not None:
        multiscale["coordinateTransformations"] = [{"type": "scale", "scale": global_scale}]
    if version == "0.4":
        group.attrs["multiscales"] = [multiscale]
    else:
        group.attrs["ome"] = {"version": version, "multiscales": [multiscale]}
    return path


@pytest.mark.parametrize("version", ["0.4", "0.5"])
@pytest.mark.parametrize("dtype", [np.uint8, np.uint16, np.float32])
def test_ome_zarr_3d_round_trip(tmp_path, rng, version, dtype):
    image = (rng.random((6, 8, 10)) * 200).astype(dtype)
    path = _ome(tmp_path / "img.ome.zarr", image, version=version, axes="zyx",
                scale=[2.0, 0.5, 0.25])
    vol = _read(path)
    np.testing.assert_array_equal(vol.data, image)
    assert vol.dtype == image.dtype
    assert vol.spacing == (2.0, 0.5, 0.25) and vol.unit == "µm"
    assert vol.meta["origin"] == [0.5, 0.5, 0.5]
    low = _read(path, level=1)  # the written level 1 has twice the voxel size
    np.testing.assert_array_equal(low.data, image[::2, ::2, ::2])
    assert low.spacing == (4.0, 1.0, 0.5)
    with pytest.raises(ParameterError, match="level=2"):
        read_zarr(path, level=2)


def test_ome_zarr_2d_with_time_channel_and_global_scale(tmp_path, rng):
    image = rng.integers(0, 1000, size=(2, 3, 1, 12, 9)).astype(np.uint16)  # t c z y x
    path = _ome(tmp_path / "tc.zarr", image, version="0.4", axes="tczyx",
                scale=[1.0, 1.0, 3.0, 0.2, 0.2], unit="nanometer",
                global_scale=[1.0, 1.0, 1.0, 2.0, 2.0])
    vol = _read(path, channel=2, time=1)
    np.testing.assert_array_equal(vol.data, image[1, 2, 0])  # singleton z is dropped
    assert vol.spacing == (0.4, 0.4) and vol.unit == "nm"
    with pytest.raises(InputFileError, match="channel"):
        read_zarr(path, time=0)


@pytest.mark.parametrize("fmt", [2, 3])
def test_plain_zarr_array_has_no_geometry(tmp_path, rng, fmt):
    image = rng.integers(0, 50, size=(5, 7)).astype(np.int16)
    array = zarr.open_array(str(tmp_path / "a.zarr"), mode="w", shape=image.shape,
                            dtype=image.dtype, chunks=(2, 3), zarr_format=fmt)
    array[...] = image
    vol = _read(tmp_path / "a.zarr")
    np.testing.assert_array_equal(vol.data, image)
    assert vol.spacing == (1.0, 1.0) and vol.unit == "voxel"


def test_unusable_stores_get_one_sentence(tmp_path):
    (tmp_path / "junk.zarr").mkdir()
    with pytest.raises(InputFileError, match="not a readable Zarr store"):
        read_zarr(tmp_path / "junk.zarr")
    group = zarr.open_group(str(tmp_path / "two.zarr"), mode="w")
    for name in ("a", "b"):
        group.create_array(name, shape=(2, 2), dtype="u1")
    with pytest.raises(InputFileError, match="holds 2 arrays"):
        read_zarr(tmp_path / "two.zarr")
    four = zarr.open_array(str(tmp_path / "four.zarr"), mode="w", shape=(2, 2, 2, 2),
                           dtype="u1")
    four[...] = 1
    with pytest.raises(InputFileError, match="shape"):
        _read(tmp_path / "four.zarr")


@pytest.mark.slow
def test_batch_reads_zarr_inputs(tmp_path, rng):
    from cavitas.batch import expand_inputs, run_batch

    image = rng.integers(0, 60, size=(6, 10, 12)).astype(np.uint16)
    image[1:5, 2:8, 2:10] = 200  # invented: a bright box with a dark inside
    image[2:4, 4:6, 4:8] = 10
    path = _ome(tmp_path / "in" / "box.ome.zarr", image, version="0.4", axes="zyx",
                scale=[2.0, 1.0, 1.0])
    assert [i.path for i in expand_inputs([tmp_path / "in"])] == [path]
    out = run_batch([tmp_path / "in"], tmp_path / "out", jobs=1, progress=False)
    assert out.exit_code == 0, out.failed
    record = json.loads((tmp_path / "out" / out.results[0]["name"] / "run.json").read_text())
    assert record["spacing"] == [2.0, 1.0, 1.0] and record["unit"] == "µm"
