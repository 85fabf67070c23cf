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
    "vertex_adjacency", "components", "mean_edge_length", "referenced", "accumulate_rows",
    "tetra_volumes", "signed_volume", "is_closed",
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


def face_normals(vertices: FloatArray, faces: IntArray, *, cross: FloatArray | None = None,
                 floor: float = 0.0) -> tuple[FloatArray, BoolArray]:
    """Unit face normals (k, 3) float64 and a (k,) bool ``valid`` mask.

    Faces whose cross product is no longer than ``floor`` (twice the area, m^2;
    default 0: only exactly flat faces) are invalid and get a zero normal.
    ``cross``: :func:`face_cross` if already computed.
    """
    c = face_cross(vertices, faces) if cross is None else np.asarray(cross, dtype=np.float64)
    return _unit_rows(c, floor)


#: below this row length (m^2) the squares in a plain norm lose precision or underflow
_TINY_NORM = 1e-140


def _unit_rows(a: FloatArray, floor: float = 0.0) -> tuple[FloatArray, BoolArray]:
    """Rows of ``a`` (k, 3) scaled to unit length, and a (k,) mask of rows longer than ``floor``.

    Rows too short for a plain norm (squares near underflow) are rescaled by
    their largest component first; the others are divided by the plain norm.
    Invalid rows are zero.
    """
    norm = np.linalg.norm(a, axis=1)
    tiny = np.flatnonzero(norm < _TINY_NORM)
    if tiny.size:
        big = np.abs(a[tiny]).max(axis=1)
        scaled = a[tiny] / np.where(big > 0, big, 1.0)[:, None]
        scaled_norm = np.linalg.norm(scaled, axis=1)
        norm[tiny] = scaled_norm * big
    valid = norm > floor
    out = np.zeros_like(a)
    out[valid] = a[valid] / norm[valid, None]
    if tiny.size:  # there the norm itself is inexact: divide the rescaled rows by their own norm
        keep = valid[tiny]
        out[tiny[keep]] = scaled[keep] / scaled_norm[keep, None]
    return out, valid


def accumulate_rows(index: IntArray, values: FloatArray, size: int) -> FloatArray:
    """Sum the rows of ``values`` (k, d) into ``size`` bins by ``index`` (k,): (size, d) float64.

    One ``np.bincount`` per column: several times faster than ``np.add.at``.
    """
    vals = np.asarray(values, dtype=np.float64)
    idx = np.asarray(index, dtype=np.int64)
    return np.stack([np.bincount(idx, weights=vals[:, j], minlength=size) for j in range(vals.shape[1])], axis=1)


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
    acc = accumulate_rows(f.ravel(), np.repeat(c, 3, axis=0), n)
    return _unit_rows(acc)


def surface_area(vertices: FloatArray, faces: IntArray) -> float:
    """Total area, m^2."""
    return float(face_areas(vertices, faces).sum())


def tetra_volumes(vertices: FloatArray, faces: IntArray) -> FloatArray:
    """(k,) float64 signed volumes (m^3) of the tetrahedra joining the origin to each face.

    Their sum is the enclosed volume (divergence theorem); see :func:`signed_volume`.
    """
    return _triple_products(vertices, faces) / 6.0


def signed_volume(vertices: FloatArray, faces: IntArray) -> float:
    """Enclosed volume (m^3) by the divergence theorem: positive for an outward-wound closed surface."""
    return float(_triple_products(vertices, faces).sum() / 6.0)


def _triple_products(vertices: FloatArray, faces: IntArray) -> FloatArray:
    """(k,) ``a . (b x c)`` over the corners of each face, m^3."""
    v = np.asarray(vertices, dtype=np.float64)
    f = np.asarray(faces, dtype=np.int64)
    return np.einsum("ij,ij->i", v[f[:, 0]], np.cross(v[f[:, 1]], v[f[:, 2]]))


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


def is_closed(faces: IntArray, *, edges: EdgeCounts | None = None) -> bool:
    """True if there are faces and every edge is shared by exactly two of them.

    ``edges``: :func:`edge_counts` of ``faces`` if already computed.
    """
    e = edge_counts(faces) if edges is None else edges
    return bool(len(faces) and np.all(e.count == 2))


def euler_characteristic(n_vertices_used: int, faces: IntArray, *, edges: EdgeCounts | None = None) -> int:
    """V - E + F; 2 for each closed genus-0 component (a sphere-like cortex hemisphere).

    ``edges``: :func:`edge_counts` of ``faces`` if already computed.
    """
    e = edge_counts(faces) if edges is None else edges
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
