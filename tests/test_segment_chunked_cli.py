"""``cavitas segment FILE --scheduler ADDRESS`` / ``--dask-local``: the chunked route.

Checks and their sources:

* The label map written chunk by chunk to labels.zarr (read back with zarr's own reader),
  regions.csv with its measurement columns, regions.json's global figures, diagram.csv and
  diagram.png equal, voxel for voxel, row for row (floats to rounding) and byte for byte,
  what ``cavitas segment --no-thickness`` writes for the same Zarr store in memory with
  the same options (``--region component``, a hand threshold, with and without
  smoothing, both polarities, 2D and 3D, chunks of one voxel thickness and chunks that
  cut through every cell, a mask); the report's sections but how the walls connect equal
  the in-memory report's (2D). The in-memory route is the reference;
  its labels are checked against ``scipy.ndimage.label`` of sublevel sets in
  ``tests/test_regions_chunked.py`` and ``tests/test_segment_regions.py``. That a
  distributed path equals its serial one is common practice (DEVELOPERS.md).
* The voxel size and unit of an OME-Zarr image (NGFF 0.4 metadata written with the zarr
  library, as in ``tests/test_batch_zarr.py``) and of an HDF5 dataset (h5py's writer,
  ``element_size_um``) read from their metadata alone equal what ``cavitas.read`` reads,
  and the regions' volumes in physical units equal the in-memory run's.
* The in-memory ``--region component`` itself against its definition: each chamber's
  voxels lie in the component of ``{f < level}`` (``{f > level}`` for dark walls) holding
  its core, found by ``scipy.ndimage.label`` with the cavities' connectivity, and every
  voxel of that component is labelled (by it or a chamber nested in it).
* NaN and infinite values of a float image: outside the mask they are replaced as the
  in-memory ``segment`` replaces them (``_segment._fill_outside``: the same array, bit for
  bit, from ``_chunked_finite.fill_outside_in_chunks``, both polarities, any chunks), so
  the labels and rows with smoothing equal the in-memory command's; inside the mask the
  chunked command gives the in-memory command's one sentence and exit code (3, an input
  the tool cannot use: ``cavitas/_errors.py``) and writes nothing.
* The smoothed image stored once (``smoothed_store``): each chunk is smoothed once with the
  store and on every pass without it, with the same labels and rows as ``segment()`` in
  memory; the output folder then holds the outputs and nothing else; a store that cannot
  be written is an output error (exit 4 on the command line), and a run that fails after
  the store was written leaves no output folder (``io/_staging.py``).
* Each refusal is one sentence with the documented exit code (``cavitas/_errors.py``: 2
  for an option the route does not compute) and leaves no output behind.
"""

from __future__ import annotations

import json
import re

import numpy as np
import pytest
import tifffile

from cavitas._errors import InputFileError, OutputError
from cavitas._table import Table
from cavitas.cli import main

pytest.importorskip("distributed", reason="Dask distributed (extra 'cluster') is not installed")
zarr = pytest.importorskip("zarr", reason="zarr (extra 'zarr') is not installed")


def _cells(shape, pitch, seed) -> np.ndarray:
    """Bright walls every ``pitch`` voxels around dark cells, brighter every ``2 pitch`` (so
    groups of cells are enclosures), with noise (invented data: the two routes are compared
    with each other)."""
    rng = np.random.default_rng(seed)
    wall = np.zeros(shape, np.uint16)
    for coord in np.indices(shape):
        wall = np.maximum(wall, np.where(coord % pitch == 0, 180, 0))
        wall = np.maximum(wall, np.where(coord % (2 * pitch) == 0, 260, 0))
    return (np.maximum(wall, 40) + rng.integers(0, 60, size=shape)).astype(np.uint16)


@pytest.fixture(scope="module")
def address(client):
    """The loopback scheduler of tests/conftest.py's client, for --scheduler."""
    return client.scheduler.address


