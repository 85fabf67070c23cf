"""Cortical patches: seeds by quadric decimation, membership along the surface, per-patch statistics.

1. :func:`decimation_seeds` decimates a mesh to about the wanted number of
   vertices by quadric-error edge collapse (Garland & Heckbert 1997, through
   fast-simplification) and takes, for each decimated vertex, the nearest
   vertex of the original mesh: the patch centres are points of the surface.
2. :func:`assign_along_surface` gives every vertex to the seed nearest along
   the mesh's edge graph (multi-source Dijkstra, scipy.sparse.csgraph). A
   Euclidean nearest neighbour would hand vertices across a narrow sulcus to
   the opposite bank; graph distance cannot jump the gap.
3. :func:`patch_statistics` sums barycentric vertex areas per patch, averages
   the area-weighted vertex normals and measures their angular spread.

All lengths metres, areas m^2, angles radians.
"""
from __future__ import annotations

import numpy as np
from scipy import sparse
from scipy.sparse import csgraph
from scipy.spatial import cKDTree

from .._typing import FloatArray, IntArray
from .meshstats import referenced, vertex_adjacency, vertex_areas, vertex_normals

__all__ = ["decimation_seeds", "assign_along_surface", "recentre_seeds", "patch_statistics",
           "count_for_spacing"]


def count_for_spacing(area_m2: float, spacing_mm: float) -> int:
    """Vertices needed for a mean vertex spacing ``spacing_mm`` on ``area_m2``.

    A regular triangulation with edge ``d`` carries one vertex per
    ``sqrt(3)/2 * d^2`` of area (each vertex owns two equilateral triangles).
    """
    d = spacing_mm * 1e-3
    return max(1, int(round(area_m2 / (np.sqrt(3.0) / 2.0 * d * d))))


def decimation_seeds(vertices: FloatArray, faces: IntArray, n_target: int) -> IntArray:
    """Original-vertex indices of about ``n_target`` patch centres, sorted.

    Parameters
    ----------
    vertices : (n, 3) float64, metres
    faces : (k, 3) int64, referencing the vertices to decimate (others are ignored)
    n_target : int
        Wanted number of centres. A closed genus-0 mesh has ``F = 2V - 4``, so the
        decimation aims at ``2 n_target - 4`` faces (and accordingly fewer on open
        meshes). The result may differ by a few when decimated vertices share a
        nearest original vertex.

    Returns
    -------
    (m,) int64
        Unique indices into ``vertices`` (only referenced vertices), ascending.
    """
    import fast_simplification

    v = np.asarray(vertices, dtype=np.float64)
    f = np.asarray(faces, dtype=np.int64)
    used = np.flatnonzero(referenced(len(v), f))
    if n_target >= len(used):
        return used
    n_faces_target = max(4, int(round(len(f) * n_target / len(used))))
    if n_faces_target >= len(f):
        return used
    # the extension wants writable C arrays (our model arrays are read-only)
    pts, _ = fast_simplification.simplify(np.array(v, order="C"), np.array(f, order="C"), target_count=n_faces_target)
    pts = np.asarray(pts, dtype=np.float64)
    # snap the decimated vertices back onto vertices of the original surface
    tree = cKDTree(v[used])
    _, nearest = tree.query(pts, k=1)
    seeds = np.unique(used[nearest])
    if len(seeds) > n_target and n_target < 8:
        # decimation stops near a tetrahedron: thin very small targets by farthest-point sampling
        chosen = [int(np.argmin(np.linalg.norm(v[seeds] - v[used].mean(axis=0), axis=1)))]
        d = np.linalg.norm(v[seeds] - v[seeds[chosen[0]]], axis=1)
        while len(chosen) < n_target:
            chosen.append(int(np.argmax(d)))
            d = np.minimum(d, np.linalg.norm(v[seeds] - v[seeds[chosen[-1]]], axis=1))
        seeds = np.sort(seeds[chosen])
    return seeds.astype(np.int64)


def assign_along_surface(vertices: FloatArray, faces: IntArray, seeds: IntArray, *,
                         graph: sparse.spmatrix | None = None) -> tuple[IntArray, FloatArray]:
    """Give each vertex to the seed nearest along the mesh's edges.

    Parameters
    ----------
    vertices : (n, 3) float64, metres
    faces : (k, 3) int64
    seeds : (m,) int64
        Distinct vertex indices.
    graph : sparse (n, n), optional
        ``vertex_adjacency(vertices, faces)`` if already built (reused across Lloyd steps).

    Returns
    -------
    patch : (n,) int64
        Index into ``seeds`` of the owning seed; -1 where no seed is reachable
        (another piece of the mesh, or an unreferenced vertex).
    distance : (n,) float64, metres
        Edge-path distance to that seed (inf where unreachable).
    """
    s = np.asarray(seeds, dtype=np.int64)
    n = len(vertices)
    if len(s) == 0:
        return np.full(n, -1, np.int64), np.full(n, np.inf)
    if graph is None:
        graph = vertex_adjacency(vertices, faces)
    dist, _, source = csgraph.dijkstra(graph, directed=False, indices=s, min_only=True, return_predecessors=True)
    lookup = np.full(n, -1, np.int64)
    lookup[s] = np.arange(len(s))
    patch = np.where(source >= 0, lookup[np.maximum(source, 0)], -1)
    return patch.astype(np.int64), np.asarray(dist, dtype=np.float64)


