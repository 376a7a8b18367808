"""Test oracle: the textbook boundary-matrix reduction on the full cubical complex.

Source: the standard persistence algorithm (Edelsbrunner, Letscher & Zomorodian 2002,
doi:10.1007/s00454-002-2885-2; Zomorodian & Carlsson 2005, doi:10.1007/s00454-004-1146-y):
order all cells of a filtered complex by (filtration value, dimension), reduce the Z/2
boundary matrix column by column by adding earlier columns until each lowest one is unique;
a column j with lowest one i pairs cell i (birth) with cell j (death); cells that neither
die nor kill are essential. It is written plainly, with no shortcut of the engine under test,
and builds every cell of every dimension explicitly:

* voxels as vertices (wall connectivity 1): the cells of the grid ``[0, n-1]^d``; a cell
  is present when all its vertices are (mask) voxels and enters when the last of them does;
* voxels as top cells (wall connectivity ``ndim``): the cells of ``[-1/2, n-1/2]^d``; a cell
  is present when it touches a (mask) voxel and enters with the first such voxel.

Cells are addressed by doubled coordinates: an odd coordinate is an interval on that axis,
an even one a point (so voxels sit at even coordinates in V, at odd ones in T). Columns are
Python integers used as Z/2 bit sets. Meant for arrays of a few thousand cells at most.
"""

from __future__ import annotations

import itertools
from collections import Counter

import numpy as np

__all__ = ["Complex", "build_complex", "oracle_pairs"]


class Complex:
    """A filtered cubical complex: per cell its value (image units), dimension and faces."""

    def __init__(self, values, dims, faces, bright):
        self.values = np.asarray(values, dtype=float)
        self.dims = np.asarray(dims, dtype=int)
        self.faces = faces
        self.bright = bright

    def euler_characteristic(self, level: float) -> int:
        """Alternating cell count of the sub-complex present at threshold ``level``."""
        present = self.values >= level if self.bright else self.values <= level
        return int(sum((-1) ** int(d) for d in self.dims[present]))


def build_complex(image, connectivity, *, walls="bright", mask=None) -> Complex:
    """All cells of the V- (connectivity 1) or T- (connectivity ndim) construction."""
    image = np.asarray(image, dtype=float)
    mask = np.ones(image.shape, bool) if mask is None else np.asarray(mask, bool)
    bright = walls == "bright"
    vertices = connectivity == 1
    # values combine as: V -> the last voxel to enter, T -> the first one.
    if vertices:
        combine = min if bright else max
        ranges = [range(2 * s - 1) for s in image.shape]
    else:
        combine = max if bright else min
        ranges = [range(2 * s + 1) for s in image.shape]
    cells = {}
    for c in itertools.product(*ranges):
        per_axis = []
        for ci, s in zip(c, image.shape, strict=True):
            if vertices:
                per_axis.append([ci // 2] if ci % 2 == 0 else [(ci - 1) // 2, (ci + 1) // 2])
            else:
                per_axis.append(
                    [(ci - 1) // 2] if ci % 2 == 1 else [i for i in (ci // 2 - 1, ci // 2)
                                                         if 0 <= i < s]
                )
        voxels = list(itertools.product(*per_axis))
        inside = [v for v in voxels if mask[v]]
        if vertices and len(inside) < len(voxels):
            continue
        if not inside:
            continue
        cells[c] = combine(image[v] for v in inside)
    index = {}
    values, dims, faces = [], [], []
    keys = sorted(cells, key=lambda c: (-cells[c] if bright else cells[c],
                                        sum(ci % 2 for ci in c), c))
    for c in keys:
        index[c] = len(values)
        values.append(cells[c])
        dims.append(sum(ci % 2 for ci in c))  # odd coordinate = interval
        fc = []
        for axis, ci in enumerate(c):
            if ci % 2:
                for step in (-1, 1):
                    f = c[:axis] + (ci + step,) + c[axis + 1:]
                    fc.append(index[f])  # faces come earlier in the filtration order
        faces.append(fc)
    return Complex(values, dims, faces, bright)


def oracle_pairs(image, connectivity, *, walls="bright", mask=None):
    """Persistence of the full complex by plain column reduction over Z/2.

    Returns
    -------
    finite : dict dim -> Counter of (birth, death) with birth != death
    essential : dict dim -> list of the birth values of the classes that never die
    complex : Complex
    """
    cx = build_complex(image, connectivity, walls=walls, mask=mask)
    pivot_of_low = {}
    columns = []
    finite = {d: Counter() for d in range(np.asarray(image).ndim)}
    killed = set()
    killers = set()
    for j, fc in enumerate(cx.faces):
        col = 0
        for i in fc:
            col ^= 1 << i
        while col:
            low = col.bit_length() - 1
            if low not in pivot_of_low:
                break
            col ^= columns[pivot_of_low[low]]
        columns.append(col)
        if col:
            low = col.bit_length() - 1
            pivot_of_low[low] = j
            killed.add(low)
            killers.add(j)
            b, d = cx.values[low], cx.values[j]
            if b != d:
                finite[int(cx.dims[low])][(b, d)] += 1
    essential = {d: [] for d in finite}
    for i in range(len(cx.faces)):
        if i not in killed and i not in killers:
            essential[int(cx.dims[i])].append(float(cx.values[i]))
    return finite, essential, cx