def _compare_runs(tmp_path, source, common, address) -> Table:
    """Run ``cavitas segment`` in memory and on the cluster; the labels, the rows with their
    measurements (the in-memory run without the wall thickness, which the chunked route
    does not make), the global figures and the diagram files must be the same. Returns the
    chunked run's table."""
    common = [*common, "--no-thickness"]
    assert main(["segment", source, "-o", str(tmp_path / "mem"), *common]) == 0
    assert main(["segment", source, "-o", str(tmp_path / "big"), "--scheduler", address,
                 *common]) == 0
    # the in-memory run writes labels.tif for a Zarr input: read back with tifffile's reader
    mem_labels = tifffile.imread(next((tmp_path / "mem").glob("labels.*")))
    written = zarr.open_array(str(tmp_path / "big" / "labels.zarr"), mode="r")
    assert "research use only" in written.attrs["caution"].lower()
    assert mem_labels.max() > 1
    np.testing.assert_array_equal(written[...], mem_labels)
    for table in ("regions.csv", "diagram.csv", "euler.csv"):
        mem_rows, big_rows = (Table.from_csv(tmp_path / run / table) for run in ("mem", "big"))
        assert len(big_rows) == len(mem_rows) and big_rows.names == mem_rows.names
        assert big_rows.units == mem_rows.units
        for name in big_rows.names:  # float sums over chunks in another order: to rounding
            if big_rows[name].dtype.kind == "f":
                np.testing.assert_allclose(big_rows[name], mem_rows[name], rtol=1e-10,
                                           atol=1e-12, err_msg=name)
            else:
                np.testing.assert_array_equal(big_rows[name], mem_rows[name], err_msg=name)
    mem_json, big_json = (json.loads((tmp_path / run / "regions.json").read_text(
        encoding="utf-8")) for run in ("mem", "big"))
    assert big_json["units"] == mem_json["units"]
    assert big_json["meta"]["global"] == pytest.approx(mem_json["meta"]["global"], rel=1e-12)
    assert (tmp_path / "big" / "diagram.png").read_bytes() == (
        tmp_path / "mem" / "diagram.png").read_bytes()  # the same figure, drawn alike
    if "--no-report" not in common:  # the report's sections, but how the walls connect
        mem_page, big_page = (_sections((tmp_path / run / "report.html").read_text(
            encoding="utf-8")) for run in ("mem", "big"))
        assert set(mem_page) == set(big_page)
        for name in ("summary", "browser", "table", "persistence", "connectivity", "plots"):
            assert big_page[name] == mem_page[name], name
    return Table.from_csv(tmp_path / "big" / "regions.csv")


def _sections(page: str) -> dict[str, str]:
    """The report's sections by id (a page cavitas writes: no nested sections)."""
    return dict(re.findall(r'<section id="([a-z]+)">(.*?)</section>', page, re.S))


def _store(path, image, chunks) -> str:
    store = zarr.open_array(str(path), mode="w", shape=image.shape, chunks=chunks,
                            dtype=image.dtype)
    store[...] = image
    return str(path)


CASES = [  # (shape, pitch, chunks, walls, extra options)
    ((9, 9, 9), 4, (5, 5, 1), "bright", ["--smooth", "0.6", "--enclosures"]),
    ((13, 11, 12), 4, (3, 6, 7), "dark", ["--enclosures", "--mask", "MASK"]),
    ((25, 21), 6, (2, 11), "dark", ["--smooth", "1", "--connectivity", "2", "--top", "5",
                                    "--relative-persistence", "0.15", "REPORT"]),
]


@pytest.mark.cluster
@pytest.mark.parametrize("shape, pitch, chunks, walls, extra", CASES)
def test_labels_and_table_equal_in_memory(address, tmp_path, shape, pitch, chunks, walls,
                                          extra, capsys):
    image = _cells(shape, pitch, seed=len(shape) + len(extra))
    if walls == "dark":
        image = (image.max() - image).astype(np.uint16)
    source = _store(tmp_path / "v.zarr", image, chunks)
    roi = np.ones(shape, np.uint8)
    roi[..., :2] = 0  # a region of interest, stored in other chunks than the image
    extra = [_store(tmp_path / "roi.zarr", roi, (3,) * len(shape)) if option == "MASK"
             else option for option in extra]
    report = "REPORT" in extra  # with the report (else --no-report)
    extra = [option for option in extra if option != "REPORT"]
    common = ["--region", "component", "--min-persistence", "30", "--walls", walls,
              *([] if report else ["--no-report"]), *extra]
    _compare_runs(tmp_path, source, common, address)
    assert "not made on this route" in capsys.readouterr().out
    if "--enclosures" in extra:
        np.testing.assert_array_equal(
            zarr.open_array(str(tmp_path / "big" / "enclosures.zarr"), mode="r")[...],
            tifffile.imread(tmp_path / "mem" / "enclosures.tif"))
    record, memory = (json.loads((tmp_path / run / "run.json").read_text(encoding="utf-8"))
                      for run in ("big", "mem"))
    assert record["not_made"] and record["parameters"]["threshold"] >= 30
    for name in ("threshold", "smooth_sigma", "connectivity", "noise_sigma") + (
            ("robust_range",) if "--relative-persistence" in extra else ()):
        assert record["parameters"][name] == memory["parameters"][name], name
    for name in ("walls_euler", "walls_loops", "connectivity_density"):
        assert record["summary"][name] == memory["summary"][name], name
    # the outputs and nothing else: the smoothed image stored for the run is gone
    assert sorted(p.name for p in (tmp_path / "big").iterdir()) == sorted(
        ["labels.zarr", "regions.csv", "regions.json", "diagram.csv", "diagram.png",
         "euler.csv", "run.json"]
        + (["enclosures.zarr"] if "--enclosures" in extra else [])
        + (["report.html"] if report else []))


