"""Nested region labels of a chunked volume (segment/_chunked_regions.py) equal the in-memory ones.

Checks and their sources:

* Against the definition, with ``scipy.ndimage.label`` (SciPy's connected components, an
  outside library), on tiny volumes in chunks of one voxel and of random sizes: a region
  rooted at a tree node and closing at a level (at or below the node's breach, as
  delineate's are) is the component of ``{f < level}`` (complement connectivity, the sweep's
  direction; plateaus at the level stay out) that holds the node's core; each voxel carries
  the smallest region holding it (components of sublevel sets nest or are disjoint: the
  merge tree's laminar family, Carr, Snoeyink & Axen 2003, doi:10.1016/S0925-7721(02)00093-7,
  cited from memory), equal sets ordered by level, then as given.
* Identity with the in-memory labelling (``_regions.nested_map`` on ``cavity_sweep``'s order,
  at ``rank_of_level(level)``, as delineate calls it), voxel for voxel and in dtype, on random
  volumes, chunkings, masks, both connectivities and polarities, with any nodes (the outside
  too), levels above their breach, at infinity and between voxel values, several regions
  per node. That a chunked path must equal its one-process path exactly is common practice
  (DEVELOPERS.md: a parallel path equals its serial one).
* Pruning without the order (``_tree_order.prune_by_levels``) against ``_tree.prune`` with
  the in-memory ranks: the same chambers, enclosures and parents, the same levels.
* The chambers' breach regions (close level and a fraction of it) and the enclosures of a
  pruned tree on a lattice of cells cut by chunks through every cell (invented data: an
  identity check only), and the same on a loopback Dask LocalCluster, the chunked side
  from the chunked tree alone (pruned without the order), written to a Zarr store chunk
  by chunk.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import ndimage as ndi

from cavitas import ParameterError
from cavitas.cubical import cavity_sweep
from cavitas.cubical._chunked_tree import tree_chunks_here, tree_chunks_on_dask
from cavitas.segment._chunked_regions import chunked_nested_map, nested_map_in_chunks
from cavitas.segment._regions import Sweep, nested_map
from cavitas.segment._tree import prune
from cavitas.segment._tree_order import prune_by_levels
from tests.chunked_volumes import cell_lattice, lattice_case, random_cases, random_chunks


def _keys(image, walls):
    """Values in the sweep's direction (walls high), as the in-memory sweep reads them."""
    values = np.asarray(image, np.float64)
    return values if walls == "bright" else -values


def _in_memory(image, walls, conn, mask, node, level, ids):
    """``nested_map`` on the in-memory sweep, at the ranks of the levels."""
    order, tree = cavity_sweep(image, walls=walls, connectivity=conn, mask=mask)
    sweep = Sweep(_keys(image, walls), order, tree, conn, None if mask is None else ~mask)
    return nested_map(sweep, np.asarray(node), sweep.rank_of_level(_keys(level, walls)),
                      np.asarray(ids))


def _by_definition(image, walls, conn, mask, tree, node, level, ids):
    """Each voxel's smallest region, regions found with ``scipy.ndimage.label``."""
    structure = ndi.generate_binary_structure(image.ndim, image.ndim + 1 - conn)
    keys = _keys(image, walls)
    inside = np.ones(image.shape, bool) if mask is None else mask
    present = np.sort(keys[inside])
    regions = []
    for k, (n, lev) in enumerate(zip(node, _keys(level, walls), strict=True)):
        core = np.unravel_index(tree.core[n], image.shape)
        pieces = ndi.label(inside & (keys < lev), structure)[0]
        voxels = pieces == pieces[core] if pieces[core] else np.zeros(image.shape, bool)
        # levels between two voxel values hold the same voxels as the next value up
        at = np.searchsorted(present, lev)
        regions.append((int(voxels.sum()), present[at] if at < present.size else np.inf, k,
                        voxels))
    out = np.zeros(image.shape, np.int64)
    for *_, k, voxels in sorted(regions, key=lambda r: r[:3], reverse=True):
        out[voxels] = ids[k]  # the smallest region (the first in order) written last
    return out


