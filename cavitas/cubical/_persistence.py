"""Public entry points: :func:`persistence` (the diagram) and :func:`cavity_sweep` (the tree)."""

from __future__ import annotations

from collections.abc import Iterable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from typing import Any

import numpy as np

from .. import _checks
from .._cores import usable_cores
from .._errors import ParameterError
from ..io._volume import Volume
from ._chunked import chunked_persistence, is_chunked
from ._diagram import PAIR_DTYPE, Diagram
from ._kernels import cavity_sweep_kernel, h0_sweep, neighbor_chain, worth_prefetching
from ._neighbors import check_connectivity, dual_connectivity, grid_shape3
from ._plane import plane_cavity_merges, plane_critical, plane_h0_merges, plane_links
from ._ring import ring_tables
from ._sort import engine_array, index_dtype, sort_voxels
from ._tree import CavityTree
from ._tunnels import tunnel_pairs

__all__ = ["cavity_sweep", "persistence"]

#: Image size (voxels) above which the two sweeps run in parallel by default; below it,
#: starting a thread costs more than it saves.
_PARALLEL_FROM = 65_536


@dataclass(frozen=True)
class _CriticalPixels:
    """The pixels a 2D sweep visits (:mod:`._plane`): flat indices and values in raster
    order, their sweep ``order``, and the links of each (``links[start[c]:start[c + 1]]``)."""

    pixels: np.ndarray
    values: np.ndarray
    order: np.ndarray
    start: np.ndarray
    links: np.ndarray

    def new_uf(self) -> np.ndarray:
        """A union-find work array over them (one more slot: the outside)."""
        return np.empty(len(self.pixels) + 1, self.pixels.dtype)


def checked_image(image: Any) -> np.ndarray:
    """``image`` (an array or a :class:`~cavitas.Volume`) as a 2D or 3D array of a dtype the
    engine reads, without a copy when possible; anything else is a :class:`ParameterError`."""
    name = "image"
    if isinstance(image, Volume):
        name = f"'{image.name}'"
        image = image.data
    arr = np.asarray(image)  # a view of an ndarray or a memory map, not a copy
    if arr.ndim not in (2, 3):
        raise ParameterError(
            f"image must be a 2D or 3D array; got {arr.ndim} dimension(s), shape {arr.shape}."
        )
    if arr.size == 0:
        raise ParameterError(f"image must hold at least one voxel; got shape {arr.shape}.")
    return engine_array(arr, name)


def checked_mask(mask: Any, shape: tuple[int, ...]) -> np.ndarray | None:
    """``mask`` as a C-contiguous boolean array of ``shape`` selecting at least one voxel
    (``None`` stays ``None``); anything else is a :class:`ParameterError`."""
    if mask is None:
        return None
    mask = np.asarray(mask)
    if mask.shape != shape:
        raise ParameterError(f"mask must have the image's shape {shape}; got {mask.shape}.")
    if mask.dtype != np.bool_:
        raise ParameterError(f"mask must be a boolean array; got dtype {mask.dtype}.")
    if not mask.any():
        raise ParameterError("mask selects no voxel; expected at least one True value.")
    return np.ascontiguousarray(mask)