def recentre_seeds(vertices: FloatArray, patch: IntArray, n_patches: int, weights: FloatArray) -> IntArray:
    """One Lloyd (1982) step on the surface: each patch's new seed is its member vertex
    nearest the members' ``weights``-weighted centroid.

    Parameters
    ----------
    vertices : (n, 3) float64, metres
    patch : (n,) int64
        Current membership, -1 for none.
    n_patches : int
    weights : (n,) float64
        Vertex areas, m^2.

    Returns
    -------
    (n_patches,) int64
        New seed vertex per patch (a patch without members keeps no seed: -1).
    """
    v = np.asarray(vertices, dtype=np.float64)
    p = np.asarray(patch, dtype=np.int64)
    members = np.flatnonzero(p >= 0)
    idx = p[members]
    w = np.asarray(weights, dtype=np.float64)[members] + 1e-30
    tot = np.bincount(idx, weights=w, minlength=n_patches)
    cen = np.stack([np.bincount(idx, weights=w * v[members, j], minlength=n_patches) for j in range(3)], axis=1)
    cen /= np.where(tot > 0, tot, 1.0)[:, None]
    d = np.linalg.norm(v[members] - cen[idx], axis=1)
    order = np.lexsort((d, idx))
    first = np.flatnonzero(np.r_[True, idx[order][1:] != idx[order][:-1]])
    out = np.full(n_patches, -1, np.int64)
    out[idx[order][first]] = members[order][first]
    return out


def patch_statistics(vertices: FloatArray, faces: IntArray, patch: IntArray, n_patches: int, *,
                     vertex_area: FloatArray | None = None,
                     vertex_normal: FloatArray | None = None) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Area, mean normal and normal spread of each patch.

    Parameters
    ----------
    vertices : (n, 3) float64, metres
    faces : (k, 3) int64
    patch : (n,) int64
        Patch of each vertex, -1 for none.
    n_patches : int
    vertex_area, vertex_normal : (n,) and (n, 3) float64, optional
        :func:`vertex_areas` and :func:`vertex_normals` if already computed.

    Returns
    -------
    areas : (p,) float64, m^2
        Sum of the members' barycentric vertex areas (so the areas of a full
        partition sum to the surface area).
    normals : (p, 3) float64, unit
        Area-weighted mean of the members' unit vertex normals, normalised
        (patches whose members' normals cancel get their largest member's normal).
    spread : (p,) float64, radians
        Area-weighted root-mean-square angle between the members' normals and
        the patch normal (0 for a flat patch).
    """
    v = np.asarray(vertices, dtype=np.float64)
    f = np.asarray(faces, dtype=np.int64)
    p = np.asarray(patch, dtype=np.int64)
    area = vertex_areas(v, f) if vertex_area is None else np.asarray(vertex_area)
    nrm = vertex_normals(v, f)[0] if vertex_normal is None else np.asarray(vertex_normal)
    m = p >= 0
    idx, a, nv = p[m], area[m], nrm[m]
    areas = np.bincount(idx, weights=a, minlength=n_patches)
    acc = np.stack([np.bincount(idx, weights=a * nv[:, j], minlength=n_patches) for j in range(3)], axis=1)
    length = np.linalg.norm(acc, axis=1)
    bad = length <= 1e-12 * np.maximum(areas, np.finfo(float).tiny)
    if bad.any():  # e.g. a patch whose members carry no area: fall back to its largest member's normal
        order = np.lexsort((a, idx))
        last = np.flatnonzero(np.r_[idx[order][1:] != idx[order][:-1], True])
        fallback = np.zeros((n_patches, 3))
        fallback[idx[order][last]] = nv[order][last]
        acc[bad] = fallback[bad]
        length = np.linalg.norm(acc, axis=1)
    normals = acc / np.where(length > 0, length, 1.0)[:, None]
    normals[length == 0] = (0.0, 0.0, 1.0)  # a patch without members or normals: arbitrary unit vector
    cosang = np.clip(np.einsum("ij,ij->i", nv, normals[idx]), -1.0, 1.0)
    sq = np.bincount(idx, weights=a * np.arccos(cosang) ** 2, minlength=n_patches)
    spread = np.sqrt(np.divide(sq, areas, out=np.zeros(n_patches), where=areas > 0))
    return areas, normals, spread