def test_smoothed_once_same_result(monkeypatch, tmp_path):
    import dask
    import dask.array as da

    from cavitas.segment import SegmentParams, _chunked_smooth, segment
    from cavitas.segment._chunked_segment import segment_in_chunks

    image = _cells((10, 11, 9), 4, seed=2)
    chunks = (5, 4, 9)
    n_chunks = 2 * 3 * 1
    params = SegmentParams(region="component", min_persistence=30, smooth=0.7)
    smoothed_chunks = []
    smooth_block = _chunked_smooth._smooth_block
    monkeypatch.setattr(_chunked_smooth, "_smooth_block", lambda block, **kw: (
        smoothed_chunks.append(block.shape), smooth_block(block, **kw))[1])
    runs = {}
    with dask.config.set(scheduler="synchronous"):
        for store in (None, tmp_path / "smoothed.zarr"):
            smoothed_chunks.clear()
            seg = segment_in_chunks(da.from_array(image, chunks=chunks), params=params,
                                    spacing=np.ones(3), unit="voxel", smoothed_store=store)
            runs[store is None] = (seg.labels.compute(), seg.table,
                                   len(smoothed_chunks))
    memory = segment(image, params=params)
    assert runs[False][2] == n_chunks < runs[True][2]  # stored: each chunk smoothed once
    for labels, table, _ in runs.values():
        np.testing.assert_array_equal(labels, memory.labels)
        for name in table.names:
            np.testing.assert_array_equal(table[name], memory.regions[name], err_msg=name)
    blocked = tmp_path / "a file"  # a store that cannot be made: a file where its folder is
    blocked.write_text("", encoding="utf-8")
    with dask.config.set(scheduler="synchronous"), pytest.raises(OutputError) as caught:
        segment_in_chunks(da.from_array(image, chunks=chunks), params=params,
                          spacing=np.ones(3), unit="voxel",
                          smoothed_store=blocked / "smoothed.zarr")
    assert str(caught.value).startswith("Cannot write the smoothed image to ")


@pytest.mark.cluster
def test_failed_run_leaves_nothing(address, tmp_path, monkeypatch):
    from cavitas._commands import _segment_chunked

    stored = []

    def failing(labels, path, volume):  # as a full disk fails the label map's write
        stored.append((path.parent / _segment_chunked.SMOOTHED_STORE).is_dir())
        raise OutputError(f"Cannot write '{path}': No space left on device.")

    monkeypatch.setattr(_segment_chunked, "_write_labels", failing)
    source = _store(tmp_path / "v.zarr", _cells((6, 7, 8), 3, seed=1), (3, 4, 8))
    out = tmp_path / "out"
    # exit code 4: an output that cannot be written (cavitas/_errors.py, README)
    assert main(["segment", source, "-o", str(out), "--scheduler", address, "--region",
                 "component", "--min-persistence", "30", "--smooth", "0.7"]) == 4
    assert stored == [True] and not out.exists()  # the smoothed image went with the rest


