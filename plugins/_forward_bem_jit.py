"""Private compiled kernel of the ``forward_bem`` plugin (numba), same formula as the numpy one.

See :mod:`._forward_bem_kernels` for the closed form. Field points run in
parallel. Per field point the distances to every vertex and the line
integrals of every unique edge are computed once (a closed mesh has half as
many edges as face edges and a sixth as many vertices as face corners), then
each triangle only adds its solid angle and combines the shared values; the
same quantities as the numpy kernel, evaluated without temporaries. Used when
numba is importable, else the numpy kernel is. ``cache=True`` keeps the
compiled code on disk, so only the first call on a machine compiles.
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit, prange


@njit(parallel=True, cache=True, fastmath=False)
def linear_weights(points, verts, edges, face_edge, normal, g, one_minus_gx, coef, faces,
                   n_vertices):  # pragma: no cover - compiled
    """(m, n_vertices) double-layer weights of linear hat functions.

    points (m, 3); verts (n, 3); edges (q, 2) unique vertex pairs;
    face_edge (k, 3) edge index of face edge e (corner e -> e + 1); normal
    (k, 3); g (k, 3, 3) hat gradients per corner; one_minus_gx (k, 3);
    coef (k, 3, 3) g_c . m_e; faces (k, 3).
    """
    m = points.shape[0]
    k = faces.shape[0]
    nv = verts.shape[0]
    ne = edges.shape[0]
    out = np.zeros((m, n_vertices))
    for i in prange(m):
        r0, r1, r2 = points[i, 0], points[i, 1], points[i, 2]
        dist = np.empty(nv)
        for j in range(nv):
            a0 = verts[j, 0] - r0
            a1 = verts[j, 1] - r1
            a2 = verts[j, 2] - r2
            dist[j] = math.sqrt(a0 * a0 + a1 * a1 + a2 * a2)
        gam = np.empty(ne)
        for e in range(ne):
            a = edges[e, 0]
            b = edges[e, 1]
            t0 = verts[b, 0] - verts[a, 0]
            t1 = verts[b, 1] - verts[a, 1]
            t2 = verts[b, 2] - verts[a, 2]
            ln = math.sqrt(t0 * t0 + t1 * t1 + t2 * t2)
            if ln <= 0.0:
                gam[e] = 0.0
                continue
            sa = (t0 * (verts[a, 0] - r0) + t1 * (verts[a, 1] - r1) + t2 * (verts[a, 2] - r2)) / ln
            sb = (t0 * (verts[b, 0] - r0) + t1 * (verts[b, 1] - r1) + t2 * (verts[b, 2] - r2)) / ln
            if sa + sb >= 0.0:
                num = dist[b] + sb
                den = dist[a] + sa
            else:
                num = dist[a] - sa
                den = dist[b] - sb
            # zero only on the edge's own line, where every triangle using it is skipped below
            gam[e] = math.log(num / den) if num > 0.0 and den > 0.0 else 0.0
        y = np.empty((3, 3))
        nn = np.empty(3)
        ge = np.empty(3)
        for t in range(k):
            big = 0.0
            small = 1e300
            for c in range(3):
                j = faces[t, c]
                y[c, 0] = verts[j, 0] - r0
                y[c, 1] = verts[j, 1] - r1
                y[c, 2] = verts[j, 2] - r2
                nn[c] = dist[j]
                big = max(big, nn[c])
                small = min(small, nn[c])
            if small <= 1e-9 * big:
                continue
            cx = y[1, 1] * y[2, 2] - y[1, 2] * y[2, 1]
            cy = y[1, 2] * y[2, 0] - y[1, 0] * y[2, 2]
            cz = y[1, 0] * y[2, 1] - y[1, 1] * y[2, 0]
            num = y[0, 0] * cx + y[0, 1] * cy + y[0, 2] * cz
            d01 = y[0, 0] * y[1, 0] + y[0, 1] * y[1, 1] + y[0, 2] * y[1, 2]
            d02 = y[0, 0] * y[2, 0] + y[0, 1] * y[2, 1] + y[0, 2] * y[2, 2]
            d12 = y[1, 0] * y[2, 0] + y[1, 1] * y[2, 1] + y[1, 2] * y[2, 2]
            den = nn[0] * nn[1] * nn[2] + d01 * nn[2] + d02 * nn[1] + d12 * nn[0]
            omega = 2.0 * math.atan2(num, den)
            h = normal[t, 0] * y[0, 0] + normal[t, 1] * y[0, 1] + normal[t, 2] * y[0, 2]
            for e in range(3):
                ge[e] = gam[face_edge[t, e]]
            for c in range(3):
                lin = one_minus_gx[t, c] + g[t, c, 0] * r0 + g[t, c, 1] * r1 + g[t, c, 2] * r2
                line = coef[t, c, 0] * ge[0] + coef[t, c, 1] * ge[1] + coef[t, c, 2] * ge[2]
                out[i, faces[t, c]] += lin * omega - h * line
    return out


@njit(parallel=True, cache=True, fastmath=False)
def solid_angle_sums(points, verts, faces):  # pragma: no cover - compiled
    """(m,) total solid angle of a closed mesh seen from each point (van Oosterom & Strackee 1983).

    The compiled counterpart of :func:`prep.geometry.layers.solid_angle_sum`
    (4 pi inside an outward mesh, 0 outside), with exact differences.
    """
    m = points.shape[0]
    k = faces.shape[0]
    out = np.zeros(m)
    for i in prange(m):
        r0, r1, r2 = points[i, 0], points[i, 1], points[i, 2]
        total = 0.0
        for t in range(k):
            a, b, c = faces[t, 0], faces[t, 1], faces[t, 2]
            x0, x1, x2 = verts[a, 0] - r0, verts[a, 1] - r1, verts[a, 2] - r2
            y0, y1, y2 = verts[b, 0] - r0, verts[b, 1] - r1, verts[b, 2] - r2
            z0, z1, z2 = verts[c, 0] - r0, verts[c, 1] - r1, verts[c, 2] - r2
            nx = math.sqrt(x0 * x0 + x1 * x1 + x2 * x2)
            ny = math.sqrt(y0 * y0 + y1 * y1 + y2 * y2)
            nz = math.sqrt(z0 * z0 + z1 * z1 + z2 * z2)
            num = x0 * (y1 * z2 - y2 * z1) + x1 * (y2 * z0 - y0 * z2) + x2 * (y0 * z1 - y1 * z0)
            den = (nx * ny * nz + (x0 * y0 + x1 * y1 + x2 * y2) * nz
                   + (x0 * z0 + x1 * z1 + x2 * z2) * ny + (y0 * z0 + y1 * z1 + y2 * z2) * nx)
            total += 2.0 * math.atan2(num, den)
        out[i] = total
    return out
