"""Compiled kernel of the ``forward_spheres`` plugin (numba): same series as ``_forward_spheres_series``.

One call fills the lead-field columns of a block of sources, already scaled
and referenced. Per source it computes the closed-form part (when
``f >= f_direct``), the source's own scale and term count, then the remainder
series by the forward Legendre recurrence in ``t = cos(angle)`` vectorised over
the electrodes (no angle, no grid, no interpolation), and writes the columns.

Truncation bound (rigorous, per source): for a unit dipole the error of the
potential (up to the common factor) is at most the norm of
``(dS1, sin(gamma) dS2)``, and term ``n`` contributes a vector of norm
``|a_n| sqrt(P_n^2 + sin^2 P_n'^2 / n^2) <= |a_n| sqrt(1 + 1/n)``, because
``P_n^2 + (1 - t^2) P_n'^2 / (n (n + 1)) <= 1`` on [-1, 1] (its derivative is
``2 t P_n'^2 / (n (n+1))``, so it peaks at ``t = +-1``, where it is 1;
a Sonine-type argument, Szego 1939, chapter 7). The series stops at the first ``N`` with
``sum_{n>N} |a_n| sqrt(1 + 1/n) <= tol * scale``.
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit


@njit(nogil=True, cache=True, fastmath=False)
def lead_block(dirs, src, normals, fixed, idx, out, weights_c, weights_d, c_inf, alpha,
               radius, tol, f_direct, gain, ref_row):  # pragma: no cover - compiled
    """Fill ``out`` columns of the sources ``idx`` (see :func:`series.lead_columns` for the arguments).

    dirs (n, 3) unit electrode directions; src (m, 3) m from the centre;
    normals (m, 3) (read only when ``fixed``); out (n, m) fixed or (n, 3 m) free;
    weights_c / weights_d (K,) exact ``c_n`` and remainder weights; ref_row -1 for
    the average reference, else the reference electrode's row.
    """
    ne = dirs.shape[0]
    kmax = weights_c.shape[0] - 1
    t = np.empty(ne)
    sg = np.empty(ne)
    s1 = np.empty(ne)
    s2 = np.empty(ne)
    pa = np.empty(ne)
    pb = np.empty(ne)
    da = np.empty(ne)
    db = np.empty(ne)
    coef = np.empty(kmax + 1)
    tail = np.empty(kmax + 2)
    ncol = 1 if fixed else 3
    col = np.empty((ne, ncol))
    root = np.empty(kmax + 1)
    for n in range(1, kmax + 1):
        root[n] = math.sqrt(1.0 + 1.0 / n)
    for jj in range(idx.shape[0]):
        j = idx[jj]
        x, y, z = src[j, 0], src[j, 1], src[j, 2]
        b = math.sqrt(x * x + y * y + z * z)
        f = b / radius
        if b > 0.0:
            ux, uy, uz = x / b, y / b, z / b
        else:
            ux, uy, uz = 0.0, 0.0, 1.0
        for i in range(ne):
            ti = dirs[i, 0] * ux + dirs[i, 1] * uy + dirs[i, 2] * uz
            t[i] = min(1.0, max(-1.0, ti))
            sg[i] = math.sqrt(max(0.0, 1.0 - t[i] * t[i]))
        if f >= f_direct:
            w = weights_d
            scale = 0.0
            ca = c_inf + alpha
            for i in range(ne):
                ft = f * t[i]
                d = math.sqrt(1.0 - 2.0 * ft + f * f)
                e = 1.0 - ft + d
                inv = 1.0 / (d * e)                    # one division for 1/d and 1/(d e)
                inv_d = e * inv
                g = 2.0 * c_inf * inv_d * inv_d * inv_d
                a2 = ca * (d + 1.0) * inv
                b1 = g * (t[i] - f) + (inv_d - 1.0) * (ca / f)
                b2 = g + a2
                s1[i] = b1
                s2[i] = b2
                scale = max(scale, abs(b1) + abs(b2) * sg[i])
        else:
            w = weights_c
            scale = 3.0 * abs(weights_c[1])
            for i in range(ne):
                s1[i] = 0.0
                s2[i] = 0.0
        # coefficients a_n = (2n+1) w_n f^(n-1) and the degree where the bound of the rest fits the budget
        fp = 1.0
        for n in range(1, kmax + 1):
            coef[n] = (2 * n + 1) * w[n] * fp
            fp *= f
        tail[kmax + 1] = 0.0
        for n in range(kmax, 0, -1):
            tail[n] = tail[n + 1] + abs(coef[n]) * root[n]
        budget = tol * scale
        n_deg = kmax
        for n in range(1, kmax + 1):
            if tail[n + 1] <= budget:
                n_deg = n
                break
        # forward recurrence: P_{n+1} = ((2n+1) t P_n - n P_{n-1}) / (n+1), P'_{n+1} = P'_{n-1} + (2n+1) P_n
        a1 = coef[1]
        for i in range(ne):
            pa[i] = 1.0          # P_{n-1}
            pb[i] = t[i]         # P_n
            da[i] = 0.0          # P'_{n-1}
            db[i] = 1.0          # P'_n
            s1[i] += a1 * t[i]
            s2[i] += a1
        n = 1
        while n < n_deg:
            # two degrees per pass, ping-pong between (pa, da) and (pb, db): no copies
            an = coef[n + 1]
            bn = an / (n + 1)
            p_hi = (2.0 * n + 1.0) / (n + 1.0)
            p_lo = n / (n + 1.0)
            c2 = 2.0 * n + 1.0
            if n + 1 < n_deg:
                am = coef[n + 2]
                bm = am / (n + 2)
                q_hi = (2.0 * n + 3.0) / (n + 2.0)
                q_lo = (n + 1.0) / (n + 2.0)
                c3 = 2.0 * n + 3.0
                for i in range(ne):
                    ti = t[i]
                    p1 = pb[i]
                    p2 = p_hi * ti * p1 - p_lo * pa[i]
                    d2 = da[i] + c2 * p1
                    p3 = q_hi * ti * p2 - q_lo * p1
                    d3 = db[i] + c3 * p2
                    pa[i] = p2
                    pb[i] = p3
                    da[i] = d2
                    db[i] = d3
                    s1[i] += an * p2 + am * p3
                    s2[i] += bn * d2 + bm * d3
                n += 2
            else:
                for i in range(ne):
                    pn = p_hi * t[i] * pb[i] - p_lo * pa[i]
                    dn = da[i] + c2 * pb[i]
                    pa[i] = pb[i]
                    pb[i] = pn
                    da[i] = db[i]
                    db[i] = dn
                    s1[i] += an * pn
                    s2[i] += bn * dn
                n += 1
        # potentials of the block's columns, scaled
        if fixed:
            nx, ny, nz = normals[j, 0], normals[j, 1], normals[j, 2]
            q_r = nx * ux + ny * uy + nz * uz
            for i in range(ne):
                q_e = dirs[i, 0] * nx + dirs[i, 1] * ny + dirs[i, 2] * nz
                col[i, 0] = gain * ((s1[i] - t[i] * s2[i]) * q_r + s2[i] * q_e)
        else:
            for i in range(ne):
                radial = s1[i] - t[i] * s2[i]
                col[i, 0] = gain * (radial * ux + s2[i] * dirs[i, 0])
                col[i, 1] = gain * (radial * uy + s2[i] * dirs[i, 1])
                col[i, 2] = gain * (radial * uz + s2[i] * dirs[i, 2])
        for k in range(ncol):
            if ref_row < 0:
                ref = 0.0
                for i in range(ne):
                    ref += col[i, k]
                ref /= ne
            else:
                ref = col[ref_row, k]
            for i in range(ne):
                out[i, ncol * j + k] = col[i, k] - ref
