"""Private kernels of the ``forward_bem`` plugin: double-layer integrals with a linear basis.

For a field point r and a flat triangle with corners x1, x2, x3 (outward unit
normal n, area A) the double-layer integral of the linear hat function psi_k
of corner k is, exactly,

    int psi_k dOmega = (1 - g_k . (x_k - r)) * Omega - h * sum_e (g_k . m_e) * gamma_e

where Omega is the triangle's solid angle seen from r (van Oosterom &
Strackee 1983), g_k = n x (x_{k+2} - x_{k+1}) / (2A) the in-plane gradient of
psi_k, h = n . (x1 - r) the height of the plane above r, m_e the outward
in-plane normal of edge e and gamma_e = int_e dl / |x - r| its analytic line
integral. This is the closed form for linear collocation in the manner of de
Munck (1992), derived here from the surface gradient theorem: the in-plane part
of int (x - r) / |x - r|^3 dS equals -sum_e m_e gamma_e.

All dot products with r are written as matrix products so a block of field
points against all triangles costs a few (m, 3) @ (3, k) products.
"""
from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import scipy.sparse as sp

from prep.geometry.layers import dot3, inside
from prep.geometry.meshstats import edge_counts, face_areas, face_cross, face_normals

FOUR_PI = 4.0 * np.pi


def _faces_scatter(faces: np.ndarray, n_vertices: int) -> list[sp.csr_matrix]:
    """Three (k, n) 0/1 matrices mapping a per-face corner value to its vertex column."""
    k = len(faces)
    rows = np.arange(k)
    return [sp.csr_matrix((np.ones(k), (rows, faces[:, c])), shape=(k, n_vertices)) for c in range(3)]


def _compiled():  # noqa: ANN202 - the numba kernel or None
    try:
        from ._forward_bem_jit import linear_weights
    except ImportError:
        return None
    return linear_weights


def inside_closed(points: np.ndarray, vertices: np.ndarray, faces: np.ndarray) -> np.ndarray:
    """(m,) bool: points enclosed by a closed outward mesh (total solid angle > 2 pi).

    Points strictly inside a ball about the vertex centroid that no face's
    plane enters are inside without any solid angle (exact: a point's distance
    to a triangle is at least its distance to the triangle's plane, so the
    ball misses the surface, and the centre is tested first). The others get
    the compiled winding-number kernel (parallel over points) when numba is
    importable, else :func:`prep.geometry.layers.inside`; same test, same threshold.
    """
    p = np.ascontiguousarray(points, dtype=float).reshape(-1, 3)
    v = np.ascontiguousarray(vertices, dtype=float)
    f = np.ascontiguousarray(faces, dtype=np.int64)
    try:
        from ._forward_bem_jit import solid_angle_sums
    except ImportError:
        def winding(q: np.ndarray) -> np.ndarray:
            return inside(q, v, f)
    else:
        def winding(q: np.ndarray) -> np.ndarray:
            return np.abs(solid_angle_sums(q, v, f)) > 2.0 * np.pi
    centre = v.mean(axis=0)
    n, _ = face_normals(v, f)
    radius = float(np.abs(np.einsum("ij,ij->i", n, v[f[:, 0]] - centre)).min()) if len(f) else 0.0
    sure = np.zeros(len(p), dtype=bool)
    if radius > 0.0 and winding(centre[None, :])[0]:
        rel = p - centre
        sure = np.einsum("ij,ij->i", rel, rel) < (radius * (1.0 - 1e-9)) ** 2
    out = sure.copy()
    rest = np.flatnonzero(~sure)
    if len(rest):
        out[rest] = winding(np.ascontiguousarray(p[rest]))
    return out