class _Prepared:
    """A validated image: flat values, mask, grid geometry and, for the general kernels,
    the sweep order.

    ``plane`` (default: for 2D images) selects the 2D sweeps of :mod:`._plane`, which sort
    only the critical pixels and build the cavity tree without node sizes.
    """

    def __init__(self, image: Any, walls: str, connectivity: object, mask: Any,
                 plane: bool | None = None) -> None:
        arr = checked_image(image)
        _checks.walls(walls)
        self.name = f"'{image.name}'" if isinstance(image, Volume) else "image"  # for messages
        self.shape = tuple(arr.shape)
        self.ndim = arr.ndim
        self.walls = walls
        self.bright = walls == "bright"
        self.connectivity = check_connectivity(self.ndim, connectivity)
        self.flat = arr.reshape(-1)  # a view when C-contiguous, else one copy
        mask = checked_mask(mask, self.shape)
        self.mask = None if mask is None else mask.reshape(-1)
        self.plane = self.ndim == 2 if plane is None else plane
        if not self.plane:
            self.order, nonfinite = sort_voxels(self.flat, self.mask, descending=not self.bright)
            self._reject_nonfinite(nonfinite)
        self.grid = grid_shape3(self.shape)
        self.zmargin = 1 if self.ndim == 3 else 0

    def _reject_nonfinite(self, nonfinite: int) -> None:
        _checks.refuse_nonfinite(nonfinite, image=self.name, masked=self.mask is not None)

    def new_parent(self) -> np.ndarray:
        """A union-find work array (n + 1 slots; the kernels initialise it)."""
        return np.empty(self.flat.shape[0] + 1, index_dtype(self.flat.shape[0] + 1))

    def _plane_critical(self, for_h0: bool, parent: np.ndarray | None) -> _CriticalPixels:
        """Steps 1 and 2 of :mod:`._plane`: the critical pixels, linked, in sweep order."""
        conn = self.connectivity if for_h0 else dual_connectivity(2, self.connectivity)
        count, reps = ring_tables(conn)
        values = self.flat.view(np.uint8) if self.flat.dtype == np.bool_ else self.flat
        use_mask = self.mask is not None
        mask_u8 = self.mask.view(np.uint8) if self.mask is not None else np.zeros(1, np.uint8)
        if parent is None:
            parent = self.new_parent()  # freed when this method returns
        ny, nx = self.shape
        args = (values, mask_u8, use_mask, self.bright, for_h0, ny, nx)
        pixels, codes, max_links, nonfinite = plane_critical(*args, count, reps, parent,
                                                             values.dtype.kind == "f")
        self._reject_nonfinite(nonfinite)
        start: np.ndarray = np.empty(len(pixels) + 1, index_dtype(max_links + 1))
        links = np.empty(max_links, pixels.dtype)
        links = links[:plane_links(*args, conn == 2, count, reps, parent, pixels, codes, start,
                                   links)]
        del codes
        pixel_values = values[pixels]
        order, _ = sort_voxels(pixel_values, descending=not self.bright)
        return _CriticalPixels(pixels, pixel_values, order, start, links)

    def h0(self, parent: np.ndarray | None = None) -> np.ndarray:
        if self.plane:
            crit = self._plane_critical(True, parent)
            births, deaths, essential = (crit.pixels[a] for a in plane_h0_merges(
                crit.order, crit.start, crit.links, crit.values, crit.new_uf()))
        else:
            # A work array made here is an argument only, so it is freed as the kernel returns.
            births, deaths, essential = h0_sweep(
                self.flat, self.order, self.new_parent() if parent is None else parent,
                *neighbor_chain(self.shape, self.connectivity), *self.grid, self.zmargin,
                worth_prefetching(self.shape),
            )
        rows = np.empty(len(births) + len(essential), PAIR_DTYPE)
        rows["birth_voxel"] = np.concatenate((essential, births))
        rows["death_voxel"] = np.concatenate((np.full(len(essential), -1), deaths))
        rows["birth"] = self.flat[rows["birth_voxel"]]
        rows["death"][: len(essential)] = -np.inf if self.bright else np.inf
        rows["death"][len(essential):] = self.flat[deaths]
        return _sorted_rows(rows)

    def tree(self, parent: np.ndarray | None = None) -> CavityTree:
        """The cavity tree; without node sizes (``size=None``) on the 2D path."""
        if self.plane:
            crit = self._plane_critical(False, parent)
            core, breach, tparent = plane_cavity_merges(
                crit.order, crit.start, crit.links, crit.new_uf())
            for nodes in (core, breach):
                nodes[nodes >= 0] = crit.pixels[nodes[nodes >= 0]]
            size = None
        else:
            neighbors = neighbor_chain(self.shape, dual_connectivity(self.ndim, self.connectivity))
            use_mask = self.mask is not None
            mask_u8 = self.mask.view(np.uint8) if self.mask is not None else np.zeros(1, np.uint8)
            core, breach, tparent, size = (a.astype(np.int64) for a in cavity_sweep_kernel(
                self.order, self.new_parent() if parent is None else parent, mask_u8, use_mask,
                *neighbors, *self.grid, self.zmargin, worth_prefetching(self.shape),
            ))  # the kernel grows 4-byte arrays while its work array is alive
        core_level = np.empty(len(core))
        core_level[1:] = self.flat[core[1:]]
        core_level[0] = -np.inf if self.bright else np.inf
        breach_level = np.full(len(core), np.nan)
        closed = breach >= 0
        breach_level[closed] = self.flat[breach[closed]]
        return CavityTree(
            shape=self.shape, walls=self.walls, connectivity=self.connectivity, core=core,
            core_level=core_level, breach=breach, breach_level=breach_level, parent=tparent,
            size=size,
        )

    def h1(self) -> np.ndarray:
        """H1 rows of a 3D image (:mod:`._tunnels`), on the same order as the sweeps."""
        found = tunnel_pairs(self.flat, self.order, self.grid, self.connectivity)
        rows = np.empty(len(found.birth_voxel) + len(found.essential), PAIR_DTYPE)
        rows["birth_voxel"] = np.concatenate((found.essential, found.birth_voxel))
        rows["death_voxel"] = np.concatenate((np.full(len(found.essential), -1),
                                              found.death_voxel))
        rows["birth"] = self.flat[rows["birth_voxel"]]
        rows["death"][: len(found.essential)] = -np.inf if self.bright else np.inf
        rows["death"][len(found.essential):] = self.flat[found.death_voxel]
        return _sorted_rows(rows)

    def both(self, parallel: bool) -> tuple[np.ndarray, CavityTree]:
        """H0 rows and the cavity tree.

        In parallel, the cavity sweep runs in a second thread (the kernels release the GIL)
        on its own work array; otherwise the sweeps run one after the other on one array.
        """
        if not parallel:
            parent = self.new_parent()
            return self.h0(parent), self.tree(parent)
        with ThreadPoolExecutor(max_workers=1, thread_name_prefix="cavitas-sweep") as pool:
            cavities = pool.submit(self.tree)
            return self.h0(), cavities.result()


