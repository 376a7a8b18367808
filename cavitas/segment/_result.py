"""The :class:`Segmentation` result and the hierarchy table it carries."""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

import numpy as np

from .._caution import RESEARCH_ONLY
from .._shared.units import size_unit
from .._table import Table
from ..cubical._diagram import PAIR_DTYPE, Diagram
from ..io._volume import Volume

__all__ = ["CavityDiagram", "NumberedTable", "RegionCounts", "Segmentation", "build_table",
           "cavity_diagram", "label_dtype", "number_regions"]


def label_dtype(n_labels: int) -> np.dtype:
    """int32 labels, int64 when more than 2**31 - 1 regions are needed (scipy's policy)."""
    return np.dtype(np.int32) if n_labels < np.iinfo(np.int32).max else np.dtype(np.int64)


@dataclass(frozen=True)
class CavityDiagram:
    """The cavity diagram of a run and, per row, whether it is a chamber and its margin."""

    diagram: Diagram
    kept: np.ndarray     # bool: the feature is a chamber of the result
    margin: np.ndarray   # persistence minus the threshold


def cavity_diagram(tree: Any, chamber_nodes: np.ndarray, *, shape: tuple[int, ...],
                   walls: str, connectivity: int, masked: bool,
                   threshold: float) -> CavityDiagram:
    """The diagram of the cavity tree (walls high, as :func:`segment` sweeps it): one pair
    per node of nonzero persistence but the outside, in node order, in the input's units
    (levels times -1 for dark walls)."""
    sign = 1.0 if walls == "bright" else -1.0
    pers = tree.persistence
    rows = np.flatnonzero(pers > 0)
    rows = rows[rows != 0]
    pairs = np.zeros(len(rows), PAIR_DTYPE)
    pairs["birth"] = sign * tree.breach_level[rows]
    pairs["death"] = sign * tree.core_level[rows]
    pairs["birth_voxel"] = tree.breach[rows]
    pairs["death_voxel"] = tree.core[rows]
    diagram = Diagram({len(shape) - 1: pairs}, shape=shape, walls=walls,
                      connectivity=connectivity, masked=masked)
    return CavityDiagram(diagram, np.isin(rows, chamber_nodes), pers[rows] - threshold)


