"""Pure functions on nested closed triangle meshes (head-model layers).

Arrays only, metres, float64; nothing here reads files or emits findings.
Faces are (k, 3) int64, counter-clockwise seen from outside (outward normals).

Contents: a subdivided icosahedron, star-shapedness, remeshing by projecting
a unit sphere mesh along rays from an interior centre, inward offsets along
smoothed normals, and measures of nesting (inside/outside, gaps, crossings).
"""
from __future__ import annotations

import numpy as np

__all__ = [
    "icosphere", "face_normals", "vertex_normals", "signed_volume", "solid_angle_sum",
    "inside", "star_shaped", "ray_radii", "remesh_radial", "offset_inward", "nearest_distance",
    "nesting", "interior_centre", "edge_use_counts", "is_closed", "orient_outward", "derive_inward",
    "triangle_solid_angles", "icosphere_subdivisions",
]

_PHI = (1.0 + 5.0 ** 0.5) / 2.0


def icosphere(subdivisions: int) -> tuple[np.ndarray, np.ndarray]:
    """Unit sphere from an icosahedron whose triangles are split in four ``subdivisions`` times.

    Returns
    -------
    vertices : (10 * 4**s + 2, 3) float64, unit length
    faces : (20 * 4**s, 3) int64, outward (counter-clockwise seen from outside)
    """
    v = np.array([[-1, _PHI, 0], [1, _PHI, 0], [-1, -_PHI, 0], [1, -_PHI, 0],
                  [0, -1, _PHI], [0, 1, _PHI], [0, -1, -_PHI], [0, 1, -_PHI],
                  [_PHI, 0, -1], [_PHI, 0, 1], [-_PHI, 0, -1], [-_PHI, 0, 1]], dtype=float)
    f = np.array([[0, 11, 5], [0, 5, 1], [0, 1, 7], [0, 7, 10], [0, 10, 11],
                  [1, 5, 9], [5, 11, 4], [11, 10, 2], [10, 7, 6], [7, 1, 8],
                  [3, 9, 4], [3, 4, 2], [3, 2, 6], [3, 6, 8], [3, 8, 9],
                  [4, 9, 5], [2, 4, 11], [6, 2, 10], [8, 6, 7], [9, 8, 1]], dtype=np.int64)
    v /= np.linalg.norm(v, axis=1, keepdims=True)
    for _ in range(int(subdivisions)):
        edges = np.sort(np.concatenate([f[:, [0, 1]], f[:, [1, 2]], f[:, [2, 0]]]), axis=1)
        uniq, inv = np.unique(edges, axis=0, return_inverse=True)
        mid = v[uniq].mean(axis=1)
        mid /= np.linalg.norm(mid, axis=1, keepdims=True)
        m = inv.reshape(3, -1) + len(v)
        a, b, c = f.T
        ab, bc, ca = m
        f = np.concatenate([np.stack([a, ab, ca], 1), np.stack([b, bc, ab], 1),
                            np.stack([c, ca, bc], 1), np.stack([ab, bc, ca], 1)])
        v = np.concatenate([v, mid])
    return v, f


def icosphere_subdivisions(n_vertices: int) -> int:
    """Subdivision level whose icosphere has the vertex count closest to ``n_vertices``."""
    levels = np.arange(8)
    return int(levels[np.argmin(np.abs(10 * 4 ** levels + 2 - int(n_vertices)))])


