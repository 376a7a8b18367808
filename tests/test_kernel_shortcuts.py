"""Speed shortcuts in the compiled sweeps and labelling passes change no result.

* Prefetching (a cache hint the kernels give only on large images,
  :func:`cavitas.cubical._kernels.worth_prefetching`): the H0 sweep, the cavity sweep and
  the basin flooding give the same arrays with and without it.
* The basin flooding (:func:`cavitas.segment._regions.basin_map`) reads the labels around a
  voxel without branches where it can: it equals the flooding rule written out plainly
  below in Python (each voxel, in sweep order, takes the basin its labelled neighbours
  agree on, else that of the earliest-visited one, the array border and the voxels beyond
  the ROI being the outside basin, visited first; voxels of a component without a core
  wait and take the basin their component first touches).

Inputs: smoothed noise rounded to a few integers (ties on purpose), 2D and 3D, both
connectivities, with and without a region of interest; the sweep order and neighbours are
those of :mod:`cavitas.cubical` (the general-purpose references here are NumPy and SciPy's
``ndimage`` for the input; the rule is the module's documented one).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import ndimage as ndi

from cavitas.cubical import cavity_sweep
from cavitas.cubical._kernels import cavity_sweep_kernel, h0_sweep, neighbor_chain
from cavitas.cubical._neighbors import dual_connectivity
from cavitas.cubical._persistence import _Prepared
from cavitas.segment._label_kernels import basin_pass
from cavitas.segment._regions import Sweep, basin_map

SHAPES = [(31, 34), (14, 15, 16)]


def _rounded_noise(rng: np.random.Generator, shape: tuple[int, ...]) -> np.ndarray:
    field = ndi.gaussian_filter(rng.standard_normal(shape), 0.8)
    return np.round(field / field.std() * 4).astype(np.int16)


def _roi(rng: np.random.Generator, shape: tuple[int, ...]) -> np.ndarray:
    roi = rng.random(shape) > 0.02  # scattered holes
    roi[: shape[0] // 4, : shape[1] // 2] = False  # and a block
    return roi


@pytest.mark.parametrize("shape", SHAPES)
@pytest.mark.parametrize("full", [False, True])
def test_prefetching_changes_no_sweep(shape, full):
    connectivity = len(shape) if full else 1
    rng = np.random.default_rng(sum(shape) + connectivity)
    image = _rounded_noise(rng, shape)
    prep = _Prepared(image, "bright", connectivity, None, plane=False)
    grid = (*prep.grid, prep.zmargin)
    h0 = [h0_sweep(prep.flat, prep.order, prep.new_parent(),
                   *neighbor_chain(shape, connectivity), *grid, fetch) for fetch in (False, True)]
    dual = neighbor_chain(shape, dual_connectivity(len(shape), connectivity))
    tree = [cavity_sweep_kernel(prep.order, prep.new_parent(), np.zeros(1, np.uint8), False,
                                *dual, *grid, fetch) for fetch in (False, True)]
    for plain, fetched in (h0, tree):
        assert len(plain[0]) > 5  # pairs / nodes to compare
        for a, b in zip(plain, fetched, strict=True):
            np.testing.assert_array_equal(a, b)


def _plain_basins(sweep: Sweep, cores: np.ndarray, outside_label: int) -> np.ndarray:
    """The flooding rule, one voxel and one neighbour at a time (see the module notes)."""
    shape = sweep.shape
    label = np.zeros(sweep.values.size, np.int64)
    label[sweep.outside] = outside_label
    core_label = dict(zip(cores.tolist(), range(1, len(cores) + 1), strict=True))
    waiting_parent: dict[int, int] = {}  # union-find of the voxels still without a basin
    found: dict[int, int] = {}  # basin of each such component's root, once it has one

    def root(v: int) -> int:
        while waiting_parent[v] != v:
            v = waiting_parent[v]
        return v

    steps = [tuple(int(c) for c in step) for step in sweep.offsets_zyx]
    for v in sweep.order.tolist():
        if v in core_label:
            label[v] = core_label[v]
            continue
        at = np.unravel_index(v, shape)
        met: list[tuple[int, int]] = []  # (rank of the neighbour, its basin)
        unlabelled_roots: set[int] = set()
        for step in steps:
            near = tuple(a + d for a, d in zip(at, step[3 - len(shape):], strict=True))
            if any(c < 0 or c >= n for c, n in zip(near, shape, strict=True)):
                met.append((-1, outside_label))  # the array border
                continue
            u = int(np.ravel_multi_index(near, shape))
            if label[u] > 0:
                met.append((int(sweep.rank[u]), int(label[u])))
            elif u in waiting_parent:
                r = root(u)
                if r in found:
                    met.append((int(sweep.rank[u]), found[r]))
                else:
                    unlabelled_roots.add(r)
        if met:
            basins = {b for _, b in met}
            basin = basins.pop() if len(basins) == 1 else min(met)[1]
            label[v] = basin
            for r in unlabelled_roots:
                found[r] = basin
        else:
            waiting_parent[v] = v
            for r in unlabelled_roots:
                waiting_parent[r] = v
    for v in waiting_parent:
        if label[v] == 0:
            label[v] = found.get(root(v), 0)
    return label.reshape(shape)


@pytest.mark.parametrize("shape", SHAPES)
@pytest.mark.parametrize("full", [False, True])
@pytest.mark.parametrize("masked", [False, True])
def test_basin_flooding_equals_the_plain_rule(shape, full, masked):
    connectivity = len(shape) if full else 1
    rng = np.random.default_rng(3 * sum(shape) + connectivity + masked)
    image = _rounded_noise(rng, shape)
    roi = _roi(rng, shape) if masked else None
    order, tree = cavity_sweep(image, connectivity=connectivity, mask=roi)
    sweep = Sweep(image.astype(np.float32), order, tree, connectivity,
                  None if roi is None else ~roi)
    # some nodes' cores only: the other components wait until they touch a basin
    cores = tree.core[1:][rng.random(tree.n_nodes - 1) < 0.5]
    outside_label = len(cores) + 1
    got = basin_map(sweep, cores, outside_label)
    np.testing.assert_array_equal(got, _plain_basins(sweep, cores, outside_label))
    assert len(np.unique(got)) > 5, len(np.unique(got))
    fetched = np.zeros(sweep.values.size, got.dtype)
    label_of_core = np.zeros(sweep.values.size, got.dtype)
    label_of_core[cores] = np.arange(1, len(cores) + 1)
    basin_pass(sweep.order, sweep.rank, label_of_core, sweep.outside, *sweep.grid,
               sweep.offsets, sweep.offsets_zyx, outside_label, fetched, True)
    np.testing.assert_array_equal(fetched.reshape(shape), got)