@pytest.mark.cluster
def test_ome_zarr_and_hdf5_geometry(address, tmp_path):
    from cavitas.io import read
    from cavitas.io._lazy import open_chunked
    from tests.test_batch_zarr import _ome

    h5py = pytest.importorskip("h5py", reason="h5py (extra 'hdf5') is not installed")
    image = _cells((30, 26), 6, seed=5)
    ome = str(_ome(tmp_path / "v.ome.zarr", image, version="0.4", axes="yx",
                   scale=[0.5, 0.25]))
    with h5py.File(tmp_path / "v.h5", "w") as handle:
        handle.create_dataset("scan", data=image, chunks=(7, 26))
        handle["scan"].attrs["element_size_um"] = [0.5, 0.25]
    for path, options in ((ome, {}), (str(tmp_path / "v.h5"), {}),
                          (_store(tmp_path / "v.zarr", image, (8, 8)), {"spacing": (2, 3)})):
        lazy = open_chunked(path).volume(**options)
        whole = read(path, **options)
        assert (lazy.spacing, lazy.unit) == (whole.spacing, whole.unit), path
        assert not isinstance(lazy.data, np.ndarray)  # still the Dask array
    rows = _compare_runs(tmp_path, ome, ["--region", "component", "--min-persistence", "30",
                                         "--min-volume", "2", "--no-report"], address)
    np.testing.assert_allclose(rows["own_volume"], rows["own_voxels"] * 0.125)


@pytest.mark.cluster
def test_measurements_of_chunks_alone(client):
    """measure_in_chunks with each chunk measured alone on the cluster against the
    whole-array measure_regions (itself checked against scikit-image's regionprops_table,
    tests/test_measure_regions.py): every column equal (floats to rounding)."""
    import dask.array as da

    from cavitas.measure import measure_regions
    from cavitas.measure._chunked import measure_in_chunks
    from tests.test_measure_chunked import _assert_same, _labels

    rng = np.random.default_rng(11)
    shape = (11, 13, 9)
    lab = _labels(rng, shape)
    image = rng.integers(0, 4000, shape).astype(np.uint16)
    roi = np.ones(shape, bool)
    roi[3:5, 4:9, :] = False
    chunks = (6, 7, 9)  # other chunkings of the image and ROI: tests/test_measure_chunked.py
    got = measure_in_chunks(da.from_array(lab, chunks=chunks), spacing=(1.0, 2.0, 2.0),
                            image=da.from_array(image, chunks=chunks),
                            roi=da.from_array(roi, chunks=chunks), block_voxels=0)
    _assert_same(got.table, measure_regions(lab, spacing=(1.0, 2.0, 2.0), image=image,
                                            roi=roi, thickness=False))


@pytest.mark.parametrize("walls", ["bright", "dark"])
def test_nonfinite_outside_the_mask_replaced_as_in_memory(walls):
    import dask.array as da

    from cavitas.segment._chunked_finite import fill_outside_in_chunks
    from cavitas.segment._segment import _fill_outside

    rng = np.random.default_rng(3)
    image = rng.normal(100, 20, (9, 11, 7)).astype(np.float32)
    roi = np.zeros(image.shape, bool)
    roi[1:8, 2:10, 1:6] = True
    image[~roi & (rng.random(image.shape) < 0.5)] = np.nan
    image[0, 0, 0], image[-1, -1, -1] = np.inf, -np.inf
    expected = _fill_outside(image, roi, "v.zarr", walls=walls)
    got = fill_outside_in_chunks(da.from_array(image, chunks=(4, 3, 5)),
                                 da.from_array(roi, chunks=(2, 6, 7)), "v.zarr",
                                 walls=walls).compute()
    assert got.dtype == expected.dtype and np.isfinite(got).all()
    assert np.array_equal(got.view(np.uint32), expected.view(np.uint32))
    messages = []  # without a mask every NaN is refused, in the same words
    for refuse in (lambda: _fill_outside(image, None, "v.zarr", walls=walls),
                   lambda: fill_outside_in_chunks(da.from_array(image, chunks=4), None,
                                                  "v.zarr", walls=walls)):
        with pytest.raises(InputFileError) as caught:
            refuse()
        messages.append(str(caught.value))
    assert messages[0] == messages[1] and "mask them out" in messages[0]