def face_normals(vertices: np.ndarray, faces: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Unit face normals (k, 3) and face areas (k,) m^2; zero-area faces get a zero normal."""
    v = np.asarray(vertices, dtype=float)
    t = v[np.asarray(faces)]
    cross = np.cross(t[:, 1] - t[:, 0], t[:, 2] - t[:, 0])
    twice = np.linalg.norm(cross, axis=1)
    unit = np.divide(cross, twice[:, None], out=np.zeros_like(cross), where=twice[:, None] > 0)
    return unit, 0.5 * twice


def vertex_normals(vertices: np.ndarray, faces: np.ndarray) -> np.ndarray:
    """Area-weighted unit vertex normals (n, 3)."""
    v = np.asarray(vertices, dtype=float)
    f = np.asarray(faces)
    t = v[f]
    cross = np.cross(t[:, 1] - t[:, 0], t[:, 2] - t[:, 0])
    acc = np.zeros_like(v)
    for k in range(3):
        np.add.at(acc, f[:, k], cross)
    norm = np.linalg.norm(acc, axis=1, keepdims=True)
    return np.divide(acc, norm, out=np.zeros_like(acc), where=norm > 0)


def signed_volume(vertices: np.ndarray, faces: np.ndarray) -> float:
    """Enclosed volume, m^3; negative when the faces are oriented inward."""
    t = np.asarray(vertices, dtype=float)[np.asarray(faces)]
    return float(np.einsum("ij,ij->i", t[:, 0], np.cross(t[:, 1], t[:, 2])).sum() / 6.0)


def solid_angle_sum(points: np.ndarray, vertices: np.ndarray, faces: np.ndarray,
                    block: int = 64) -> np.ndarray:
    """Total solid angle (m,) subtended at each point by a closed mesh (van Oosterom & Strackee 1983).

    About 4*pi inside an outward mesh, -4*pi inside an inward one, 0 outside,
    2*pi on it. Dot products are expanded so a block of points costs a few
    (b, 3) x (3, n) products.
    """
    p = np.atleast_2d(np.asarray(points, dtype=float))
    v = np.asarray(vertices, dtype=float)
    f = np.asarray(faces)
    x = [v[f[:, c]] for c in range(3)]
    det0 = np.einsum("ij,ij->i", x[0], np.cross(x[1], x[2]))
    area2n = np.cross(x[1] - x[0], x[2] - x[0]).T
    elen = [np.einsum("ij,ij->i", x[b] - x[a], x[b] - x[a]) for a, b in ((0, 1), (1, 2), (2, 0))]
    vsq = np.einsum("ij,ij->i", v, v)
    out = np.empty(len(p))
    for s in range(0, len(p), block):
        r = p[s:s + block]
        sq = np.maximum(vsq[None, :] - 2.0 * _dot3(r, v.T) + np.einsum("ij,ij->i", r, r)[:, None], 0.0)
        d2 = [sq[:, f[:, c]] for c in range(3)]
        n = [np.sqrt(d) for d in d2]
        d01 = 0.5 * (d2[0] + d2[1] - elen[0])
        d12 = 0.5 * (d2[1] + d2[2] - elen[1])
        d20 = 0.5 * (d2[2] + d2[0] - elen[2])
        num = det0[None, :] - _dot3(r, area2n)
        den = n[0] * n[1] * n[2] + d01 * n[2] + d20 * n[1] + d12 * n[0]
        out[s:s + block] = 2.0 * np.arctan2(num, den).sum(axis=1)
    return out


def _dot3(r: np.ndarray, m: np.ndarray) -> np.ndarray:
    """(b, 3) @ (3, k) by broadcasting (BLAS is slow for an inner size of 3)."""
    return r[:, 0:1] * m[0] + r[:, 1:2] * m[1] + r[:, 2:3] * m[2]


def triangle_solid_angles(y1: np.ndarray, y2: np.ndarray, y3: np.ndarray) -> np.ndarray:
    """Signed solid angle of triangles with corners ``y1, y2, y3`` relative to the field point.

    van Oosterom & Strackee (1983): tan(Omega/2) = y1.(y2 x y3) / (|y1||y2||y3| + ...).
    Positive when the field point sees the triangle's back (it lies on the inner side).
    """
    n1, n2, n3 = (np.linalg.norm(y, axis=-1) for y in (y1, y2, y3))
    num = np.einsum("...i,...i->...", y1, np.cross(y2, y3))
    den = (n1 * n2 * n3 + np.einsum("...i,...i->...", y1, y2) * n3
           + np.einsum("...i,...i->...", y1, y3) * n2 + np.einsum("...i,...i->...", y2, y3) * n1)
    return 2.0 * np.arctan2(num, den)


def inside(points: np.ndarray, vertices: np.ndarray, faces: np.ndarray) -> np.ndarray:
    """(m,) bool: points enclosed by the closed mesh (winding number > 1/2)."""
    return np.abs(solid_angle_sum(points, vertices, faces)) > 2.0 * np.pi


def interior_centre(vertices: np.ndarray, faces: np.ndarray) -> np.ndarray:
    """(3,) volume centroid of a closed mesh, metres (a natural ray centre)."""
    t = np.asarray(vertices, dtype=float)[np.asarray(faces)]
    vol = np.einsum("ij,ij->i", t[:, 0], np.cross(t[:, 1], t[:, 2])) / 6.0
    if abs(vol.sum()) < 1e-30:
        return np.asarray(vertices, dtype=float).mean(axis=0)
    return (vol[:, None] * t.sum(axis=1) / 4.0).sum(axis=0) / vol.sum()


def star_shaped(vertices: np.ndarray, faces: np.ndarray, centre: np.ndarray,
                tol: float = 1e-12) -> tuple[bool, np.ndarray]:
    """Whether every face is seen from its outer side from ``centre`` (so each ray hits the mesh once).

    Returns
    -------
    ok : bool
    bad_faces : (j,) int64 indices of faces seen edge-on or from behind.
    """
    normal, area = face_normals(vertices, faces)
    t = np.asarray(vertices, dtype=float)[np.asarray(faces)]
    h = np.einsum("ij,ij->i", normal, t.mean(axis=1) - np.asarray(centre, dtype=float))
    bad = np.flatnonzero((h <= tol) & (area > 0))
    return bad.size == 0, bad


def ray_radii(directions: np.ndarray, vertices: np.ndarray, faces: np.ndarray,
              centre: np.ndarray, block: int = 256) -> np.ndarray:
    """Distance (m,) metres from ``centre`` along unit ``directions`` to the nearest crossing of a mesh.

    Moller & Trumbore (1997) ray-triangle test, written as (b, 3) x (3, k)
    products per block of rays; NaN where no face is hit.
    """
    d = np.asarray(directions, dtype=float)
    t = np.asarray(vertices, dtype=float)[np.asarray(faces)] - np.asarray(centre, dtype=float)
    e1, e2 = t[:, 1] - t[:, 0], t[:, 2] - t[:, 0]
    tv = -t[:, 0]
    det_m = np.cross(e2, e1).T          # det = d . (e2 x e1)
    u_m = np.cross(e2, tv).T            # u det = d . (e2 x T)
    q = np.cross(tv, e1)
    w_m = q.T                           # w det = d . Q
    r_num = np.einsum("ij,ij->i", e2, q)
    out = np.full(len(d), np.nan)
    for s in range(0, len(d), block):
        dd = d[s:s + block]
        det = _dot3(dd, det_m)
        ok = np.abs(det) > 1e-300
        inv = np.divide(1.0, det, out=np.zeros_like(det), where=ok)
        u = _dot3(dd, u_m) * inv
        w = _dot3(dd, w_m) * inv
        r = r_num[None, :] * inv
        hit = ok & (u >= -1e-9) & (w >= -1e-9) & (u + w <= 1 + 1e-9) & (r > 0)
        rr = np.where(hit, r, np.inf).min(axis=1)
        out[s:s + block] = np.where(np.isfinite(rr), rr, np.nan)
    return out


def remesh_radial(vertices: np.ndarray, faces: np.ndarray, n_vertices: int,
                  centre: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Remesh a star-shaped closed surface onto a subdivided icosahedron.

    Every icosphere vertex is moved along its ray from ``centre`` (default: the
    volume centroid) to where the ray meets the surface; the triangles keep
    the icosahedron's shapes as far as the surface allows.

    Raises ValueError if the surface is not star-shaped about ``centre`` (check
    with :func:`star_shaped` first) or a ray misses it.
    """
    c = interior_centre(vertices, faces) if centre is None else np.asarray(centre, dtype=float)
    ok, bad = star_shaped(vertices, faces, c)
    if not ok:
        raise ValueError(f"surface is not star-shaped about {c.tolist()}: {bad.size} faces seen from behind")
    uv, uf = icosphere(icosphere_subdivisions(n_vertices))
    r = ray_radii(uv, vertices, faces, c)
    if np.any(~np.isfinite(r)):
        raise ValueError(f"{int(np.sum(~np.isfinite(r)))} rays from the centre miss the surface")
    return c + uv * r[:, None], uf


def _smooth(values: np.ndarray, faces: np.ndarray, n: int, iterations: int) -> np.ndarray:
    """Umbrella (neighbour-average) smoothing of per-vertex values (n, d)."""
    f = np.asarray(faces)
    i = np.concatenate([f[:, 0], f[:, 1], f[:, 2], f[:, 1], f[:, 2], f[:, 0]])
    j = np.concatenate([f[:, 1], f[:, 2], f[:, 0], f[:, 0], f[:, 1], f[:, 2]])
    deg = np.bincount(i, minlength=n).astype(float)
    out = np.array(values, dtype=float)
    for _ in range(iterations):
        acc = np.zeros_like(out)
        np.add.at(acc, i, out[j])
        out = 0.5 * out + 0.5 * acc / np.maximum(deg, 1)[:, None]
    return out


def offset_inward(vertices: np.ndarray, faces: np.ndarray, distance: float,
                  smoothing: int = 20) -> np.ndarray:
    """Move every vertex ``distance`` metres inward along its smoothed unit normal.

    Normals are area-weighted vertex normals averaged over ``smoothing``
    neighbour rings, so that concave regions do not fold. Returns (n, 3) metres;
    faces are unchanged. Check the result with :func:`nesting`.
    """
    v = np.asarray(vertices, dtype=float)
    nrm = _smooth(vertex_normals(v, faces), faces, len(v), smoothing)
    nrm /= np.maximum(np.linalg.norm(nrm, axis=1, keepdims=True), 1e-30)
    return v - float(distance) * nrm


def nearest_distance(points: np.ndarray, vertices: np.ndarray, faces: np.ndarray) -> np.ndarray:
    """Unsigned distance (m,) metres from each point to the closest point of a triangle mesh."""
    import trimesh

    mesh = trimesh.Trimesh(np.asarray(vertices, dtype=float), np.asarray(faces), process=False)
    _, dist, _ = trimesh.proximity.closest_point(mesh, np.asarray(points, dtype=float))
    return np.asarray(dist, dtype=float)


def nesting(inner_vertices: np.ndarray, inner_faces: np.ndarray,
            outer_vertices: np.ndarray, outer_faces: np.ndarray) -> dict[str, np.ndarray | float]:
    """How the inner closed mesh sits in the outer one.

    Returns
    -------
    dict with
        ``outside`` : (j,) int64, inner vertices not enclosed by the outer mesh;
        ``gap`` : (n_inner,) float64 metres, distance of each inner vertex to the outer mesh;
        ``min_gap`` : float, metres (0 if any vertex is outside);
        ``argmin`` : int, the inner vertex where the gap is smallest;
        ``outer_inside`` : (k,) int64, outer vertices enclosed by the inner mesh (order swapped).
    """
    enc = inside(inner_vertices, outer_vertices, outer_faces)
    gap = nearest_distance(inner_vertices, outer_vertices, outer_faces)
    outer_in = inside(outer_vertices, inner_vertices, inner_faces)
    min_gap = 0.0 if not enc.all() else float(gap.min())
    return {"outside": np.flatnonzero(~enc), "gap": gap, "min_gap": min_gap,
            "argmin": int(np.argmin(gap)), "outer_inside": np.flatnonzero(outer_in)}


def edge_use_counts(faces: np.ndarray) -> np.ndarray:
    """(e,) how many faces use each undirected edge; a closed 2-manifold has all counts 2."""
    f = np.asarray(faces)
    e = np.sort(np.concatenate([f[:, [0, 1]], f[:, [1, 2]], f[:, [2, 0]]]), axis=1)
    _, counts = np.unique(e, axis=0, return_counts=True)
    return counts


def is_closed(faces: np.ndarray) -> bool:
    """True if every edge is shared by exactly two faces."""
    f = np.asarray(faces)
    return bool(len(f) and np.all(edge_use_counts(f) == 2))


def orient_outward(vertices: np.ndarray, faces: np.ndarray) -> tuple[np.ndarray, bool]:
    """Faces of a consistently wound closed mesh turned outward; True if they were flipped."""
    f = np.asarray(faces)
    if signed_volume(vertices, f) < 0:
        return f[:, ::-1].copy(), True
    return f.copy(), False


def derive_inward(outer_vertices: np.ndarray, faces: np.ndarray, centre: np.ndarray, thickness: float,
                  min_gap: float, smoothing: int = 20) -> np.ndarray:
    """A layer ``thickness`` metres inside a radially meshed outer layer, nesting guaranteed.

    ``outer_vertices`` must lie on rays from ``centre`` (as made by :func:`remesh_radial`).
    The outer layer is offset inward along smoothed normals, the offset surface is
    sampled back on the same rays, and each ray radius is capped at the outer radius
    minus ``max(min_gap, thickness / 2)``. Because a flat triangle's radius along
    any ray inside its cone increases with each corner's radius, vertex-wise
    radii below the outer ones keep the whole layer strictly inside.

    Returns (n, 3) metres on the same rays (same faces).
    """
    c = np.asarray(centre, dtype=float)
    rel = np.asarray(outer_vertices, dtype=float) - c
    r_out = np.linalg.norm(rel, axis=1)
    dirs = rel / r_out[:, None]
    moved = offset_inward(outer_vertices, faces, thickness, smoothing)
    r_new = ray_radii(dirs, moved, faces, c)
    cap = r_out - max(float(min_gap), 0.5 * float(thickness))
    r_new = np.where(np.isfinite(r_new), np.minimum(r_new, cap), cap)
    r_new = np.maximum(r_new, 0.05 * r_out)
    return c + dirs * r_new[:, None]