@dataclass(eq=False)
class Segmentation:
    """Result of :func:`cavitas.segment`: label maps, the hierarchy table, the diagram.

    Attributes
    ----------
    labels : ndarray of int32
        Chambers ``1..n``; walls, the outside (and border-cut regions unless
        ``keep_border``) are 0.
    regions : Table
        One row per chamber, enclosure and border-cut region (``kind`` says which) with
        parent, depth, birth, death, persistence, margin, core and breach voxels, level
        used, own and enclosed voxel counts and volumes, and ``touches_border``.
    diagram : Diagram
        Cavity diagram (H_{d-1}) of the image at the detection scale, input units.
    kept : ndarray of bool
        Per row of ``diagram.pairs(d-1)``: whether that feature is a chamber of the result
        (it passed the selection and the volume bounds).
    margin : ndarray of float
        Per row of the diagram: persistence minus the threshold.
    threshold : float
        Persistence threshold used (input units).
    noise : float
        Estimated noise standard deviation (input units).
    params : dict
        Every parameter and every value chosen automatically.
    volume : Volume
        The input.

    Examples
    --------
    >>> import numpy as np
    >>> from cavitas.segment import segment
    >>> img = np.zeros((16, 16)); img[2:14, 2:14] = 1; img[4:12, 4:12] = 0
    >>> seg = segment(img, min_persistence=0.5, region="breach")
    >>> seg.regions["kind"].tolist(), int(seg.labels.max())
    (['chamber', 'cut'], 1)
    >>> int(seg.shell(1).sum()), int((seg.three_class(1) == 1).sum())
    (32, 64)
    """

    labels: np.ndarray
    regions: Table
    diagram: Diagram
    kept: np.ndarray
    margin: np.ndarray
    threshold: float
    noise: float
    params: dict[str, Any]
    volume: Volume
    all_labels: np.ndarray | None = field(repr=False, default=None)
    enclosure_map: np.ndarray | None = field(repr=False, default=None)
    background: np.ndarray | None = field(repr=False, default=None)

    @classmethod
    def assemble(cls, parts: TableParts, *, volume: Volume, params: Any,
                 chosen: dict[str, Any], tree: Any) -> Segmentation:
        """Build the result from the pieces :func:`segment` computed."""
        cavities = cavity_diagram(tree, parts.chamber_nodes, shape=volume.shape,
                                  walls=params.walls, connectivity=chosen["connectivity"],
                                  masked=parts.masked, threshold=chosen["threshold"])
        record = {**params.to_dict(), **chosen, "caution": RESEARCH_ONLY}
        return cls(
            labels=parts.labels, regions=parts.table, diagram=cavities.diagram,
            kept=cavities.kept, margin=cavities.margin,
            threshold=chosen["threshold"], noise=chosen["noise_sigma"], params=record,
            volume=volume, all_labels=parts.all_labels,
            enclosure_map=parts.enclosure_labels, background=parts.background,
        )

    @property
    def hierarchy(self) -> Table:
        """The regions table (chambers, enclosures and border-cut regions)."""
        return self.regions

    @property
    def enclosures(self) -> Table:
        """Rows of the enclosures only."""
        return self.regions.select(self.regions["kind"] == "enclosure")

    def enclosure_labels(self) -> np.ndarray:
        """Label map of the enclosures (innermost per voxel; 0 elsewhere)."""
        if self.enclosure_map is None:
            return np.zeros(self.labels.shape, self.labels.dtype)
        return self.enclosure_map

    @cached_property
    def partition(self) -> np.ndarray:
        """Every voxel of the specimen given to a region, walls split at their ridge line.

        The regions of :attr:`labels` grown over the walls until they meet, along the line
        of highest wall signal in the image smoothed at the delineation scale; 0 in the
        background (the medium, border-cut regions, beyond the ROI). Computed on first use.
        See :mod:`cavitas.segment._partition`.
        """
        from ._noise import smooth, work_dtype
        from ._partition import partition_map

        data = np.asarray(self.volume.data)
        if data.dtype == np.bool_:
            data = data.view(np.uint8)
        bright = self.params["walls"] == "bright"
        if data.dtype.kind == "f" and not np.isfinite(data).all():  # only beyond the ROI
            finite = np.isfinite(data)
            fill = data[finite].min() if bright else data[finite].max()
            data = np.where(finite, data, fill).astype(data.dtype, copy=False)
        sigma = float(self.params["delineation_sigma"]) / np.asarray(self.volume.spacing, float)
        image = smooth(data, tuple(sigma), dtype=work_dtype(data.dtype),
                       sign=1.0 if bright else -1.0)
        background = (np.zeros(self.labels.shape, bool) if self.background is None
                      else self.background)
        return partition_map(self.labels, image, background)

    def shell(self, label: int, thickness: float = 0.0) -> np.ndarray:
        """Wall voxels sharing a face with region ``label``, thickened by ``thickness``
        (physical units): the same shell as the shell map and the table's shell columns."""
        from ._shells import shell

        return shell(self, label, thickness=thickness)

    def three_class(self, label: int, thickness: float = 0.0) -> np.ndarray:
        """uint8 map of one region: 1 inside, 2 shell, 0 outside."""
        from ._shells import three_class

        return three_class(self, label, thickness=thickness)

    def __repr__(self) -> str:
        kinds = self.regions["kind"] if len(self.regions) else np.array([])
        return (f"Segmentation({int((kinds == 'chamber').sum())} chambers, "
                f"{int((kinds == 'enclosure').sum())} enclosures, "
                f"{int((kinds == 'cut').sum())} border-cut, threshold={self.threshold:.4g}, "
                f"noise={self.noise:.4g})")