class LinearDoubleLayer:
    """Precomputed per-triangle and per-edge constants of one closed mesh.

    Parameters
    ----------
    vertices : (n, 3) float64, metres
    faces : (k, 3) int64, outward
    """

    def __init__(self, vertices: np.ndarray, faces: np.ndarray) -> None:
        v = np.ascontiguousarray(vertices, dtype=float)
        f = np.ascontiguousarray(faces, dtype=np.int64)
        self.n_vertices = len(v)
        self.vt = np.ascontiguousarray(v.T)
        self.vsq = np.einsum("ij,ij->i", v, v)
        self.faces = f
        x = [v[f[:, c]] for c in range(3)]
        cross = face_cross(v, f)
        n, _ = face_normals(v, f, cross=cross)
        area = face_areas(v, f, cross=cross)
        # matrices applied to r: columns [2A n | n | g_0 | g_1 | g_2], one (3, 5k) product per block
        inv2a = np.divide(1.0, 2.0 * area, out=np.zeros_like(area), where=area > 0)
        g = [np.cross(n, x[(c + 2) % 3] - x[(c + 1) % 3]) * inv2a[:, None] for c in range(3)]
        self.rmat = np.ascontiguousarray(np.concatenate([2.0 * area[:, None] * n, n] + g).T)
        self.det0 = np.einsum("ij,ij->i", x[0], np.cross(x[1], x[2]))
        self.hn = np.einsum("ij,ij->i", n, x[0])
        self.one_minus_gx = [1.0 - np.einsum("ij,ij->i", g[c], x[c]) for c in range(3)]
        # unique edges; the line integral of 1/|x - r| does not depend on direction
        ec = edge_counts(f)
        edges = ec.unique
        self.edges = edges
        self.face_edge = ec.inverse.reshape(-1, 3).T  # (3, k): edge index of face edge e (corner e -> e+1)
        d = v[edges[:, 1]] - v[edges[:, 0]]
        self.elen = np.linalg.norm(d, axis=1)
        t = d / np.maximum(self.elen, 1e-300)[:, None]
        self.et = np.ascontiguousarray(t.T)
        self.etx = np.einsum("ij,ij->i", t, v[edges[:, 0]])
        self.edge_len_sq_face = [np.einsum("ij,ij->i", x[(e + 1) % 3] - x[e], x[(e + 1) % 3] - x[e])
                                 for e in range(3)]
        coef = np.zeros((3, 3, len(f)))
        for e in range(3):
            de = x[(e + 1) % 3] - x[e]
            le = np.linalg.norm(de, axis=1)
            te = np.divide(de, le[:, None], out=np.zeros_like(de), where=le[:, None] > 0)
            m = np.cross(te, n)
            for c in range(3):
                coef[c, e] = np.einsum("ij,ij->i", g[c], m)
        self.coef = coef
        self.scatter = _faces_scatter(f, len(v))
        # layout of the compiled kernel: shared vertices and unique edges, per-face constants
        self.jit_args = (v, np.ascontiguousarray(edges, dtype=np.int64),
                         np.ascontiguousarray(self.face_edge.T, dtype=np.int64), np.ascontiguousarray(n),
                         np.ascontiguousarray(np.stack(g, axis=1)),
                         np.ascontiguousarray(np.stack(self.one_minus_gx, axis=1)),
                         np.ascontiguousarray(coef.transpose(2, 0, 1)), f)

    def weights(self, points: np.ndarray, block: int = 24, threads: int | None = None,
                backend: str = "auto") -> np.ndarray:
        """(m, n) float64: int psi_j dOmega_r for every point r (rows) and vertex j (columns).

        Pairs where r is a corner of the triangle (the triangle is seen edge-on)
        contribute zero; the caller fixes the diagonal of a self block.
        ``backend``: ``"numba"`` (compiled loop, parallel over points), ``"numpy"``
        (row blocks on ``threads`` threads; numpy releases the GIL in its loops)
        or ``"auto"`` (numba when importable).
        """
        p = np.ascontiguousarray(points, dtype=float)
        compiled = _compiled() if backend in ("auto", "numba") else None
        if backend == "numba" and compiled is None:
            raise RuntimeError("backend 'numba' asked for but numba is not importable")
        if compiled is not None:
            return compiled(p, *self.jit_args, self.n_vertices)
        out = np.empty((len(p), self.n_vertices))

        def work(s: int) -> None:
            out[s:s + block] = self._block(p[s:s + block])

        starts = range(0, len(p), block)
        n_threads = threads or os.cpu_count() or 1
        if n_threads <= 1 or len(p) <= block:
            for s in starts:
                work(s)
        else:
            with ThreadPoolExecutor(max_workers=n_threads) as pool:
                list(pool.map(work, starts))
        return out

    def _block(self, r: np.ndarray) -> np.ndarray:
        k = len(self.faces)
        rr = np.einsum("ij,ij->i", r, r)[:, None]
        dist_sq = np.maximum(self.vsq[None, :] - 2.0 * (dot3(r, self.vt)) + rr, 0.0)
        dist = np.sqrt(dist_sq)
        # edges: s_a = t.(x_a - r), s_b = s_a + L
        ea, eb = self.edges[:, 0], self.edges[:, 1]
        sa = self.etx[None, :] - dot3(r, self.et)
        sb = sa + self.elen[None, :]
        na, nb = dist[:, ea], dist[:, eb]
        fwd = sa + sb >= 0.0
        with np.errstate(divide="ignore", invalid="ignore"):
            gam = np.log(np.where(fwd, nb + sb, na - sa) / np.where(fwd, na + sa, nb - sb))
        f = self.faces
        n = [dist[:, f[:, c]] for c in range(3)]
        sq = [dist_sq[:, f[:, c]] for c in range(3)]
        # y_a . y_b = (|y_a|^2 + |y_b|^2 - |x_b - x_a|^2) / 2
        d01 = 0.5 * (sq[0] + sq[1] - self.edge_len_sq_face[0])
        d12 = 0.5 * (sq[1] + sq[2] - self.edge_len_sq_face[1])
        d20 = 0.5 * (sq[2] + sq[0] - self.edge_len_sq_face[2])
        rm = dot3(r, self.rmat)
        num = self.det0[None, :] - rm[:, :k]
        den = n[0] * n[1] * n[2] + d01 * n[2] + d20 * n[1] + d12 * n[0]
        with np.errstate(divide="ignore", invalid="ignore"):
            omega = 2.0 * np.arctan(num / den)
        omega += np.where(den < 0.0, np.where(num >= 0.0, 2.0 * np.pi, -2.0 * np.pi), 0.0)
        h = self.hn[None, :] - rm[:, k:2 * k]
        scale = np.maximum(n[0], np.maximum(n[1], n[2]))
        corner = np.minimum(n[0], np.minimum(n[1], n[2])) <= 1e-6 * scale  # expanded distances lose digits
        ge = [gam[:, self.face_edge[e]] for e in range(3)]
        total = None
        for c in range(3):
            lin = self.one_minus_gx[c][None, :] + rm[:, (2 + c) * k:(3 + c) * k]
            with np.errstate(invalid="ignore"):  # NaN only at the corners, zeroed on the next line
                line = ge[0] * self.coef[c, 0] + ge[1] * self.coef[c, 1] + ge[2] * self.coef[c, 2]
                w = lin * omega - h * line
            w[corner] = 0.0
            part = np.asarray(self.scatter[c].T.dot(w.T)).T
            total = part if total is None else total + part
        return total


