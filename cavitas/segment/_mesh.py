"""Surface meshes of regions (marching cubes with spacing), written as PLY or STL."""

from __future__ import annotations

import os
import struct

import numpy as np
from scipy import ndimage as ndi

from .._errors import ParameterError
from .._shared.atomic import atomic_path

__all__ = ["region_mesh", "write_mesh"]


def region_mesh(labels: np.ndarray, label: int, spacing: tuple[float, ...],
                box: tuple[slice, ...] | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Vertices (physical ``z, y, x``) and triangles of the 0.5 surface of ``labels == label``.

    Examples
    --------
    >>> lab = np.zeros((7, 7, 7), np.int32); lab[2:5, 2:5, 2:5] = 1
    >>> verts, faces = region_mesh(lab, 1, (1.0, 1.0, 2.0))
    >>> float(verts[:, 2].max()) <= 5 * 2.0, faces.shape[1]
    (True, 3)
    """
    from skimage.measure import marching_cubes

    if labels.ndim != 3:
        raise ParameterError(f"Surface meshes need a 3D volume; got a {labels.ndim}D image.")
    if box is None:
        box = ndi.find_objects((labels == label).astype(np.int32))[0]
    start = np.array([max(s.start - 1, 0) for s in box])
    crop = labels[tuple(slice(a, s.stop + 1) for a, s in zip(start, box, strict=True))] == label
    crop = np.pad(crop, 1).astype(np.float32)
    verts, faces, _, _ = marching_cubes(crop, 0.5, spacing=tuple(spacing))
    verts += (start - 1) * np.asarray(spacing)
    return verts, faces


def write_mesh(path: str | os.PathLike, verts: np.ndarray, faces: np.ndarray, *,
               force: bool = False, comment: str = "") -> None:
    """Write a triangle mesh as binary PLY (``.ply``) or binary STL (``.stl``), atomically.

    Coordinates are written as ``x, y, z`` (the mesh formats' order) in physical units.
    """
    xyz = np.ascontiguousarray(verts[:, ::-1], np.float32)
    faces = np.asarray(faces, np.int32)
    suffix = str(path).lower().rsplit(".", 1)[-1]
    if suffix not in ("ply", "stl"):
        raise ParameterError(f"Mesh file '{path}' must end in .ply or .stl.")
    with atomic_path(path, force=force) as tmp, open(tmp, "wb") as fh:
        if suffix == "ply":
            head = ["ply", "format binary_little_endian 1.0"]
            head += [f"comment {line}" for line in comment.splitlines() if line]
            head += [f"element vertex {len(xyz)}", "property float x", "property float y",
                     "property float z", f"element face {len(faces)}",
                     "property list uchar int vertex_indices", "end_header"]
            fh.write(("\n".join(head) + "\n").encode("ascii", "replace"))
            fh.write(xyz.astype("<f4").tobytes())
            rec = np.zeros(len(faces), [("n", "u1"), ("v", "<i4", (3,))])
            rec["n"] = 3
            rec["v"] = faces
            fh.write(rec.tobytes())
        else:
            tri = xyz[faces]
            normal = np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0])
            norm = np.linalg.norm(normal, axis=1, keepdims=True)
            normal = normal / np.where(norm > 0, norm, 1)
            header = comment.encode("ascii", "replace")[:80].ljust(80, b" ")
            fh.write(header + struct.pack("<I", len(faces)))
            rec = np.zeros(len(faces), [("n", "<f4", (3,)), ("t", "<f4", (3, 3)),
                                        ("a", "<u2")])
            rec["n"] = normal
            rec["t"] = tri
            fh.write(rec.tobytes())