def _sorted_rows(rows: np.ndarray) -> np.ndarray:
    """Rows by decreasing persistence, ties by birth voxel (deterministic).

    Two stable radix sorts (birth voxel, then persistence), as a lexicographic sort.
    """
    by_voxel = sort_voxels(np.ascontiguousarray(rows["birth_voxel"]))[0]
    pers = np.abs(rows["birth"] - rows["death"])[by_voxel]
    return rows[by_voxel[sort_voxels(pers, descending=True)[0]]]


def _cavity_rows(tree: CavityTree) -> np.ndarray:
    keep = np.flatnonzero((tree.breach >= 0) & (tree.breach_level != tree.core_level))
    rows = np.empty(len(keep), PAIR_DTYPE)
    rows["birth"] = tree.breach_level[keep]
    rows["death"] = tree.core_level[keep]
    rows["birth_voxel"] = tree.breach[keep]
    rows["death_voxel"] = tree.core[keep]
    return _sorted_rows(rows)


def _sweep_rows(prep: _Prepared, wanted: tuple[int, ...], parallel: bool) -> dict[int, np.ndarray]:
    """The rows of H0 and of the cavities (``ndim - 1``) among ``wanted``, by the sweeps."""
    top = prep.ndim - 1
    if 0 in wanted and top in wanted:
        h0, tree = prep.both(parallel)
        return {0: h0, top: _cavity_rows(tree)}
    if 0 in wanted:
        return {0: prep.h0()}
    if top in wanted:
        return {top: _cavity_rows(prep.tree())}
    return {}


def _check_dims(dims: Iterable[int] | None, ndim: int) -> tuple[int, ...]:
    if dims is None:
        return (0, ndim - 1)
    try:
        wanted = sorted({int(d) for d in np.atleast_1d(np.asarray(dims))})
    except (TypeError, ValueError):
        raise ParameterError(
            f"dims must be a sequence of homology dimensions in [0, {ndim - 1}]; got {dims!r}."
        ) from None
    for d in wanted:
        if not 0 <= d < ndim:
            raise ParameterError(
                f"dims must hold homology dimensions in [0, {ndim - 1}] for a {ndim}D image; "
                f"got {d}."
            )
    if not wanted:
        raise ParameterError(f"dims must name at least one dimension; got {dims!r}.")
    return tuple(wanted)


