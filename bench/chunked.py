"""Chunked persistence on a local Dask cluster: identity with the in-memory run, time, peaks.

Also the segmentation's chunked steps built so far (:func:`segmentation_step_rows`): the
smoothing (``segment/_chunked_smooth.py``) and the connected components of a level set
(``segment/_chunked_components.py``), each written to a Zarr store chunk by chunk, against
``scipy.ndimage.gaussian_filter`` and ``scipy.ndimage.label`` of the whole volume; and the
cavity tree (``cubical/_chunked_tree.py``, :func:`cavity_tree_rows`) against
``cavity_sweep``'s tree, field for field, and the breach regions of its persistent nodes
(``segment/_chunked_regions.py``) against ``nested_map`` on the in-memory sweep; and the
command line's chunked segment route (``segment_in_chunks`` with the smoothed image stored
once, :func:`segment_route_rows`) against ``segment()`` in memory with the same options;
and the per-region measurements of a label map chunk by chunk (``measure/_chunked.py``,
:func:`measurement_rows`) against ``measure_regions`` of the whole arrays, and the Euler
characteristic curve (``cubical/_chunked_euler.py``, :func:`euler_rows`) against
``euler_curve(...).changes()``.

Input (invented, for this measurement only): the Gaussian-smoothed uint16 noise of
``bench/persistence.py`` (96^3, 128^3, 256^3; 384^3 with ``--large``), written to a Zarr
store in the chunk shape being measured, so the workers read it chunk by chunk and the
client never holds it. Cluster: a ``distributed.LocalCluster`` of 2 worker processes with
one thread each, on loopback.

Per size and chunk shape: whether the diagram equals ``persistence(image)`` row for row
(at 96^3 for both connectivities and polarities), the wall time against the in-memory
run in this process (its two sweeps in two threads), and the peaks: a worker's extra peak
RSS over its chunk's voxels (the largest over the workers, its counter reset before the
run) and the client's extra peak RSS, beside the model of ``cubical/_chunk_memory.py``
(the largest task). The in-memory figure is the extra peak of ``persistence(image)`` in a
fresh process (bench/persistence.py's measurement).
"""

from __future__ import annotations

import shutil
import tempfile
import time
from pathlib import Path

import numpy as np
from scipy import ndimage as ndi

from bench.persistence import _rss_kib, _rss_peak_in_fresh_process, smoothed_noise
from cavitas.cubical import cavity_sweep, persistence
from cavitas.cubical._chunk_memory import worker_need
from cavitas.cubical._chunked_tree import chunked_cavity_tree, tree_chunks_on_dask
from cavitas.segment._chunked_components import label_in_chunks
from cavitas.segment._chunked_regions import chunked_nested_map
from cavitas.segment._chunked_smooth import smooth_in_chunks
from cavitas.segment._chunked_statistics import noise_level_in_chunks, percentiles_in_chunks
from cavitas.segment._noise import noise_level, smooth
from cavitas.segment._regions import Sweep, nested_map
from cavitas.segment._tree import prune
from cavitas.segment._tree_order import prune_by_levels

NAME = "chunked"


def _reset_peak() -> int:
    """Reset this process's peak-RSS counter; its current RSS in bytes (-1: no counter)."""
    try:
        Path("/proc/self/clear_refs").write_text("5")
    except OSError:
        return -1
    return _rss_kib("VmRSS") * 1024


def _peak() -> int:
    return _rss_kib("VmHWM") * 1024


def _same(a, b) -> bool:
    return a.dims == b.dims and all(np.array_equal(a.pairs(d), b.pairs(d)) for d in a.dims)


def _stored(image: np.ndarray, chunks: tuple[int, ...], folder: Path):
    import zarr

    path = folder / f"v{image.shape[0]}_{'x'.join(map(str, chunks))}.zarr"
    store = zarr.open_array(str(path), mode="w", shape=image.shape, chunks=chunks,
                            dtype=image.dtype)
    store[...] = image
    return zarr.open_array(str(path), mode="r")


