"""The cavity tree of a chunked volume (cubical/_chunked_tree.py) equals the in-memory tree.

Checks and their sources:

* A tree built from its definition with ``scipy.ndimage.label`` (SciPy's connected
  components, an outside library) on tiny volumes cut into chunks of one voxel and of random
  sizes: the merge tree of the complement's sublevel sets with the elder rule (join trees:
  Carr, Snoeyink & Axen 2003, doi:10.1016/S0925-7721(02)00093-7, cited from memory; the
  elder rule: Edelsbrunner, Letscher & Zomorodian 2002, doi:10.1007/s00454-002-2885-2),
  voxels entering by (value, flat index) as DEVELOPERS.md fixes ties. Every node (of zero
  persistence too), its core, breach, parent and size.
* The pairs of nonzero persistence against the textbook Z/2 boundary-matrix reduction
  (``tests/oracle_reduction.py``) on the same volumes: the cavity diagram.
* Identity with the in-memory tree (``cavity_sweep``), field for field, on many random
  volumes, chunkings, dtypes, masks, connectivities and polarities; that a distributed path
  must equal its one-process path exactly is common practice (DEVELOPERS.md: a parallel path
  equals its serial one). The in-memory tree is checked against the reduction in
  ``test_persistence_oracle.py``.
* The same on a loopback Dask LocalCluster, with chunks of one voxel's thickness and chunks
  cutting through every cavity, and the refusal of non-finite values worded as in memory.
"""

from __future__ import annotations

from collections import Counter

import numpy as np
import pytest
from scipy import ndimage as ndi

from cavitas import InputFileError
from cavitas.cubical import cavity_sweep
from cavitas.cubical._chunked_tree import cavity_tree_in_chunks, chunked_cavity_tree
from tests.chunked_volumes import cell_lattice, lattice_case, random_cases, random_chunks
from tests.oracle_reduction import oracle_pairs

FIELDS = ("core", "core_level", "breach", "breach_level", "parent", "size")


def _assert_same_tree(ref, got):
    assert got.shape == ref.shape and got.walls == ref.walls
    assert got.connectivity == ref.connectivity
    for name in FIELDS:
        np.testing.assert_array_equal(getattr(got, name), getattr(ref, name), err_msg=name)


def _tree_by_labels(image, walls, conn, mask):
    """Nodes ``(core, breach, parent core, size)`` of the complement's merge tree, from
    the definition, one ``scipy.ndimage.label`` per voxel: voxels enter by rank (value,
    then flat index; the reverse of the values for dark walls); a component of the entered
    voxels is open if it touches the array border or a voxel outside the mask; a closed
    component is born with its first voxel (its core) and dies, at the voxel (breach)
    whose arrival joins it to an open or elder component, into the eldest (its parent:
    ``-1`` the outside)."""
    ndim = image.ndim
    structure = ndi.generate_binary_structure(ndim, ndim + 1 - conn)  # complement's rule
    values = image.ravel().astype(float)
    keys = values if walls == "bright" else -values
    inside = np.ones(image.size, bool) if mask is None else mask.ravel()
    order = [int(v) for v in np.lexsort((np.arange(image.size), keys)) if inside[v]]
    rank = np.full(image.size, -1)
    rank[order] = np.arange(len(order))
    border = np.ones(image.shape, bool)
    border[tuple(slice(1, -1) for _ in range(ndim))] = False
    opening = border.ravel() | ~inside

    def components(count):  # after the first ``count`` voxels entered
        entered = np.zeros(image.size, bool)
        entered[order[:count]] = True
        labels = ndi.label((entered | ~inside).reshape(image.shape), structure)[0].ravel()
        open_labels = set(labels[opening & (labels > 0)].tolist())
        return labels, open_labels

    def root(labels, open_labels, voxel):  # the eldest of a component; -1 if open
        if labels[voxel] in open_labels:
            return -1
        members = np.flatnonzero(labels == labels[voxel])
        return int(members[np.argmin(rank[members])])

    before = components(0)
    alive = {}  # core -> breach, parent, size, in order of birth
    for count, voxel in enumerate(order, start=1):
        after = components(count)
        if root(*after, voxel) == voxel:
            alive[voxel] = None
        for core in alive:
            if alive[core] is None and core != voxel and root(*after, core) != core:
                labels = before[0]
                alive[core] = (voxel, root(*after, core), int(np.sum(labels == labels[core])))
        before = after
    return alive


def _check_against_labels(tree, image, walls, conn, mask):
    nodes = _tree_by_labels(image, walls, conn, mask)
    assert tree.core[1:].tolist() == list(nodes)
    for i, (core, (breach, parent, size)) in enumerate(nodes.items(), start=1):
        assert tree.core[i] == core and tree.breach[i] == breach and tree.size[i] == size
        assert tree.core[tree.parent[i]] == parent  # core[0] is -1, the outside
        assert tree.core_level[i] == image.flat[core]
        assert tree.breach_level[i] == image.flat[breach]
    assert tree.size[0] == (image.size if mask is None else int(mask.sum()))