def persistence(
    image: Any,
    *,
    walls: str = "bright",
    connectivity: int = 1,
    mask: np.ndarray | None = None,
    dims: Iterable[int] | None = None,
    parallel: bool | None = None,
) -> Diagram:
    """Persistence diagram of the wall components (H0), the cavities (H_{ndim-1}) and, in
    3D on request, the loops (H1: tunnels and handles).

    Parameters
    ----------
    image : (M, N) or (P, M, N) ndarray, Volume or chunked array
        Intensities, of an integer or float dtype; a memory map is read in place (it is
        copied once only if it is not C-contiguous). NaN and infinite values are rejected
        unless they lie outside ``mask``. A Dask array, a Zarr array or an HDF5 dataset is
        never loaded whole: it is computed chunk by chunk on Dask's current scheduler (the
        workers of an active ``distributed.Client``), with the very same result
        (:func:`cavitas.cubical._chunked.chunked_persistence`).
    walls : {"bright", "dark"}
        ``"bright"``: superlevel filtration, bright voxels enter the wall set first, so
        births are >= deaths and an essential H0 class dies at ``-inf``. ``"dark"``:
        sublevel filtration (essential death ``+inf``). Values are always in the input's
        units.
    connectivity : {1, ndim}
        Connectivity of the wall set: 1 (faces; voxels as vertices of the cubical complex,
        a cell enters when all its voxels are in) or ``ndim`` (full; voxels as top cells, a
        face enters when any adjacent voxel is in). Cavities use the complementary rule.
    mask : bool ndarray of the image's shape, optional
        Region of interest. Voxels outside it never join the wall set and belong to the
        outside; the ROI border is not a wall. H0 then has one essential class per
        connected component of the masked wall set. Holes of the mask are outside too, so
        there are no essential cavities.
    dims : sequence of int, optional
        Homology dimensions to compute; default ``(0, ndim - 1)``. ``(0, 1, 2)`` gives the
        whole diagram of a 3D image; its H1 is a reduction (see Notes) that takes longer
        and more memory than the other two, so it is computed only when asked for.
    parallel : bool, optional
        Run the H0 and cavity sweeps of an in-memory image at the same time, in two
        threads (with H1 asked for: H1 in one thread, the two sweeps one after the other in
        the other). Default: for images of more than 65,536 voxels, when the process may
        use more than one CPU core. It costs one more union-find array (4 bytes per voxel);
        ``False`` keeps memory at its lowest.

    Returns
    -------
    Diagram
        Pairs with nonzero persistence, per dimension, by decreasing persistence (ties by
        birth voxel). H0: birth = value of the component's first voxel (``birth_voxel``),
        death = value of the voxel that merges it into an elder component
        (``death_voxel``). Cavities: birth = breach level (``birth_voxel`` is the breach),
        death = core level (``death_voxel`` is the core, the darkest voxel inside).
        H1 (3D): birth = level at which a loop of the walls closes (``birth_voxel`` enters
        with the closing edge), death = level at which it is filled (``death_voxel``
        enters with the filling square); a loop of the ROI itself (a handle of the mask)
        never fills and is essential.

    Notes
    -----
    Ties are broken by (value, flat index). One stable radix sort of the voxels (O(n); one
    counting pass for 8/16-bit data) serves both sweeps: the cavity sweep visits voxels in
    increasing value (bright walls), H0 in the reverse order. Each sweep is a union-find with
    path halving, near-linear in the number of voxels. Memory beyond the input, per voxel
    below 2**31 voxels: the order and one union-find array per sweep (4 bytes each, 12 in
    all; 8 with ``parallel=False``, when the sweeps share one array; the sort of 32/64-bit
    data briefly needs a second 4-byte buffer). Pairs and tree nodes come on top (40 bytes
    per tree node). A non-C-contiguous input is copied once. The kernels release the GIL,
    so several images can also be processed in threads.

    A 2D image takes a shorter way to the same pairs (:mod:`._plane`): one pass in raster
    order settles every pixel whose earlier neighbours form one piece of its 8-pixel ring
    (most pixels), and only the others (about 4 % of a smooth image, up to half of white
    noise) are sorted and go through the union-find. Memory per sweep: one 4-byte array
    per pixel and about 16 bytes per such critical pixel.

    The cavity diagram follows from Alexander duality: cavities of the wall set are the
    components of the complement that do not reach the outside.

    H1 of a 3D image is reduced on the explicit cubical complex of the same filtration
    (:mod:`._tunnels`): edges that end an H0 class are cleared by one more union-find pass,
    the rest are paired in cohomology, apparent pairs without any reduction and the others
    by a Z/2 column reduction [3]_ [4]_. Time grows with the number of non-apparent
    columns (a few per cent of the edges of a smooth image). Memory on top of the sweeps:
    4 bytes per voxel (wall ranks), 1 byte per vertex (edge flags) and 4 bytes per vertex
    during the clearing pass, plus the reduced columns.

    References
    ----------
    .. [1] H. Edelsbrunner, D. Letscher, A. Zomorodian, "Topological persistence and
       simplification", Discrete Comput. Geom. 28 (2002), doi:10.1007/s00454-002-2885-2.
    .. [2] A. Zomorodian, G. Carlsson, "Computing persistent homology", Discrete Comput.
       Geom. 33 (2005), doi:10.1007/s00454-004-1146-y.
    .. [3] U. Bauer, M. Kerber, J. Reininghaus, "Clear and compress: computing persistent
       homology in chunks", Topological Methods in Data Analysis and Visualization III
       (2014), doi:10.1007/978-3-319-04099-8_7.
    .. [4] U. Bauer, "Ripser: efficient computation of Vietoris-Rips persistence
       barcodes", J. Appl. Comput. Topol. 5 (2021), doi:10.1007/s41468-021-00071-5.

    Examples
    --------
    A bright ring of value 9 around a dark core of value 1:

    >>> import numpy as np
    >>> ring = np.full((5, 5), 0, np.uint8)
    >>> ring[1:4, 1:4] = 9
    >>> ring[2, 2] = 1
    >>> dgm = persistence(ring)
    >>> dgm.pairs(1)[["birth", "death"]].tolist()
    [(9.0, 1.0)]
    >>> dgm.pairs(0)[["birth", "death"]].tolist()
    [(9.0, -inf)]

    The same ring in one plane of a volume is a loop (H1): it closes at 9 and is filled
    when the background (0) around it enters.

    >>> frame = np.zeros((3, 5, 5), np.uint8)
    >>> frame[1, 1:4, 1:4] = 9
    >>> frame[1, 2, 2] = 0
    >>> persistence(frame, dims=(0, 1, 2)).pairs(1)[["birth", "death"]].tolist()
    [(9.0, 0.0)]
    """
    if is_chunked(image):
        return chunked_persistence(image, walls=walls, connectivity=connectivity, mask=mask,
                                   dims=dims)
    prep = _Prepared(image, walls, connectivity, mask)
    wanted = _check_dims(dims, prep.ndim)
    if parallel is None:
        parallel = prep.flat.size > _PARALLEL_FROM and usable_cores() > 1
    middle = prep.ndim == 3 and 1 in wanted
    if middle and parallel:  # the reduction, the longest step, beside the two sweeps
        with ThreadPoolExecutor(max_workers=1, thread_name_prefix="cavitas-h1") as pool:
            tunnels = pool.submit(prep.h1)
            pairs = _sweep_rows(prep, wanted, False)
            pairs[1] = tunnels.result()
    else:
        pairs = _sweep_rows(prep, wanted, bool(parallel))
        if middle:
            pairs[1] = prep.h1()
    pairs = {dim: pairs[dim] for dim in wanted}
    return Diagram(
        pairs, shape=prep.shape, walls=walls, connectivity=prep.connectivity,
        masked=prep.mask is not None,
    )