def stored_chunks(shape: tuple[int, ...], chunk: tuple[int, ...]) -> tuple[tuple[int, ...], ...]:
    """Dask's chunk sizes per axis for a regular chunk shape."""
    return tuple((c,) * (s // c) + ((s % c,) if s % c else ()) for s, c in zip(shape, chunk,
                                                                                strict=True))


def _chunked_run(client, stored, **options):
    """One chunked run: the diagram, wall time, worker and client extra peaks (bytes)."""
    before = client.run(_reset_peak)
    client_before = _reset_peak()
    start = time.perf_counter()
    dgm = persistence(stored, **options)
    wall = time.perf_counter() - start
    client_peak = _peak() - client_before
    peaks = client.run(_peak)
    worker_peak = max(peaks[w] - before[w] for w in peaks)
    return dgm, wall, worker_peak, client_peak


def run(args) -> list[dict]:
    """Identity, time and peaks at 96^3, 128^3, 256^3 (384^3 with ``args.large``)."""
    from distributed import Client, LocalCluster

    sides = [96, 128, 256] + ([384] if getattr(args, "large", False) else [])
    rows: list[dict] = []
    persistence(smoothed_noise(16))  # compile (or load the cached kernels) in this process
    with tempfile.TemporaryDirectory() as tmp, \
            LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                         dashboard_address="127.0.0.1:0") as cluster, Client(cluster) as client:
        folder = Path(tmp)
        warm = _stored(smoothed_noise(16), (8, 8, 8), folder)
        persistence(warm)  # workers compile or load the kernels
        for side in sides:
            image = smoothed_noise(side)
            start = time.perf_counter()
            ref = persistence(image)
            in_memory = time.perf_counter() - start
            tag = f"{side}^3"
            rows.append({"metric": f"{tag} in memory", "value": f"{in_memory:.2f} s",
                         "note": f"extra peak {_rss_peak_in_fresh_process(side, True) / 2**20:.0f}"
                                 f" MiB (fresh process); {len(ref)} pairs"})
            for chunks in ((side // 4,) * 3, (side // 2,) * 3, (16, side, side)):
                stored = _stored(image, chunks, folder)
                dgm, wall, worker, client_peak = _chunked_run(client, stored)
                need = worker_need(image.shape, stored_chunks(image.shape, chunks), 2)
                rows.append({
                    "metric": f"{tag} chunks {'x'.join(map(str, chunks))}",
                    "value": f"{wall:.2f} s ({wall / in_memory:.1f}x)",
                    "target": "identical",
                    "note": f"{'identical' if _same(ref, dgm) else 'DIFFERENT'}; worker peak "
                            f"{worker / 2**20:.0f} MiB (model {need.peak_bytes / 2**20:.0f}), "
                            f"client peak {client_peak / 2**20:.0f} MiB"})
            if side == 96:
                stored = _stored(image, (24, 24, 24), folder)
                for conn in (1, 3):
                    for walls in ("bright", "dark"):
                        same = _same(persistence(image, connectivity=conn, walls=walls),
                                     persistence(stored, connectivity=conn, walls=walls))
                        rows.append({"metric": f"{tag} connectivity {conn}, {walls} walls",
                                     "value": "identical" if same else "DIFFERENT",
                                     "target": "identical", "note": "chunks 24^3"})
        rows += segmentation_step_rows(client, folder, sides=[s for s in sides if s >= 128])
        rows += cavity_tree_rows(client, folder, sides=[s for s in sides if s >= 128])
        rows += segment_route_rows(client, folder, sides=[s for s in sides if s >= 128])
        rows += measurement_rows(client, folder, sides=[s for s in sides if s >= 128])
        rows += euler_rows(client, folder, sides=[s for s in sides if s >= 128])
    return rows


_TREE_FIELDS = ("core", "core_level", "breach", "breach_level", "parent", "size")


def cavity_tree_rows(client, folder: Path, sides=(128, 256)) -> list[dict]:
    """The cavity tree of the smoothed noise in chunks of a quarter side, against
    ``cavity_sweep``'s (identity field for field, time, worker and client extra peaks);
    then the breach regions of its persistent nodes (:func:`_breach_region_row`)."""
    rows = []
    chunked_cavity_tree(_stored(smoothed_noise(16), (8, 8, 8), folder))  # workers warm up
    for side in sides:
        image = smoothed_noise(side)
        (order, ref), t_ref, p_ref = _timed_here(lambda image=image: cavity_sweep(image))
        chunk = (side // 4,) * 3
        stored = _stored(image, chunk, folder)
        got, wall, worker, client_peak = _timed_on_cluster(
            client, lambda stored=stored: tree_chunks_on_dask(stored))
        same = all(np.array_equal(getattr(ref, f), getattr(got.tree, f), equal_nan=True)
                   for f in _TREE_FIELDS)
        rows.append(_identity_row(f"{side}^3 cavity tree, chunks {chunk[0]}^3", same,
                                  f" ({ref.n_nodes} nodes)", "in memory", t_ref, p_ref, wall,
                                  worker, client_peak))
        rows.append(_breach_region_row(client, folder, image, order, got, chunk))
    return rows


def _breach_region_row(client, folder: Path, image: np.ndarray, order: np.ndarray, chunked,
                       chunk: tuple[int, ...]) -> dict:
    """The chambers' breach regions (nodes of the top tenth of nonzero persistence, pruned,
    each at its close level): ``nested_map`` on the in-memory sweep against
    ``chunked_nested_map`` (levels from the chunked tree alone, ``prune_by_levels``)
    written to a Zarr store chunk by chunk."""
    import dask.array as da

    tree = chunked.tree
    threshold = float(np.quantile(tree.persistence[tree.persistence > 0], 0.9))
    sweep = Sweep(image, order, tree, 1, None)
    hier = prune(tree, tree.persistence >= threshold, sweep.rank, sweep.level_of_rank,
                 threshold)
    node = hier.node[:hier.n_chambers]
    level = sweep.level_of_rank(hier.close_rank[:hier.n_chambers])
    ids = np.arange(1, node.size + 1)
    ref, t_ref, p_ref = _timed_here(
        lambda: nested_map(sweep, node, sweep.rank_of_level(level), ids))
    labels_at = str(folder / f"breach{image.shape[0]}.zarr")
    pruned = prune_by_levels(tree, tree.persistence >= threshold, threshold)
    _, wall, worker, client_peak = _timed_on_cluster(client, lambda: chunked_nested_map(
        chunked, pruned.hier.node[:pruned.hier.n_chambers],
        pruned.close_level[:pruned.hier.n_chambers], ids).to_zarr(labels_at, overwrite=True))
    same = np.array_equal(np.asarray(da.from_zarr(labels_at)), ref)
    return _identity_row(f"{image.shape[0]}^3 breach regions, chunks {chunk[0]}^3", same,
                         f" ({node.size} regions)", "in memory (nested_map, the sweep given)",
                         t_ref, p_ref, wall, worker, client_peak)


def _identity_row(metric: str, same: bool, what: str, reference: str, t_ref: float,
                  p_ref: float, wall: float, worker: float, client_peak: float) -> dict:
    """A row of a chunked step against its in-memory ``reference``: the chunked time and its
    ratio, whether the results are identical (``what`` qualifies it), both peaks."""
    return {"metric": metric, "value": f"{wall:.2f} s ({wall / t_ref:.1f}x)",
            "target": "identical",
            "note": f"{'identical' if same else 'DIFFERENT'}{what}; {reference} {t_ref:.2f} s, "
                    f"peak {p_ref / 2**20:.0f} MiB; worker peak {worker / 2**20:.0f} MiB, "
                    f"client {client_peak / 2**20:.0f} MiB"}


def _timed_on_cluster(client, compute):
    """``compute()``'s result, wall time, worker and client extra peaks (bytes)."""
    before = client.run(_reset_peak)
    client_before = _reset_peak()
    start = time.perf_counter()
    result = compute()
    wall = time.perf_counter() - start
    client_peak = _peak() - client_before
    peaks = client.run(_peak)
    return result, wall, max(peaks[w] - before[w] for w in peaks), client_peak


def _timed_here(compute):
    """``compute()``'s result, wall time and this process's extra peak (bytes)."""
    before = _reset_peak()
    start = time.perf_counter()
    result = compute()
    return result, time.perf_counter() - start, _peak() - before


def segmentation_step_rows(client, folder: Path, sides=(128, 256)) -> list[dict]:
    """Smoothing (sigma 1 voxel, float32) and the components of the voxels below the
    smoothed median (faces connectivity), chunk by chunk into Zarr stores, against the
    whole-volume scipy calls: identity, time, worker and client peaks (after a first run at
    32^3 that lets the workers import and warm up)."""
    _step_rows_at(client, folder, 32)
    return [row for side in sides for row in _step_rows_at(client, folder, side)]


def _step_rows_at(client, folder: Path, side: int) -> list[dict]:
    import dask.array as da

    sigma = (1.0, 1.0, 1.0)
    image = smoothed_noise(side)
    chunk = (side // 4,) * 3
    lazy = da.from_zarr(_stored(image, chunk, folder))
    ref, t_ref, p_ref = _timed_here(lambda: smooth(image, sigma, dtype=np.float32))
    smoothed_at = str(folder / f"smooth{side}.zarr")
    _, wall, worker, client_peak = _timed_on_cluster(client, lambda: smooth_in_chunks(
        lazy, sigma, dtype=np.float32).to_zarr(smoothed_at, overwrite=True))
    same = np.array_equal(np.asarray(da.from_zarr(smoothed_at)).view(np.uint32),
                          ref.view(np.uint32))
    rows = [_identity_row(f"{side}^3 smoothing, chunks {chunk[0]}^3", same, " bit for bit",
                          "in memory", t_ref, p_ref, wall, worker, client_peak)]
    level = float(np.median(ref))
    (expected, count), t_ref, p_ref = _timed_here(lambda: ndi.label(ref < level))
    smoothed = da.from_zarr(smoothed_at)
    labels_at = str(folder / f"labels{side}.zarr")

    def components() -> int:
        found = label_in_chunks(smoothed < level, 1)
        found.labels.to_zarr(labels_at, overwrite=True)
        return found.count

    found, wall, worker, client_peak = _timed_on_cluster(client, components)
    same = found == count and np.array_equal(np.asarray(da.from_zarr(labels_at)), expected)
    rows.append(_statistics_row(client, image, lazy, side, chunk))
    rows.append(_identity_row(f"{side}^3 components below the median, chunks {chunk[0]}^3",
                              same, f" ({count} components)", "in memory", t_ref, p_ref, wall,
                              worker, client_peak))
    return rows


def _statistics_row(client, image: np.ndarray, lazy, side: int, chunk) -> dict:
    """The robust range (0.5th and 99.5th percentiles) and the noise level, chunked."""
    def both(read):
        return read(lambda values: np.percentile(values, [0.5, 99.5]),
                    lambda values: noise_level(values, 0.29))

    (ref_range, ref_noise), t_ref, p_ref = _timed_here(lambda: both(
        lambda pct, noise: (pct(image), noise(image))))
    (got_range, got_noise), wall, worker, client_peak = _timed_on_cluster(
        client, lambda: (percentiles_in_chunks(lazy, [0.5, 99.5]),
                         noise_level_in_chunks(lazy, 0.29)))
    same = np.array_equal(got_range, ref_range) and got_noise == ref_noise
    return _identity_row(f"{side}^3 robust range and noise level, chunks {chunk[0]}^3", same,
                         "", "in memory", t_ref, p_ref, wall, worker, client_peak)


def segmentation_steps_only(sides=(128, 256)) -> list[dict]:
    """:func:`segmentation_step_rows` on a cluster of its own (2 worker processes)."""
    return _on_own_cluster(segmentation_step_rows, sides)


def _on_own_cluster(rows_of, sides) -> list[dict]:
    """``rows_of(client, folder, sides)`` on a LocalCluster of 2 worker processes, with a
    temporary folder for its stores."""
    from distributed import Client, LocalCluster

    with tempfile.TemporaryDirectory() as tmp, \
            LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                         dashboard_address="127.0.0.1:0") as cluster, Client(cluster) as client:
        return rows_of(client, Path(tmp), sides)


#: The options of the segment route's rows: component regions, a hand threshold relative
#: to the robust range (so the percentiles pass runs too), smoothing of 1 voxel.
_ROUTE_OPTIONS = {"region": "component", "relative_persistence": 0.05, "smooth": 1.0}


#: The options of the automatic rows: component regions, the automatic threshold, its
#: scale chosen among the automatic ones, the polarity check.
_AUTO_ROUTE_OPTIONS = {"region": "component"}


def segment_route_rows(client, folder: Path, sides=(128, 256)) -> list[dict]:
    """The chunked segment route (``segment_in_chunks``, its chamber and enclosure maps
    written to Zarr stores chunk by chunk, as ``cavitas segment --dask-local`` writes them)
    against ``segment()`` in memory with the same options (:data:`_ROUTE_OPTIONS`): labels
    and enclosures voxel for voxel, the table's columns row for row, time, worker and
    client extra peaks (after a first run at 32^3 that lets the workers warm up). Then the
    same in automatic mode (:data:`_AUTO_ROUTE_OPTIONS`) on an invented foam of the same
    side (``cavitas.scenes.foam``, a cell per 5000 voxels, noise 0.2 of the wall contrast,
    as uint16),
    where smoothed noise alone would give no region to compare."""
    _segment_route_row(client, folder, 32)
    rows = [_segment_route_row(client, folder, side) for side in sides]
    return rows + [_segment_route_row(client, folder, side, automatic=True)
                   for side in sides]


def _foam(side: int) -> np.ndarray:
    from cavitas.scenes import foam

    cells = max(20, side ** 3 // 5000)  # cells about 17 voxels across, most of them inside
    volume = np.asarray(foam((side,) * 3, cells=cells, noise=0.2, seed=1).image, np.float64)
    low, high = np.percentile(volume, [0.1, 99.9])
    return np.clip((volume - low) / (high - low) * 60000 + 2000, 0, 65535).astype(np.uint16)


def _segment_route_row(client, folder: Path, side: int, automatic: bool = False) -> dict:
    import dask.array as da

    from cavitas.segment import SegmentParams, segment
    from cavitas.segment._chunked_segment import segment_in_chunks

    params = SegmentParams(**(_AUTO_ROUTE_OPTIONS if automatic else _ROUTE_OPTIONS))
    image = _foam(side) if automatic else smoothed_noise(side)
    chunk = (side // 4,) * 3
    ref, t_ref, p_ref = _timed_here(lambda: segment(image, params=params))
    lazy = da.from_zarr(_stored(image, chunk, folder))
    written = {name: str(folder / f"route{side}_{name}.zarr")
               for name in ("labels", "enclosures")}

    def chunked():
        smoothed = folder / f"route{side}_smoothed.zarr"  # the command's staged store
        seg = segment_in_chunks(lazy, params=params, spacing=np.ones(3), unit="voxel",
                                smoothed_store=smoothed)
        seg.labels.to_zarr(written["labels"], overwrite=True)
        enclosures = (seg.enclosure_labels if seg.enclosure_labels is not None
                      else seg.labels * 0)
        enclosures.to_zarr(written["enclosures"], overwrite=True)
        if smoothed.exists():  # not made when the scale chosen is no smoothing
            shutil.rmtree(smoothed)
        return seg

    got, wall, worker, client_peak = _timed_on_cluster(client, chunked)
    same = (np.array_equal(np.asarray(da.from_zarr(written["labels"])), ref.labels)
            and np.array_equal(np.asarray(da.from_zarr(written["enclosures"])),
                               ref.enclosure_labels())
            and len(got.table) == len(ref.regions)
            and all(np.array_equal(got.table[name], ref.regions[name],
                                   equal_nan=got.table[name].dtype.kind == "f")
                    for name in got.table.names))
    same = same and got.threshold == ref.params["threshold"] and (
        got.smooth_sigma == ref.params["smooth_sigma"])
    mode = "automatic segment route (foam)" if automatic else "segment route"
    return _identity_row(f"{side}^3 {mode}, chunks {chunk[0]}^3", same,
                         f" ({len(got.table)} rows)", "segment() in memory", t_ref, p_ref, wall,
                         worker, client_peak)


def segment_route_only(sides=(128, 256)) -> list[dict]:
    """:func:`segment_route_rows` on a cluster of its own (2 worker processes)."""
    return _on_own_cluster(segment_route_rows, sides)


def measurement_rows(client, folder: Path, sides=(128, 256)) -> list[dict]:
    """``measure_in_chunks`` (as the command line runs it: the label map and the image read
    from Zarr stores, measuring blocks of whole chunks, ``measure/_chunked.py``) against
    ``measure_regions(..., thickness=False)`` of the whole arrays: every column (integers
    exactly, floats to 1e-12 relative), time, worker and client extra peaks. The label map:
    the components of the voxels below the median of the smoothed noise (faces
    connectivity, ``scipy.ndimage.label``), so regions cross every seam. After a first run
    at 32^3 that lets the workers warm up."""
    _measurement_row(client, folder, 32)
    return [_measurement_row(client, folder, side) for side in sides]


def _measurement_row(client, folder: Path, side: int) -> dict:
    import dask.array as da

    from cavitas.measure import measure_regions
    from cavitas.measure._chunked import measure_in_chunks

    image = smoothed_noise(side)
    labels, count = ndi.label(image < np.median(image))
    chunk = (side // 4,) * 3
    ref, t_ref, p_ref = _timed_here(lambda: measure_regions(labels, image=image,
                                                            thickness=False))
    stores = {name: folder / f"measure_{name}" for name in ("labels", "image")}
    for path in stores.values():
        path.mkdir(exist_ok=True)
    lazy_labels = da.from_zarr(_stored(labels.astype(np.int32), chunk, stores["labels"]))
    lazy_image = da.from_zarr(_stored(image, chunk, stores["image"]))
    got, wall, worker, client_peak = _timed_on_cluster(client, lambda: measure_in_chunks(
        lazy_labels, image=lazy_image))
    table = got.table
    same = table.names == ref.names and len(table) == len(ref) and all(
        np.allclose(table[name], ref[name], rtol=1e-12, atol=0, equal_nan=True)
        if ref[name].dtype.kind == "f" else np.array_equal(table[name], ref[name])
        for name in ref.names)
    return _identity_row(f"{side}^3 measurements, chunks {chunk[0]}^3", same,
                         f" to rounding ({count} regions)", "measure_regions", t_ref, p_ref,
                         wall, worker, client_peak)


def measurement_only(sides=(128, 256)) -> list[dict]:
    """:func:`measurement_rows` on a cluster of its own (2 worker processes)."""
    return _on_own_cluster(measurement_rows, sides)


def euler_rows(client, folder: Path, sides=(128, 256)) -> list[dict]:
    """``euler_curve_in_chunks`` of the smoothed uint16 noise from a Zarr store (bright walls,
    face connectivity, blocks of whole chunks as the command line runs it) against
    ``euler_curve(image).changes()``: levels and χ row for row, time, worker and client
    extra peaks (after a first run at 32^3)."""
    _euler_row(client, folder, 32)
    return [_euler_row(client, folder, side) for side in sides]


def _euler_row(client, folder: Path, side: int) -> dict:
    import dask.array as da

    from cavitas.cubical import euler_curve
    from cavitas.cubical._chunked_euler import euler_curve_in_chunks

    image = smoothed_noise(side)
    chunk = (side // 4,) * 3
    ref, t_ref, p_ref = _timed_here(lambda: euler_curve(image).changes())
    store = folder / "euler_image"
    store.mkdir(exist_ok=True)
    lazy = da.from_zarr(_stored(image, chunk, store))
    got, wall, worker, client_peak = _timed_on_cluster(client, lambda: euler_curve_in_chunks(
        lazy))
    same = np.array_equal(got.levels, ref.levels) and np.array_equal(got.chi, ref.chi)
    return _identity_row(f"{side}^3 Euler characteristic curve, chunks {chunk[0]}^3", same,
                         f" ({len(ref.levels)} levels)", "euler_curve", t_ref, p_ref, wall,
                         worker, client_peak)


def euler_only(sides=(128, 256)) -> list[dict]:
    """:func:`euler_rows` on a cluster of its own (2 worker processes)."""
    return _on_own_cluster(euler_rows, sides)