def test_matches_definition_in_one_voxel_chunks():
    rng = np.random.default_rng(5)
    nested = 0
    for shape in ((7, 8), (4, 6, 6)):
        ndim = len(shape)
        for conn in (1, ndim):
            for walls in ("bright", "dark"):
                image = rng.integers(0, 10, size=shape).astype(np.uint8)
                mask = rng.random(shape) < 0.85 if conn == 1 else None
                _, tree = cavity_sweep(image, walls=walls, connectivity=conn, mask=mask)
                # every node but the outside, twice, at levels from its core to its breach
                node = np.repeat(np.arange(1, tree.n_nodes), 2)
                low, high = tree.core_level[node], tree.breach_level[node]
                level = low + rng.choice([0.5, 1.0, 1.0], node.size) * (high - low)
                ids = rng.permutation(node.size) + 1
                ref = _by_definition(image, walls, conn, mask, tree, node, level, ids)
                for chunks in (tuple((1,) * s for s in shape),
                               tuple(random_chunks(rng, s, 3) for s in shape)):
                    chunked = tree_chunks_here(image, chunks, walls=walls, connectivity=conn,
                                               mask=mask)
                    np.testing.assert_array_equal(
                        nested_map_in_chunks(chunked, node, level, ids), ref)
                nested += len(set(ref[ref > 0].tolist())) > 1
    assert nested >= 3  # the maps hold several regions, not one


@pytest.mark.parametrize("ndim", [2, 3])
def test_equals_in_memory_on_random_volumes(ndim):
    rng = np.random.default_rng(ndim + 10)
    for case in random_cases(np.random.default_rng(ndim + 10), ndim, 50):
        options = {"walls": case.walls, "connectivity": case.connectivity, "mask": case.mask}
        chunked = tree_chunks_here(case.image, case.chunks, **options)
        count = int(rng.integers(0, 2 * chunked.tree.n_nodes + 1))
        node = rng.integers(0, chunked.tree.n_nodes, count)
        values = case.image.ravel().astype(np.float64)
        level = rng.choice(np.concatenate([values, values + 0.5, [np.inf, -np.inf]]), count)
        ids = rng.permutation(count) + 1
        ref = _in_memory(case.image, case.walls, case.connectivity, case.mask, node, level,
                         ids)
        got = nested_map_in_chunks(chunked, node, level, ids)
        assert got.dtype == ref.dtype
        np.testing.assert_array_equal(got, ref)


def _grouped_cells(rng, shape):
    """Cells of pitch 4 whose walls on every other lattice plane are 150 higher: groups of
    cells join through the low walls before the group closes (enclosures; invented data)."""
    image = cell_lattice(rng, shape)
    high = np.zeros(shape, bool)
    for coord in np.indices(shape):
        high |= coord % 8 == 0
    return np.where(high, image + 150, image).astype(np.uint16)


def _pruned(image, walls, conn, mask, threshold):
    """``prune`` on the in-memory sweep, as regions_at calls it, and its levels in image
    units (close, formed)."""
    order, tree = cavity_sweep(image, walls=walls, connectivity=conn, mask=mask)
    sweep = Sweep(_keys(image, walls), order, tree, conn, None if mask is None else ~mask)
    hier = prune(tree, tree.persistence >= threshold, sweep.rank, sweep.level_of_rank,
                 threshold)
    sign = 1.0 if walls == "bright" else -1.0
    return tree, hier, (sign * sweep.level_of_rank(hier.close_rank),
                        sign * sweep.level_of_rank(hier.formed_rank))


def _delineated(tree, hier, close, fraction):
    """What delineate gives nested_map: the chambers' levels (their close level, or a
    fraction of the way from the core), the enclosures' close levels; in image units."""
    core = tree.core_level[hier.node]
    chambers = slice(0, hier.n_chambers)
    cut = core + fraction * (close - core)
    cut = (np.minimum(cut, close) if tree.walls == "bright" else np.maximum(cut, close))
    ids = np.arange(1, len(hier.node) + 1)
    return [(hier.node[chambers], close[chambers], ids[chambers]),
            (hier.node[chambers], cut[chambers], ids[chambers]),
            (hier.node[hier.n_chambers:], close[hier.n_chambers:], ids[hier.n_chambers:])]