def cavity_sweep(
    image: Any,
    *,
    walls: str = "bright",
    connectivity: int = 1,
    mask: np.ndarray | None = None,
) -> tuple[np.ndarray, CavityTree]:
    """The cavity-sweep order of the voxels and the merge tree of the complement.

    Parameters
    ----------
    image, walls, connectivity, mask
        As for :func:`persistence`.

    Returns
    -------
    order : ndarray of int32 (int64 from 2**31 voxels on)
        Flat indices of the voxels **inside the mask** (all voxels without a mask) in sweep
        order: increasing value for bright walls, decreasing for dark walls, ties by
        increasing flat index. Voxels outside the mask are left out: they belong to the
        outside from the start.
    tree : CavityTree
        One node per component of the complement at its birth; node 0 is the outside.
        The cavity diagram is exactly the nodes with nonzero persistence. Neighbours are
        those of :func:`cavitas.cubical._neighbors.neighbor_offsets` with the
        complementary connectivity.

    Examples
    --------
    >>> import numpy as np
    >>> img = np.array([[0, 0, 0, 0, 0],
    ...                 [0, 5, 5, 5, 0],
    ...                 [0, 5, 2, 5, 0],
    ...                 [0, 5, 5, 5, 0],
    ...                 [0, 0, 0, 0, 0]], np.uint8)
    >>> order, tree = cavity_sweep(img)
    >>> int(order[-1]), tree.n_nodes, int(tree.core[1]), float(tree.breach_level[1])
    (18, 2, 12, 5.0)
    """
    prep = _Prepared(image, walls, connectivity, mask, plane=False)  # the tree's sizes
    return prep.order, prep.tree()