@pytest.mark.cluster
def test_nonfinite_values_as_in_memory(address, tmp_path, capsys):
    image = _cells((12, 13, 11), 4, seed=7).astype(np.float32)
    roi = np.ones(image.shape, np.uint8)
    roi[:, :, :2] = 0
    image[:, :, 0] = np.nan  # outside the mask, beside cells that the smoothing reaches
    image[3, :5, 1] = -np.inf
    source = _store(tmp_path / "v.zarr", image, (5, 4, 6))
    mask = _store(tmp_path / "roi.zarr", roi, (6, 6, 6))
    common = ["--region", "component", "--min-persistence", "30", "--smooth", "0.8",
              "--mask", mask, "--no-report"]
    _compare_runs(tmp_path, source, common, address)
    capsys.readouterr()
    roi[2, 5, 0] = 1  # one NaN inside the mask now: refused by both routes in the same words
    mask = _store(tmp_path / "roi.zarr", roi, (6, 6, 6))
    errors = []
    for route, options in (("mem2", []), ("big2", ["--scheduler", address])):
        assert main(["segment", source, "-o", str(tmp_path / route), *common,
                     *options]) == 3
        errors.append(capsys.readouterr().err.strip())
        assert not (tmp_path / route).exists()
    assert errors[0] == errors[1] and "1 NaN or infinite voxel(s) inside the mask" in errors[0]
    assert "v.zarr" in errors[0] and errors[0].replace("e.g. ", "").count(". ") == 0


@pytest.mark.parametrize("ndim, walls", [(2, "bright"), (3, "dark")])
def test_component_regions_are_their_definition(ndim, walls):
    from scipy import ndimage as ndi

    from cavitas.segment import segment

    image = _cells((24, 26) if ndim == 2 else (12, 13, 11), 4, seed=ndim)
    if walls == "dark":
        image = (image.max() - image).astype(np.uint16)
    seg = segment(image, region="component", min_persistence=30, walls=walls, smooth=0)
    chambers = seg.regions.select(seg.regions["kind"] == "chamber")
    assert len(chambers) > 2
    # wall connectivity 1: the cavities are fully connected (the complementary rule)
    structure = ndi.generate_binary_structure(ndim, ndim)
    for row in chambers:
        below = image < row["level"] if walls == "bright" else image > row["level"]
        pieces, _ = ndi.label(below, structure)
        component = pieces == pieces.ravel()[row["core_voxel"]]
        own = seg.labels == row["label"]
        assert own.any() and not (own & ~component).any()
        assert (seg.labels[component] > 0).all()


REFUSED = [  # (options, words of the one sentence)
    (["--min-persistence", "30"], "--region basin needs the whole volume"),
    (["--region", "breach", "--min-persistence", "30"], "--region breach needs"),
    (["--region", "component", "--mask", "roi.zarr"], "leave out --mask"),
    (["--region", "component", "--smooth", "1", "--mask", "roi.zarr"], "leave out --mask"),
    (["--region", "component", "--min-persistence", "30", "--keep-border"], "--keep-border"),
    (["--region", "component", "--min-persistence", "30", "--partition"], "--partition"),
    (["--region", "component", "--min-persistence", "30", "--shells"], "--shells"),
]


@pytest.mark.parametrize("options, words", REFUSED)
def test_refusals_one_sentence_nothing_written(tmp_path, capsys, options, words):
    source = _store(tmp_path / "v.zarr", _cells((6, 7, 8), 3, seed=1), (3, 3, 3))
    out = tmp_path / "out"
    assert main(["segment", source, "-o", str(out), "--dask-local", "1", *options]) == 2
    err = capsys.readouterr().err.strip()
    assert words in err and "v.zarr" in err and err.count(". ") == 0, err
    assert not out.exists()


def test_existing_output_and_input_kept(tmp_path, capsys):
    image = _cells((6, 7, 8), 3, seed=1)
    options = ["--dask-local", "1", "--region", "component", "--min-persistence", "30"]
    (tmp_path / "regions.csv").write_text("earlier run\n", encoding="utf-8")
    # exit code 4: an output that cannot be written (cavitas/_errors.py, README)
    other = _store(tmp_path / "v.zarr", image, (3, 3, 3))
    assert main(["segment", other, "-o", str(tmp_path), *options]) == 4
    assert "already exists" in capsys.readouterr().err
    source = _store(tmp_path / "labels.zarr", image, (3, 3, 3))
    assert main(["segment", source, "-o", str(tmp_path), "--force", *options]) == 4
    assert "overwrite the input" in capsys.readouterr().err
    np.testing.assert_array_equal(zarr.open_array(source, mode="r")[...], image)
    assert (tmp_path / "regions.csv").read_text(encoding="utf-8") == "earlier run\n"
