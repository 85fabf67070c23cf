"""Per-face and per-vertex statistics of triangle meshes (pure functions on arrays).

Conventions: ``vertices`` (n, 3) float64 metres, ``faces`` (k, 3) int64 with
counter-clockwise winding seen from outside. Nothing here mutates its inputs
or raises on bad *data*: degenerate cases come back as masks.

Vertex areas are the barycentric ones (a third of each incident triangle's
area), so they sum to the surface area exactly (to rounding). Vertex normals
are area-weighted (the sum of incident face cross products, i.e. face normals
weighted by face area, then normalised); trimesh weights by corner angle
instead, the two differ by a fraction of a degree on smooth meshes
(LIBRARIES.md: ~0.06 degrees on average).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import sparse
from scipy.sparse import csgraph

from .._typing import BoolArray, FloatArray, IntArray

__all__ = [
    "face_cross", "face_areas", "face_normals", "vertex_areas", "vertex_normals", "surface_area",
    "edges", "EdgeCounts", "edge_counts", "euler_characteristic", "degenerate_faces",
    "vertex_adjacency", "components", "mean_edge_length", "referenced",
]


def referenced(n_vertices: int, faces: IntArray) -> BoolArray:
    """(n,) bool: vertices used by at least one face (bincount, faster than np.unique)."""
    f = np.asarray(faces, dtype=np.int64)
    return np.bincount(f.ravel(), minlength=n_vertices)[:n_vertices] > 0


def face_cross(vertices: FloatArray, faces: IntArray) -> FloatArray:
    """(k, 3) float64: ``(b - a) x (c - a)`` per face; length is twice the area (m^2)."""
    v = np.asarray(vertices, dtype=np.float64)
    f = np.asarray(faces, dtype=np.int64)
    a = v[f[:, 0]]
    return np.cross(v[f[:, 1]] - a, v[f[:, 2]] - a)


def face_areas(vertices: FloatArray, faces: IntArray, *, cross: FloatArray | None = None) -> FloatArray:
    """(k,) float64 triangle areas, m^2 (``cross``: :func:`face_cross` if already computed)."""
    c = face_cross(vertices, faces) if cross is None else cross
    return 0.5 * np.sqrt(np.einsum("ij,ij->i", c, c))


def face_normals(vertices: FloatArray, faces: IntArray) -> tuple[FloatArray, BoolArray]:
    """Unit face normals (k, 3) float64 and a (k,) bool ``valid`` mask.

    Faces of zero area (``valid`` false) get a zero normal.
    """
    c = face_cross(vertices, faces)
    norm = np.linalg.norm(c, axis=1)
    valid = norm > 0
    out = np.zeros_like(c)
    out[valid] = c[valid] / norm[valid, None]
    return out, valid


def vertex_areas(vertices: FloatArray, faces: IntArray, *, cross: FloatArray | None = None) -> FloatArray:
    """(n,) float64 barycentric vertex areas, m^2: a third of every incident face's area.

    Unreferenced vertices get 0. ``vertex_areas(...).sum() == face_areas(...).sum()``
    up to rounding.
    """
    n = len(vertices)
    fa = face_areas(vertices, faces, cross=cross) / 3.0
    f = np.asarray(faces, dtype=np.int64)
    return np.bincount(f.ravel(), weights=np.repeat(fa, 3), minlength=n)


def vertex_normals(vertices: FloatArray, faces: IntArray, *,
                   cross: FloatArray | None = None) -> tuple[FloatArray, BoolArray]:
    """Area-weighted unit vertex normals (n, 3) float64 and a (n,) bool ``valid`` mask.

    Each vertex sums the cross products of its incident faces (face normal times
    twice the area) with ``np.bincount``; vertices whose sum vanishes (unreferenced
    or only degenerate faces) are invalid and get a zero normal.
    """
    n = len(vertices)
    f = np.asarray(faces, dtype=np.int64)
    c = face_cross(vertices, f) if cross is None else np.asarray(cross)
    idx = f.ravel()
    acc = np.stack([np.bincount(idx, weights=np.repeat(c[:, j], 3), minlength=n) for j in range(3)], axis=1)
    norm = np.linalg.norm(acc, axis=1)
    valid = norm > 0
    acc[valid] /= norm[valid, None]
    acc[~valid] = 0.0
    return acc, valid


def surface_area(vertices: FloatArray, faces: IntArray) -> float:
    """Total area, m^2."""
    return float(face_areas(vertices, faces).sum())


def edges(faces: IntArray) -> IntArray:
    """(3k, 2) int64 directed half-edges ``(f[i], f[i+1])`` in face order (face j gives rows 3j..3j+2)."""
    f = np.asarray(faces, dtype=np.int64)
    return np.stack([f.ravel(), f[:, [1, 2, 0]].ravel()], axis=1)


@dataclass(frozen=True)
class EdgeCounts:
    """Undirected edges of a mesh and how often they are used.

    Attributes
    ----------
    unique : (e, 2) int64
        Sorted vertex pairs.
    count : (e,) int64
        Faces using each edge: 1 on a boundary, 2 in a closed manifold, >2 non-manifold.
    same_direction : (e,) bool
        An edge used twice in the same direction: the two faces disagree on winding.
    inverse : (3k,) int64
        For each half-edge of :func:`edges`, its row in ``unique``.
    """

    unique: IntArray
    count: IntArray
    same_direction: BoolArray
    inverse: IntArray


def edge_counts(faces: IntArray) -> EdgeCounts:
    """Count the faces on each undirected edge and spot winding disagreements."""
    he = edges(faces)
    key = np.stack([np.minimum(he[:, 0], he[:, 1]), np.maximum(he[:, 0], he[:, 1])], axis=1)
    if key.shape[0] == 0:
        z = np.zeros(0, dtype=np.int64)
        return EdgeCounts(np.zeros((0, 2), np.int64), z, np.zeros(0, bool), z)
    n = int(key.max()) + 1
    code = key[:, 0] * n + key[:, 1]  # one int64 per edge: 1-D unique is much faster than axis=0
    ucode, inverse, count = np.unique(code, return_inverse=True, return_counts=True)
    inverse = inverse.reshape(-1)
    unique = np.stack([ucode // n, ucode % n], axis=1)
    forward = (he[:, 0] < he[:, 1]).astype(np.int64)
    n_forward = np.bincount(inverse, weights=forward, minlength=len(unique)).astype(np.int64)
    # a consistently wound 2-face edge is used once in each direction
    same = (count == 2) & (n_forward != 1)
    return EdgeCounts(unique, count.astype(np.int64), same, inverse)


def euler_characteristic(n_vertices_used: int, faces: IntArray) -> int:
    """V - E + F; 2 for each closed genus-0 component (a sphere-like cortex hemisphere)."""
    e = edge_counts(faces)
    return int(n_vertices_used - len(e.unique) + len(faces))


def degenerate_faces(vertices: FloatArray, faces: IntArray, rel_tol: float = 1e-6, *,
                     cross: FloatArray | None = None) -> BoolArray:
    """(k,) bool: faces with repeated indices or area below ``rel_tol`` times the squared mean edge length.

    ``rel_tol`` 1e-6 of the squared mean edge length is far below any real
    triangle of a surface mesh (common practice; from memory).
    """
    f = np.asarray(faces, dtype=np.int64)
    repeated = (f[:, 0] == f[:, 1]) | (f[:, 1] == f[:, 2]) | (f[:, 0] == f[:, 2])
    scale = mean_edge_length(vertices, f) ** 2
    return repeated | (face_areas(vertices, f, cross=cross) <= rel_tol * scale)


def mean_edge_length(vertices: FloatArray, faces: IntArray) -> float:
    """Mean length of the half-edges, metres (0 for no faces)."""
    he = edges(faces)
    if he.shape[0] == 0:
        return 0.0
    v = np.asarray(vertices, dtype=np.float64)
    return float(np.linalg.norm(v[he[:, 0]] - v[he[:, 1]], axis=1).mean())


def vertex_adjacency(vertices: FloatArray, faces: IntArray, *, weighted: bool = True,
                     unique_edges: IntArray | None = None) -> sparse.csr_matrix:
    """(n, n) symmetric sparse edge graph; weights are edge lengths (m) or 1.

    ``unique_edges`` (e, 2), if given, is ``edge_counts(faces).unique`` computed before.

    Zero-length edges get a weight of 1e-12 of the mean edge length so that
    sparse storage does not drop them (which would cut the graph).
    """
    n = len(vertices)
    e = edge_counts(faces).unique if unique_edges is None else unique_edges
    if weighted:
        v = np.asarray(vertices, dtype=np.float64)
        w = np.linalg.norm(v[e[:, 0]] - v[e[:, 1]], axis=1)
        floor = 1e-12 * (w.mean() if w.size else 1.0)
        w = np.maximum(w, floor if floor > 0 else 1e-300)
    else:
        w = np.ones(len(e))
    g = sparse.coo_matrix((np.concatenate([w, w]), (np.concatenate([e[:, 0], e[:, 1]]),
                                                     np.concatenate([e[:, 1], e[:, 0]]))), shape=(n, n))
    return g.tocsr()


def components(n_vertices: int, faces: IntArray, *,
               unique_edges: IntArray | None = None) -> tuple[int, IntArray]:
    """Connected components over shared edges: (count, (n,) int64 label per vertex).

    Unreferenced vertices are components of their own. ``unique_edges`` as in
    :func:`vertex_adjacency`.
    """
    e = edge_counts(faces).unique if unique_edges is None else unique_edges
    g = sparse.coo_matrix((np.ones(len(e)), (e[:, 0], e[:, 1])), shape=(n_vertices, n_vertices))
    count, labels = csgraph.connected_components(g, directed=False)
    return int(count), labels.astype(np.int64)