def _depths(parent: np.ndarray) -> np.ndarray:
    depth = np.full(len(parent), -1, np.int64)

    def walk(i: int) -> int:
        chain = []
        while depth[i] < 0:
            chain.append(i)
            p = parent[i]
            if p <= 0:
                depth[i] = 0
                chain.pop()
                break
            i = p - 1
        d = depth[i]
        for j in reversed(chain):
            d += 1
            depth[j] = d
        return d

    for i in range(len(parent)):
        walk(i)
    return depth


@dataclass
class ChamberValues:
    """What the table says of each chamber, from the detection scale it was found at.

    Levels are values of the image at that scale with walls high (the table applies the
    polarity); ``node`` is the chamber's node in the base scale's cavity tree, -1 for a
    chamber taken from another scale.
    """

    birth: np.ndarray         # breach level
    death: np.ndarray         # core level
    breach_voxel: np.ndarray
    core_voxel: np.ndarray
    threshold: np.ndarray     # persistence threshold at its scale
    scale: np.ndarray         # Gaussian sigma of its scale, physical units
    node: np.ndarray

    def take(self, rows: np.ndarray) -> ChamberValues:
        """The values of ``rows`` (an index or mask), in a new :class:`ChamberValues`."""
        return ChamberValues(**{k: v[rows] for k, v in vars(self).items()})

    def put(self, row: int, source: ChamberValues, source_row: int) -> None:
        """Overwrite ``row`` with ``source_row`` of ``source``, in place."""
        for key, values in vars(self).items():
            values[row] = vars(source)[key][source_row]

    @classmethod
    def concatenate(cls, parts: list[ChamberValues]) -> ChamberValues:
        """One :class:`ChamberValues` of ``parts`` in order."""
        return cls(**{k: np.concatenate([vars(p)[k] for p in parts]) for k in vars(parts[0])})


@dataclass
class EnclosureValues:
    """What the table says of each enclosure (levels walls high), from its scale's sweep."""

    birth: np.ndarray         # the level it closes at
    death: np.ndarray         # the level it formed at
    breach_voxel: np.ndarray
    core_voxel: np.ndarray

    @classmethod
    def of(cls, sweep: Any, hier: Any) -> EnclosureValues:
        """The enclosures of ``hier`` (ids after its chambers) on ``sweep``."""
        close, formed = hier.close_rank[hier.n_chambers:], hier.formed_rank[hier.n_chambers:]
        return cls(birth=sweep.level_of_rank(close), death=sweep.level_of_rank(formed),
                   breach_voxel=sweep.order[close],
                   core_voxel=sweep.tree.core[hier.node[hier.n_chambers:]])


@dataclass
class TableParts:
    """What :func:`build_table` hands to :meth:`Segmentation.assemble`."""

    labels: np.ndarray                  # the label map users get
    all_labels: np.ndarray              # chambers and border-cut regions
    table: Table                        # one row per region
    chamber_nodes: np.ndarray           # cavity-tree node of each chamber row
    enclosure_labels: np.ndarray | None
    background: np.ndarray              # no region's and no wall: medium, cut, outside ROI
    masked: bool                        # an ROI was given


@dataclass(frozen=True)
class RegionCounts:
    """The voxel counts the regions table needs, taken from the label maps whole or chunk by
    chunk: ``work`` per label ``0..n_chambers + n_cut`` of the delineation's map,
    ``enclosure`` per enclosure (voxels it owns in the enclosures' map), ``on_faces`` the
    delineation's labels present on the array's faces."""

    work: np.ndarray
    enclosure: np.ndarray
    on_faces: np.ndarray


@dataclass(frozen=True)
class NumberedTable:
    """The regions table and the renumbering of the delineation's labels behind it."""

    table: Table
    lut: np.ndarray              # delineation label -> final id (0: dropped)
    enclosure_ids: np.ndarray    # per enclosure: its final id
    n_chambers: int              # chambers kept (final ids 1..n_chambers)
    chamber_nodes: np.ndarray    # cavity-tree node of each chamber row
    dtype: np.dtype              # of the final label maps