def test_matches_labels_and_reduction_in_one_voxel_chunks():
    # scipy.ndimage.label on every sublevel set (the tree's definition), and the textbook
    # reduction (ELZ 2002; ZC 2005) for the cavity pairs.
    rng = np.random.default_rng(18)
    zero_persistence = 0
    for shape in ((5, 6), (3, 4, 4)):
        ndim = len(shape)
        for conn in (1, ndim):
            for walls in ("bright", "dark"):
                image = rng.integers(0, 4, size=shape).astype(np.uint8)
                mask = rng.random(shape) < 0.85 if conn == 1 else None
                finite, _, _ = oracle_pairs(image, conn, walls=walls, mask=mask)
                for chunks in (tuple((1,) * s for s in shape),
                               tuple(random_chunks(rng, s, 3) for s in shape)):
                    tree = cavity_tree_in_chunks(image, chunks, walls=walls,
                                                 connectivity=conn, mask=mask)
                    _check_against_labels(tree, image, walls, conn, mask)
                    kept = tree.persistence[1:] > 0
                    assert Counter(zip(tree.breach_level[1:][kept].tolist(),
                                       tree.core_level[1:][kept].tolist(),
                                       strict=True)) == finite[ndim - 1]
                    zero_persistence += int(np.sum(~kept))
    assert zero_persistence > 0  # the nodes the diagram drops were exercised


@pytest.mark.parametrize("ndim", [2, 3])
def test_equals_in_memory_tree_on_random_volumes_and_chunks(ndim):
    # Identity with the whole-volume engine (common practice), ties and masks included.
    for case in random_cases(np.random.default_rng(ndim), ndim, 60):
        options = {"walls": case.walls, "connectivity": case.connectivity, "mask": case.mask}
        _assert_same_tree(cavity_sweep(case.image, **options)[1],
                          cavity_tree_in_chunks(case.image, case.chunks, **options))


def test_cells_larger_than_chunks():
    # Cells of 5^3 voxels in chunks of 2 or 3: every cell spans several chunks, its noise
    # minima die inside it on either side of the seams (sizes summed across them).
    rng = np.random.default_rng(4)
    image = cell_lattice(rng, (19, 20, 21), pitch=6)
    for conn, walls in ((1, "bright"), (3, "dark")):
        scan = image if walls == "bright" else image.max() - image
        _, ref = cavity_sweep(scan, walls=walls, connectivity=conn)
        got = cavity_tree_in_chunks(scan, ((2, 3) * 3 + (4,), (3,) * 6 + (2,), (5, 2) * 3),
                                    walls=walls, connectivity=conn)
        _assert_same_tree(ref, got)
        assert np.sum(ref.persistence > 100) >= 27  # the cells' cavities


# -- on a Dask cluster (tests/conftest.py: client) -------------------------------------------

@pytest.mark.cluster
@pytest.mark.parametrize("conn,walls", [(1, "bright"), (3, "dark")])
def test_dask_cluster_equals_in_memory_tree(client, conn, walls):
    import dask.array as da

    case = lattice_case(conn, walls)  # slices 1 voxel thick through cells, a ragged ROI
    _, ref = cavity_sweep(case.image, walls=walls, connectivity=conn, mask=case.mask)
    got = chunked_cavity_tree(da.from_array(case.image, chunks=case.chunks), walls=walls,
                              connectivity=conn, mask=da.from_array(case.mask, chunks=5))
    _assert_same_tree(ref, got)
    deep = ref.persistence[1:] > 100  # the four cells away from the ragged edge, at least
    assert np.sum(deep) >= 4 and np.all(ref.size[1:][deep] >= 27)


@pytest.mark.cluster
def test_dask_cluster_2d_image_and_refusal(client):
    import dask.array as da

    rng = np.random.default_rng(9)
    image = cell_lattice(rng, (11, 13))
    for conn, walls in ((1, "dark"), (2, "bright")):
        _, ref = cavity_sweep(image, connectivity=conn, walls=walls)
        _assert_same_tree(ref, chunked_cavity_tree(
            da.from_array(image, chunks=((3, 0, 8), (1, 5, 7))), connectivity=conn,
            walls=walls))
    broken = np.ones((4, 5, 6), np.float32)
    broken[2, 2, 2] = broken[0, 4, 5] = np.nan  # in two chunks: the total is reported
    with pytest.raises(InputFileError) as in_memory:
        cavity_sweep(broken)
    with pytest.raises(InputFileError) as chunked:
        chunked_cavity_tree(da.from_array(broken, chunks=2))
    assert str(chunked.value) == str(in_memory.value)
