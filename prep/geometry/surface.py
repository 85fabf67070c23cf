"""Exact closest points and signed distances on a triangle mesh.

The closest point on each triangle follows the region tests of Ericson (2005,
*Real-Time Collision Detection*, section 5.1.5). Candidate triangles come from a
KD-tree on triangle centroids (scipy ``cKDTree``) with a provably sufficient
search radius, so the answer is the exact surface distance, not a distance to
the nearest vertex (LIBRARIES.md: a vertex KD-tree overestimates by ~0.6 mm on a
20k-face head). The sign uses the angle-weighted pseudo-normal of the closest
feature (face, edge or vertex; Baerentzen & Aanaes 2005), which is exact for a
closed, outward-oriented manifold mesh: positive outside, negative inside.

trimesh's ``proximity`` module is the reference in the tests (its signed
distance is positive *inside*, the opposite of ours).
"""
from __future__ import annotations

import functools
import hashlib
from dataclasses import dataclass, field

import numpy as np
from scipy.spatial import cKDTree

from .._typing import ArrayLike, FloatArray, IntArray
from . import meshstats

__all__ = ["SurfaceQuery", "surface_query", "closest_points", "face_normals"]

#: maximum number of (point, triangle) pairs evaluated at once (memory bound)
_PAIR_CHUNK = 1_000_000
#: nearest centroids used for the first (upper-bound) pass
_K_FIRST = 8


def face_normals(vertices: ArrayLike, faces: ArrayLike) -> tuple[FloatArray, np.ndarray]:
    """Unit normals of triangles (right-hand rule on the vertex order).

    :func:`prep.geometry.meshstats.face_normals` with a rounding floor: faces whose
    cross product is within ``eps * max(1, max|v|)^2`` of zero count as degenerate.

    Parameters
    ----------
    vertices : (V, 3) float
    faces : (F, 3) int

    Returns
    -------
    normals : (F, 3) float64
        Unit normals; zero rows for degenerate triangles.
    valid : (F,) bool
        False where the triangle has (near) zero area.
    """
    v = np.asarray(vertices, dtype=np.float64)
    # rounding floor: a cross product this short has no reliable direction
    floor = np.finfo(float).eps * max(1.0, float(np.abs(v).max(initial=0.0))) ** 2
    return meshstats.face_normals(v, faces, floor=floor)


def _unit(a: np.ndarray) -> np.ndarray:
    n = np.linalg.norm(a, axis=-1, keepdims=True)
    return np.divide(a, n, out=np.zeros_like(a), where=n > 0)