def build_table(*, vol: Volume, sign: float, chambers: ChamberValues,
                enclosures: EnclosureValues, hier: Any, outside: np.ndarray, regions: Any,
                tau: float, scale: float, params: Any) -> TableParts:
    """Apply the volume bounds, renumber, and build the regions table.

    Chamber rows take their values from ``chambers``; enclosures from ``enclosures``, with
    threshold ``tau`` and detection ``scale`` (the base scale's); ``outside`` marks the
    voxels beyond the ROI.

    ``regions`` (a :class:`~cavitas.segment._delineate.Delineation`) holds chambers
    ``1..n_chambers`` and border-cut pieces after them; its ``open_to_border`` marks the
    chambers that became border-cut pieces. Final ids: chambers ``1..K``, enclosures
    ``K+1..K+E``, border-cut regions after.
    """
    from ._regions import face_labels, label_counts

    work, enclosure_map = regions.labels, regions.enclosures
    n_ch, n_enc = hier.n_chambers, hier.n_enclosures
    enc_own = np.zeros(n_enc, np.int64)
    if enclosure_map is not None:
        enc_own = label_counts(enclosure_map, n_ch + n_enc + 1)[n_ch + 1:]
    counts = RegionCounts(label_counts(work, n_ch + regions.n_cut + 1), enc_own,
                          face_labels(work))
    numbered = number_regions(counts, unit=vol.unit, ndim=vol.ndim,
                              voxel_volume=vol.voxel_volume, sign=sign, chambers=chambers,
                              enclosures=enclosures, hier=hier, n_cut=regions.n_cut,
                              nested=regions.nested, dropped=regions.open_to_border,
                              level=regions.level, tau=tau, scale=scale, params=params)
    table, k, dtype = numbered.table, numbered.n_chambers, numbered.dtype
    all_labels = numbered.lut.astype(dtype)[work]  # memory: no int64 label map on the way
    labels = np.where(all_labels <= k, all_labels, 0).astype(dtype, copy=False)
    enc_labels = None
    if enclosure_map is not None:
        enc_labels = np.zeros(work.shape, dtype)
        inside = enclosure_map > 0
        enc_labels[inside] = numbered.enclosure_ids[enclosure_map[inside] - n_ch - 1]
    if params.keep_border:
        labels = all_labels
    # neither a region of the label map nor a wall: the outside basin, regions not shown
    # (border-cut pieces, the medium, chambers outside the volume bounds) and beyond the ROI
    background = regions.outside_basin | ((work > 0) & (labels == 0))
    background |= outside.reshape(work.shape)
    return TableParts(labels, all_labels, table, numbered.chamber_nodes, enc_labels, background,
                      bool(outside.any()))


