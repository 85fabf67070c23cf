"""Private compiled kernel of the ``forward_bem`` plugin (numba), same formula as the numpy one.

See :mod:`._forward_bem_kernels` for the closed form. This loop computes it
per (field point, triangle) pair without temporaries and runs field points in
parallel; it is used when numba is importable, else the numpy kernel is.
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit, prange


@njit(parallel=True, cache=True, fastmath=False)
def linear_weights(points, x, normal, g, one_minus_gx, coef, et, faces, n_vertices):  # pragma: no cover - compiled
    """(m, n_vertices) double-layer weights of linear hat functions.

    points (m, 3); x (k, 3, 3) triangle corners; normal (k, 3); g (k, 3, 3)
    hat gradients per corner; one_minus_gx (k, 3); coef (k, 3, 3) g_c . m_e;
    et (k, 3, 3) unit edge directions (corner e -> e + 1); faces (k, 3).
    """
    m = points.shape[0]
    k = x.shape[0]
    out = np.zeros((m, n_vertices))
    for i in prange(m):
        r0, r1, r2 = points[i, 0], points[i, 1], points[i, 2]
        y = np.empty((3, 3))
        nn = np.empty(3)
        gam = np.empty(3)
        for t in range(k):
            big = 0.0
            small = 1e300
            for c in range(3):
                y[c, 0] = x[t, c, 0] - r0
                y[c, 1] = x[t, c, 1] - r1
                y[c, 2] = x[t, c, 2] - r2
                nn[c] = math.sqrt(y[c, 0] * y[c, 0] + y[c, 1] * y[c, 1] + y[c, 2] * y[c, 2])
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
                b = (e + 1) % 3
                sa = et[t, e, 0] * y[e, 0] + et[t, e, 1] * y[e, 1] + et[t, e, 2] * y[e, 2]
                sb = et[t, e, 0] * y[b, 0] + et[t, e, 1] * y[b, 1] + et[t, e, 2] * y[b, 2]
                if sa + sb >= 0.0:
                    gam[e] = math.log((nn[b] + sb) / (nn[e] + sa))
                else:
                    gam[e] = math.log((nn[e] - sa) / (nn[b] - sb))
            for c in range(3):
                lin = one_minus_gx[t, c] + g[t, c, 0] * r0 + g[t, c, 1] * r1 + g[t, c, 2] * r2
                line = coef[t, c, 0] * gam[0] + coef[t, c, 1] * gam[1] + coef[t, c, 2] * gam[2]
                out[i, faces[t, c]] += lin * omega - h * line
    return out