def test_pruning_without_the_order_equals_prune():
    rng = np.random.default_rng(3)
    cases = [(c.image, c.walls, c.connectivity, c.mask)
             for ndim in (2, 3) for c in random_cases(rng, ndim, 30)]
    image = _grouped_cells(rng, (17, 17, 18))
    cases += [(image, "bright", 1, None), (image.max() - image, "dark", 3, None)]
    enclosures = 0
    for image, walls, conn, mask in cases:
        threshold = 1.0 if image.size < 600 else 100.0  # random volumes; the cells
        tree, ref, levels = _pruned(image, walls, conn, mask, threshold)
        got = prune_by_levels(tree, tree.persistence >= threshold, threshold)
        for name in ("node", "parent"):
            np.testing.assert_array_equal(getattr(got.hier, name), getattr(ref, name))
        assert got.hier.n_chambers == ref.n_chambers
        np.testing.assert_array_equal(got.close_level, levels[0])
        np.testing.assert_array_equal(got.formed_level, levels[1])
        enclosures += ref.n_enclosures
    assert enclosures >= 10


def test_breach_regions_and_enclosures_of_cells_cut_by_chunks():
    rng = np.random.default_rng(7)
    image = _grouped_cells(rng, (17, 17, 18))
    chunks = ((2, 3) * 3 + (2,), (3,) * 5 + (2,), (5, 2, 1, 3, 1, 2, 1, 3))
    for conn, walls in ((1, "bright"), (3, "dark")):
        scan = image if walls == "bright" else image.max() - image
        chunked = tree_chunks_here(scan, chunks, walls=walls, connectivity=conn)
        tree, hier, (close, _) = _pruned(scan, walls, conn, None, 100)
        specs = _delineated(tree, hier, close, 0.5)
        assert len(specs[0][0]) >= 27 and len(specs[2][0]) >= 1  # cells; an enclosure
        for node, level, ids in specs:
            ref = _in_memory(scan, walls, conn, None, node, level, ids)
            assert set(np.unique(ref).tolist()) == {0, *ids.tolist()}
            np.testing.assert_array_equal(nested_map_in_chunks(chunked, node, level, ids), ref)


def test_refusals():
    ring = np.zeros((4, 5), np.uint8)
    ring[1:3, 1:4] = 9
    chunked = tree_chunks_here(ring, ((2, 2), (5,)))
    with pytest.raises(ParameterError, match="node must hold nodes"):
        nested_map_in_chunks(chunked, [chunked.tree.n_nodes], [1.0], [1])
    with pytest.raises(ParameterError, match="one entry per region"):
        nested_map_in_chunks(chunked, [0, 0], [1.0], [1, 2])
    with pytest.raises(ParameterError, match="NaN"):
        nested_map_in_chunks(chunked, [0], [np.nan], [1])
    with pytest.raises(ParameterError, match="nested_map_in_chunks"):
        chunked_nested_map(chunked, [0], [1.0], [1])


# -- on a Dask cluster (tests/conftest.py: client) -------------------------------------------

@pytest.mark.cluster
@pytest.mark.parametrize("conn,walls", [(1, "bright"), (3, "dark")])
def test_dask_cluster_equals_in_memory(client, conn, walls, tmp_path):
    import dask.array as da
    import zarr

    case = lattice_case(conn, walls)
    # regular chunks (a Zarr store needs them) one voxel thick, cutting through every cell
    chunked = tree_chunks_on_dask(da.from_array(case.image, chunks=(1, 5, 5)), walls=walls,
                                  connectivity=conn, mask=da.from_array(case.mask, chunks=4))
    tree, hier, (close, _) = _pruned(case.image, walls, conn, case.mask, 100)
    expected = _delineated(tree, hier, close, 0.5)
    # the chunked side from the chunked tree alone
    pruned = prune_by_levels(chunked.tree, chunked.tree.persistence >= 100, 100)
    chambers, fraction, _ = _delineated(chunked.tree, pruned.hier, pruned.close_level, 0.5)
    node, level, ids = expected[0]
    ref = _in_memory(case.image, walls, conn, case.mask, node, level, ids)
    assert len(np.unique(ref)) >= 5  # the cells away from the ragged edge, and walls
    np.testing.assert_array_equal(chunked_nested_map(chunked, *chambers).compute(), ref)
    # the labels written to a Zarr store, one block per task
    labels = chunked_nested_map(chunked, *fraction)
    assert labels.chunks == ((1,) * 9, (5, 4), (5, 5))
    labels.to_zarr(str(tmp_path / "labels.zarr"))
    np.testing.assert_array_equal(zarr.open_array(str(tmp_path / "labels.zarr"))[...],
                                  _in_memory(case.image, walls, conn, case.mask, *expected[1]))