def number_regions(counts: RegionCounts, *, unit: str, ndim: int, voxel_volume: float,
                   sign: float, chambers: ChamberValues, enclosures: EnclosureValues,
                   hier: Any, n_cut: int, nested: dict[int, int], dropped: np.ndarray,
                   level: np.ndarray, tau: float, scale: float,
                   params: Any) -> NumberedTable:
    """:func:`build_table`'s volume bounds, numbering and table, from the label maps' counts
    alone (a chunked volume's come from per-chunk counts). ``n_cut``, ``nested``,
    ``dropped`` (chambers open to the border) and ``level`` (each chamber's) are the
    delineation's (:class:`~cavitas.segment._delineate.Delineation`)."""
    used_level = level
    n_ch, n_enc = hier.n_chambers, hier.n_enclosures
    voxel = voxel_volume
    own = counts.work[1:n_ch + 1]
    # chambers open to the border were moved to the border-cut pieces; a chamber left with
    # no voxel of its own (its basin all wall) is no region
    ok = ~dropped & (own > 0)
    if params.min_volume is not None:
        ok &= own * voxel >= params.min_volume
    if params.max_volume is not None:
        ok &= own * voxel <= params.max_volume
    cut_own = counts.work[n_ch + 1:]
    cut_ok = np.ones(n_cut, bool)
    if params.max_volume is not None:
        cut_ok &= cut_own * voxel <= params.max_volume
    k = int(ok.sum())
    m = int(cut_ok.sum())
    new_ch = np.zeros(n_ch + 1, np.int64)
    new_ch[1:][ok] = np.arange(1, k + 1)
    new_enc = np.arange(k + 1, k + n_enc + 1)
    new_cut = np.zeros(n_cut, np.int64)
    new_cut[cut_ok] = np.arange(k + n_enc + 1, k + n_enc + m + 1)
    lut = np.concatenate([new_ch, new_cut])
    dtype = label_dtype(k + n_enc + m)

    def remap_parent(p: int) -> int:
        if p == 0:
            return 0
        return int(new_enc[p - n_ch - 1]) if p > n_ch else int(new_ch[p])

    mine = chambers.take(ok)
    ch_nodes = mine.node
    ch_parent = np.array([remap_parent(p) for p in hier.parent[:n_ch][ok]], np.int64)
    old_ids = np.flatnonzero(ok) + 1
    for j, old in enumerate(old_ids):
        host = nested.get(int(old))
        if host is not None and host <= n_ch and new_ch[host] > 0:
            ch_parent[j] = new_ch[host]
    enc_parent = np.array([remap_parent(p) for p in hier.parent[n_ch:]], np.int64)
    parent = np.concatenate([ch_parent, enc_parent, np.zeros(m, np.int64)])

    own_all = np.concatenate([own[ok], counts.enclosure, cut_own[cut_ok]]).astype(np.int64)
    n = k + n_enc + m
    depth = _depths(parent)
    enclosed = own_all.copy()
    for i in np.argsort(-depth, kind="stable"):
        p = parent[i]
        if p > 0 and (p <= k) == (i < k):
            enclosed[p - 1] += enclosed[i]

    ch_level = used_level[ok]
    nan_m = np.full(m, np.nan)
    birth = np.concatenate([sign * mine.birth, sign * enclosures.birth, nan_m])
    death = np.concatenate([sign * mine.death, sign * enclosures.death, nan_m])
    persistence = np.abs(birth - death)
    threshold = np.concatenate([mine.threshold, np.full(n_enc, tau), nan_m])
    scales = np.concatenate([mine.scale, np.full(n_enc + m, scale)])
    breach_voxel = np.concatenate([mine.breach_voxel, enclosures.breach_voxel, np.full(m, -1)])
    core_voxel = np.concatenate([mine.core_voxel, enclosures.core_voxel, np.full(m, -1)])
    row_level = np.concatenate([sign * ch_level, sign * enclosures.birth, nan_m])
    touches = np.zeros(n, bool)
    touches[k + n_enc:] = True
    on_faces = lut[counts.on_faces]
    touches[on_faces[(on_faces > 0) & (on_faces <= k)] - 1] = True  # keep_border chambers
    kind = np.array(["chamber"] * k + ["enclosure"] * n_enc + ["cut"] * m, dtype=object)
    vunit = size_unit(unit, ndim)
    table = Table(
        {
            "label": np.arange(1, n + 1),
            "kind": kind,
            "parent": parent,
            "depth": depth,
            "birth": birth,
            "death": death,
            "persistence": persistence,
            "margin": persistence - threshold,
            "detection_scale": scales,
            "core_voxel": core_voxel,
            "breach_voxel": breach_voxel,
            "level": row_level,
            "own_voxels": own_all,
            "own_volume": own_all * voxel,
            "enclosed_voxels": enclosed,
            "enclosed_volume": enclosed * voxel,
            "touches_border": touches,
        },
        units={"own_volume": vunit, "enclosed_volume": vunit, "detection_scale": unit},
        meta={"threshold": tau, "caution": RESEARCH_ONLY},
    )
    return NumberedTable(table, lut, new_enc, k, ch_nodes, dtype)