def infinite_potentials(points: np.ndarray, positions: np.ndarray, normals: np.ndarray | None) -> np.ndarray:
    """Unit-conductivity potentials of current dipoles, V*S/m per A*m.

    ``points`` (n, 3) metres, ``positions`` (m, 3) metres. Returns (n, m) for
    moments along ``normals`` (m, 3), else (n, 3m) with x, y, z per dipole
    adjacent. g = p . (r - r0) / (4 pi |r - r0|^3).

    Works on the three (n, m) coordinate differences (exact, no expanded
    distances) with in-place operations: no (n, m, 3) temporary.
    """
    r = np.asarray(points, dtype=float)
    q = np.asarray(positions, dtype=float)
    d = [r[:, c:c + 1] - q[None, :, c] for c in range(3)]
    inv = d[0] * d[0]
    inv += d[1] * d[1]
    inv += d[2] * d[2]
    np.multiply(inv, np.sqrt(inv), out=inv)
    inv *= FOUR_PI
    np.divide(1.0, inv, out=inv)          # 1 / (4 pi |r - r0|^3)
    if normals is not None:
        nrm = np.asarray(normals, dtype=float)
        g = d[0] * nrm[None, :, 0]
        g += d[1] * nrm[None, :, 1]
        g += d[2] * nrm[None, :, 2]
        g *= inv
        return g
    out = np.empty((len(r), len(q), 3))
    for c in range(3):
        np.multiply(d[c], inv, out=out[:, :, c])
    return out.reshape(len(r), -1)