@dataclass(frozen=True, eq=False)
class SurfaceQuery:
    """Precomputed search structure for one triangle mesh.

    Build with :func:`surface_query` (cached) or directly. Immutable once built.

    Attributes
    ----------
    vertices : (V, 3) float64
    faces : (F, 3) int64
    normals : (F, 3) float64
        Unit face normals (right-hand rule).
    """

    vertices: FloatArray
    faces: IntArray
    normals: FloatArray = field(init=False)
    _tree: cKDTree = field(init=False, repr=False)
    _radius: float = field(init=False, repr=False)
    _vertex_pn: FloatArray = field(init=False, repr=False)
    _edge_pn: FloatArray = field(init=False, repr=False)

    def __post_init__(self) -> None:
        v = np.ascontiguousarray(self.vertices, dtype=np.float64)
        f = np.ascontiguousarray(self.faces, dtype=np.int64)
        if v.ndim != 2 or v.shape[1] != 3 or f.ndim != 2 or f.shape[1] != 3 or len(f) == 0:
            raise ValueError("vertices must be (V, 3) and faces (F, 3) with F > 0")
        tri = v[f]
        centroids = tri.mean(axis=1)
        radius = float(np.linalg.norm(tri - centroids[:, None], axis=2).max())
        normals, _ = face_normals(v, f)
        # angle-weighted vertex pseudo-normals (Baerentzen & Aanaes 2005)
        angles = np.empty((len(f), 3))
        for k in range(3):
            e1 = _unit(tri[:, (k + 1) % 3] - tri[:, k])
            e2 = _unit(tri[:, (k + 2) % 3] - tri[:, k])
            angles[:, k] = np.arccos(np.clip(np.einsum("ij,ij->i", e1, e2), -1.0, 1.0))
        weighted = (normals[:, None, :] * angles[:, :, None]).reshape(-1, 3)
        vpn = meshstats.accumulate_rows(f.ravel(), weighted, len(v))
        # edge pseudo-normals: sum of the adjacent face normals, per (face, edge)
        inverse = meshstats.edge_counts(f).inverse
        acc = meshstats.accumulate_rows(inverse, np.repeat(normals, 3, axis=0), int(inverse.max()) + 1)
        epn = _unit(acc[inverse]).reshape(len(f), 3, 3)
        for name, value in (("vertices", v), ("faces", f), ("normals", normals), ("_tree", cKDTree(centroids)),
                            ("_radius", radius), ("_vertex_pn", _unit(vpn)), ("_edge_pn", epn)):
            if isinstance(value, np.ndarray):
                value.setflags(write=False)
            object.__setattr__(self, name, value)

    # ------------------------------------------------------------------ kernels
    def _pairs(self, p: np.ndarray, fidx: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Closest points of points ``p`` (k, 3) on triangles ``fidx`` (k,): (point, squared distance, feature)."""
        tri = self.vertices[self.faces[fidx]]
        a, b, c = tri[:, 0], tri[:, 1], tri[:, 2]
        ab, ac, ap = b - a, c - a, p - a
        bp, cp = p - b, p - c

        def dot(x: np.ndarray, y: np.ndarray) -> np.ndarray:
            return np.einsum("ij,ij->i", x, y)

        d1, d2 = dot(ab, ap), dot(ac, ap)
        d3, d4 = dot(ab, bp), dot(ac, bp)
        d5, d6 = dot(ab, cp), dot(ac, cp)
        va, vb, vc = d3 * d6 - d5 * d4, d5 * d2 - d1 * d6, d1 * d4 - d3 * d2
        with np.errstate(divide="ignore", invalid="ignore"):
            denom = va + vb + vc
            v = np.where(denom != 0, vb / denom, 0.0)
            w = np.where(denom != 0, vc / denom, 0.0)
            t_bc = (d4 - d3) / ((d4 - d3) + (d5 - d6))
            t_ac = d2 / (d2 - d6)
            t_ab = d1 / (d1 - d3)
        out = a + ab * v[:, None] + ac * w[:, None]
        feature = np.zeros(len(p), dtype=np.int8)  # 0 face, 1..3 vertex a,b,c, 4..6 edge ab,bc,ca
        # Ericson's order is A, B, AB, C, AC, BC, interior: assign in reverse so earlier tests win
        cases = (
            ((va <= 0) & (d4 - d3 >= 0) & (d5 - d6 >= 0), b, c - b, t_bc, 5),
            ((vb <= 0) & (d2 >= 0) & (d6 <= 0), a, ac, t_ac, 6),
            ((d6 >= 0) & (d5 <= d6), c, None, None, 3),
            ((vc <= 0) & (d1 >= 0) & (d3 <= 0), a, ab, t_ab, 4),
            ((d3 >= 0) & (d4 <= d3), b, None, None, 2),
            ((d1 <= 0) & (d2 <= 0), a, None, None, 1),
        )
        for mask, origin, direction, param, code in cases:
            idx = np.flatnonzero(mask)
            if idx.size:
                out[idx] = origin[idx] if direction is None else origin[idx] + direction[idx] * param[idx, None]
                feature[idx] = code
        diff = p - out
        return out, dot(diff, diff), feature

    def _best(self, points: np.ndarray, lists: list[list[int]] | np.ndarray) -> tuple[np.ndarray, ...]:
        """Among candidate triangles per point, the closest: (point, squared distance, face, feature)."""
        n = len(points)
        if isinstance(lists, np.ndarray) and lists.dtype != object:
            lengths = np.full(n, lists.shape[1])
            flat = lists.ravel()
        else:
            lengths = np.fromiter((len(x) for x in lists), dtype=np.int64, count=n)
            flat = np.fromiter((i for x in lists for i in x), dtype=np.int64, count=int(lengths.sum()))
        owner = np.repeat(np.arange(n), lengths)
        cp, d2, feat = self._pairs(points[owner], flat)
        starts = np.concatenate([[0], np.cumsum(lengths)[:-1]])
        mins = np.minimum.reduceat(d2, starts)
        hit = np.flatnonzero(d2 == mins[owner])
        _, first = np.unique(owner[hit], return_index=True)
        pick = hit[first]
        return cp[pick], d2[pick], flat[pick], feat[pick]

    def query(self, points: ArrayLike, *, exact: bool = True) -> tuple[FloatArray, FloatArray, IntArray]:
        """Closest surface points, signed distances and face indices; a non-finite point gets NaN and face -1.

        See :meth:`_query` for the parameters and results.
        """
        p = np.ascontiguousarray(points, dtype=np.float64).reshape(-1, 3)
        ok = np.isfinite(p).all(axis=1)
        if ok.all():
            return self._query(p, exact=exact)
        out, dist = np.full((len(p), 3), np.nan), np.full(len(p), np.nan)
        face = np.full(len(p), -1, dtype=np.int64)
        if ok.any():
            out[ok], dist[ok], face[ok] = self._query(p[ok], exact=exact)
        return out, dist, face

    def _query(self, points: ArrayLike, *, exact: bool = True) -> tuple[FloatArray, FloatArray, IntArray]:
        """Closest surface points, signed distances and face indices of finite points.

        Parameters
        ----------
        points : (n, 3) float, same frame and unit as the mesh
        exact : bool
            If False, only the triangles of the nearest centroids are searched:
            about 3x faster and exact for points near a finely meshed surface
            (what an iterative fit needs between its exact final queries).

        Returns
        -------
        on_surface : (n, 3) float64
        signed_distance : (n,) float64
            Positive outside an outward-oriented closed mesh, negative inside.
        face_index : (n,) int64
            The triangle holding each closest point.
        """
        p = np.ascontiguousarray(points, dtype=np.float64).reshape(-1, 3)
        n = len(p)
        out = np.empty((n, 3))
        dist = np.empty(n)
        face = np.empty(n, dtype=np.int64)
        feat = np.empty(n, dtype=np.int8)
        if n == 0:
            return out, dist, face
        k = min(_K_FIRST, len(self.faces))
        _, near = self._tree.query(p, k=k)
        near = near.reshape(n, k)
        if not exact:
            out, d2, face, feat = self._best(p, near)
            return out, np.sqrt(d2) * self._sign(p, out, face, feat), face
        _, d2_ub, _, _ = self._best(p, near)
        # any triangle holding a closer point has its centroid within ub + radius
        radii = np.sqrt(d2_ub) * (1 + 1e-9) + self._radius
        cand = self._tree.query_ball_point(p, radii, return_sorted=False)
        lengths = np.fromiter((len(c) for c in cand), dtype=np.int64, count=n)
        start = 0
        while start < n:  # chunk so that no more than _PAIR_CHUNK pairs live at once
            csum = np.cumsum(lengths[start:])
            stop = start + max(1, int(np.searchsorted(csum, _PAIR_CHUNK, side="right")))
            sl = slice(start, stop)
            out[sl], d2, face[sl], feat[sl] = self._best(p[sl], cand[sl])
            dist[sl] = np.sqrt(d2)
            start = stop
        dist *= self._sign(p, out, face, feat)
        return out, dist, face

    def _sign(self, p: np.ndarray, cp: np.ndarray, face: np.ndarray, feat: np.ndarray) -> np.ndarray:
        normal = self.normals[face].copy()
        is_vertex = (feat >= 1) & (feat <= 3)
        if is_vertex.any():
            vid = self.faces[face[is_vertex], feat[is_vertex] - 1]
            normal[is_vertex] = self._vertex_pn[vid]
        is_edge = feat >= 4
        if is_edge.any():
            normal[is_edge] = self._edge_pn[face[is_edge], feat[is_edge] - 4]
        s = np.einsum("ij,ij->i", p - cp, normal)
        return np.where(s < 0, -1.0, 1.0)


class _MeshKey:
    """Hashable stand-in for a mesh (content digest), so queries can be cached."""

    __slots__ = ("vertices", "faces", "_digest")

    def __init__(self, vertices: np.ndarray, faces: np.ndarray) -> None:
        self.vertices = np.ascontiguousarray(vertices, dtype=np.float64)
        self.faces = np.ascontiguousarray(faces, dtype=np.int64)
        h = hashlib.blake2b(digest_size=16)
        h.update(repr((self.vertices.shape, self.faces.shape)).encode())
        h.update(self.vertices.tobytes())
        h.update(self.faces.tobytes())
        self._digest = h.digest()

    def __hash__(self) -> int:
        return hash(self._digest)

    def __eq__(self, other: object) -> bool:
        return isinstance(other, _MeshKey) and other._digest == self._digest


@functools.lru_cache(maxsize=8)
def _cached_query(key: _MeshKey) -> SurfaceQuery:
    return SurfaceQuery(key.vertices, key.faces)


def surface_query(vertices: ArrayLike, faces: ArrayLike) -> SurfaceQuery:
    """The (cached) :class:`SurfaceQuery` of a mesh, keyed by its content."""
    return _cached_query(_MeshKey(np.asarray(vertices), np.asarray(faces)))


def closest_points(vertices: ArrayLike, faces: ArrayLike,
                   points: ArrayLike) -> tuple[FloatArray, FloatArray, IntArray]:
    """Closest points on a triangle mesh, with signed distances.

    Parameters
    ----------
    vertices : (V, 3) float, metres
    faces : (F, 3) int
        Counter-clockwise seen from outside for a closed mesh.
    points : (n, 3) float, metres, same frame

    Returns
    -------
    on_surface : (n, 3) float64, metres
    signed_distance : (n,) float64, metres
        Positive outside, negative inside (for an outward-oriented closed mesh).
    face_index : (n,) int64
    """
    return surface_query(vertices, faces).query(points)
