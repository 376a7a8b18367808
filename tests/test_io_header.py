"""Header-only shapes and types (`cavitas.io._header.declared_layout`), which the batch
runner budgets with, checked against the general-purpose libraries' own readers."""

from __future__ import annotations

import nibabel as nib
import numpy as np
import pytest
import tifffile

from cavitas._errors import CavitasError
from cavitas._shared.memory import data_memory_bytes
from cavitas.batch._memory import estimate_task_bytes
from cavitas.io._header import declared_layout


@pytest.mark.parametrize("shape", [(5, 6), (3, 5, 6)])
def test_tiff_layout_is_tifffile_series(tmp_path, shape):
    path = tmp_path / "a.ome.tif"
    tifffile.imwrite(path, np.zeros(shape, np.uint16), ome=True)
    with tifffile.TiffFile(path) as tif:  # reference: tifffile's own series
        expected = (tuple(tif.series[0].shape), tif.series[0].dtype)
    assert declared_layout(path) == expected == (shape, np.dtype(np.uint16))


def test_nifti_and_analyze_pair_layouts_are_nibabels(tmp_path):
    data = np.zeros((4, 5, 6), np.int16)
    nii = tmp_path / "a.nii.gz"
    nib.save(nib.Nifti1Image(data, np.eye(4)), nii)
    hdr = tmp_path / "b.hdr"
    nib.save(nib.AnalyzeImage(data, np.eye(4)), hdr)
    for path in (nii, hdr, tmp_path / "b.img"):  # an .img beside its .hdr is the pair
        header = nib.load(path).header  # reference: nibabel's header
        assert declared_layout(path) == (header.get_data_shape(), header.get_data_dtype())
    # the batch budget now reads the pair's header instead of guessing from 348 bytes
    assert estimate_task_bytes(hdr) == data_memory_bytes((4, 5, 6), np.int16)


def test_formats_without_a_cheap_header_say_so(tmp_path):
    png = tmp_path / "a.png"
    png.write_bytes(b"")
    with pytest.raises(ValueError, match="no header reader for png"):
        declared_layout(png)
    with pytest.raises(CavitasError, match="extension cavitas does not read"):
        declared_layout(tmp_path / "notes.txt")
