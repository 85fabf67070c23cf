"""Legendre-series kernel of the concentric-spheres forward solver (private to ``forward_spheres``).

Notation (see docs/sphere-model.md for the derivation)
------------------------------------------------------
Shells ``k = 1..N`` inside -> out with outer radii ``r_k`` and conductivities
``sigma_k``; the dipole (moment ``q``, A*m) sits at ``r0`` in shell 1 with
``b = |r0| < r_1``; electrodes lie on the outer sphere ``|r| = R = r_N``.
With ``f = b / R``, ``t = cos(angle(r, r0))`` and ``q_r = q . r0/b`` the
potential is (de Munck & Peters 1993, isotropic case of Zhang 1995)::

    V = 1/(4 pi sigma_N R^2) * [ q_r * S1 + (q . rhat - t q_r) * S2 ]
    S1 = sum_n (2n+1)   c_n f^(n-1) P_n(t)
    S2 = sum_n (2n+1)/n c_n f^(n-1) P_n'(t)

``c_n = n / D_n`` carries every interface (``c_n = 1`` in a homogeneous
sphere). ``D_n`` comes from a 2x2 transfer-matrix recursion across the
interfaces (:func:`shell_weights`). For large ``n``,
``c_n -> c_inf + alpha / (2n+1) + O(n^-2)``; the two leading parts are summed in
closed form (:func:`closed_form_part`) and only the remainder series is summed,
up to the degree where an a-priori bound of what is left falls below the
tolerance (:func:`remainder_sums`: on a grid of angles by matrix products, then
interpolated to the electrodes).
"""
from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

F64 = NDArray[np.float64]

#: below this ratio f = b/R the closed forms lose digits to cancellation; sum directly.
F_DIRECT = 0.1
#: largest angular grid (nodes over [0, pi]) for the remainder tables.
MAX_NODES = 1 << 16


def shell_weights(radii: F64, conductivities: F64, n_max: int) -> F64:
    """Per-degree interface factors ``c_n = n / D_n`` for ``n = 0..n_max`` (``c_0`` unused, set to 0).

    Transfer-matrix recursion: in shell ``k`` the degree-``n`` radial function is
    ``a r^n + b r^-(n+1)``; at an interface the potential and the normal current
    density are continuous. The state ``(x, y) = (a r^n, b r^-(n+1))`` is carried
    from the innermost interface outwards starting from the regular solution
    ``(1, 0)``, renormalised by ``(r_k / r_k+1)^n`` per shell so that nothing
    overflows. ``D_n = n x - (n+1) y`` at the outer surface (no current leaves).

    Parameters
    ----------
    radii : (N,) float64, metres, increasing
    conductivities : (N,) float64, S/m
    n_max : int

    Returns
    -------
    (n_max + 1,) float64, dimensionless
    """
    n = np.arange(n_max + 1, dtype=np.float64)
    x = np.ones_like(n)
    y = np.zeros_like(n)
    two_n1 = 2.0 * n + 1.0
    for k in range(len(radii) - 1):
        s = conductivities[k] / conductivities[k + 1]
        x, y = (((n + 1 + s * n) * x + (n + 1) * (1 - s) * y) / two_n1,
                (n * (1 - s) * x + (n + (n + 1) * s) * y) / two_n1)
        y = y * (radii[k] / radii[k + 1]) ** two_n1
    d = n * x - (n + 1) * y
    c = np.zeros_like(n)
    c[1:] = n[1:] / d[1:]
    return c


def asymptote(conductivities: F64) -> tuple[float, float]:
    """``(c_inf, alpha)`` with ``c_n = c_inf + alpha/(2n+1) + O(n^-2)`` for large ``n``.

    The decaying part of every interface drops out, leaving
    ``c_n ~ prod_k 1 / ((1+s_k)/2 + (1-s_k)/(2(2n+1)))`` with
    ``s_k = sigma_k / sigma_k+1``; expanded to first order in ``1/(2n+1)``.
    """
    s = np.asarray(conductivities[:-1], dtype=float) / np.asarray(conductivities[1:], dtype=float)
    c_inf = float(np.prod(2.0 / (1.0 + s)))
    alpha = -c_inf * float(np.sum((1.0 - s) / (1.0 + s)))
    return c_inf, alpha


def closed_form_part(f: F64, t: F64, c_inf: float, alpha: float) -> tuple[F64, F64]:
    """``c_inf H1 + alpha A1`` and ``c_inf H2 + alpha A2``: the summed tail of ``S1`` and ``S2`` (``f > 0``).

    With ``d = sqrt(1 - 2 f t + f^2)`` (generating function of P_n) and
    ``L = sum_n f^n P_n / n = log(2 / (1 - f t + d))``:

    - ``H1 = sum (2n+1) f^(n-1) P_n    = 2 (t - f)/d^3 + A1``
    - ``H2 = sum (2n+1)/n f^(n-1) P_n' = 2/d^3 + A2``
    - ``A1 = sum f^(n-1) P_n           = (1/d - 1) / f``
    - ``A2 = sum f^(n-1) P_n' / n      = (d + 1) / (d (1 - f t + d))``

    ``H1, H2`` reproduce the homogeneous-sphere potential of Frank (1952).

    Parameters
    ----------
    f, t : broadcastable float64 arrays, 0 < f < 1, -1 <= t <= 1
    c_inf, alpha : float
        From :func:`asymptote`.

    Returns
    -------
    B1, B2 : float64 arrays of the broadcast shape
    """
    d = 1.0 - 2.0 * f * t
    d += f * f
    np.sqrt(d, out=d)
    inv_d = 1.0 / d
    g = inv_d * inv_d
    g *= inv_d
    g *= 2.0 * c_inf                                   # 2 c_inf / d^3
    ca = c_inf + alpha
    a2 = d + 1.0
    a2 *= inv_d
    a2 /= 1.0 - f * t + d
    a2 *= ca
    inv_d -= 1.0
    inv_d *= ca / f                                    # (c_inf + alpha) A1
    base1 = g * (t - f)
    base1 += inv_d
    g += a2
    return base1, g


def weights_for(radii: F64, conductivities: F64, f_max: float, tol: float) -> tuple[F64, F64, float, float]:
    """Weights for :func:`series_sums`: exact ``c_n`` and the remainder ``c_n - c_inf - alpha/(2n+1)``.

    Sized so that ``f_max^n`` has fallen well below ``tol`` (at least 64 terms).

    Returns
    -------
    c : (K,) float64
        ``c_n`` for direct summation.
    delta : (K,) float64
        Remainder weights for the accelerated summation.
    c_inf, alpha : float
    """
    f_max = min(max(f_max, 1e-3), 1.0 - 1e-9)
    k = int(min(200_000, max(64, 3 * np.ceil(np.log(tol * 1e-3) / np.log(f_max)))))
    c = shell_weights(radii, conductivities, k)
    c_inf, alpha = asymptote(conductivities)
    n = np.arange(k + 1, dtype=np.float64)
    delta = c - c_inf - alpha / (2.0 * n + 1.0)
    delta[0] = 0.0
    return c, delta, c_inf, alpha




def _degree_and_grid(w: F64, f: float, budget: float) -> tuple[int, int]:
    """Highest degree ``N`` and angular node count for the remainder of one group of sources.

    ``N`` is the first degree after which the bound of what is left,
    ``sum_{n>N} |w_n| (2n+1) f^(n-1) (1 + (n+1)/2)`` (``|P_n| <= 1``,
    ``|P_n'| <= n(n+1)/2``), is below ``budget / 2``. The grid step ``h``
    makes the cubic-interpolation error bound
    ``0.0235 h^4 sum_n |a_n| n^4`` (Bernstein's inequality for a trigonometric
    polynomial of degree n) below ``budget / 2``.
    """
    k = len(w) - 1
    n = np.arange(1, k + 1, dtype=np.float64)
    with np.errstate(under="ignore"):
        mag = np.abs(w[1:]) * (2 * n + 1) * f ** (n - 1)
    both = mag * (1.0 + (n + 1) / 2.0)
    tail = np.cumsum(both[::-1])[::-1]          # tail[i] = sum over degrees >= i+1
    left = np.append(tail[1:], 0.0)             # what is left after degree i+1
    ok = np.flatnonzero(left <= budget / 2)
    n_deg = int(ok[0]) + 1 if ok.size else k
    nd = n[:n_deg]
    deriv4 = float(np.sum(both[:n_deg] * nd ** 4))
    if deriv4 == 0.0:
        return n_deg, 4
    h = (budget / 2 / (0.0235 * deriv4)) ** 0.25
    return n_deg, int(min(MAX_NODES, max(8, np.ceil(np.pi / h))))


def _legendre_tables(t: F64, n_deg: int) -> tuple[F64, F64]:
    """``P_n(t)`` and ``P_n'(t)`` for ``n = 1..n_deg`` at (K,) points: two (n_deg, K) arrays."""
    p = np.empty((n_deg + 1, len(t)))
    dp = np.empty_like(p)
    p[0], dp[0] = 1.0, 0.0
    if n_deg >= 1:
        p[1], dp[1] = t, 1.0
    for n in range(1, n_deg):
        p[n + 1] = ((2 * n + 1) * t * p[n] - n * p[n - 1]) / (n + 1)
        dp[n + 1] = t * dp[n] + (n + 1) * p[n]
    return p[1:], dp[1:]


def remainder_sums(f: F64, t: F64, w: F64, budget: float) -> tuple[F64, F64]:
    """``sum_n (2n+1) w_n f^(n-1) P_n(t)`` and ``sum_n (2n+1)/n w_n f^(n-1) P_n'(t)`` within ``budget``.

    Each source's two series are evaluated on a uniform grid of angles
    (a matrix product of Legendre tables with per-source coefficients) and
    interpolated to its electrodes with 4-point cubic Lagrange weights. The
    truncation and the interpolation each stay below ``budget / 2`` in
    absolute terms (bounds in :func:`_degree_and_grid`).

    Parameters
    ----------
    f : (m,) float64
        ``b / R`` of each source.
    t : (n, m) float64
        Cosine of the electrode-source angle.
    w : (K,) float64
        Weights ``w_n``, ``n = 0..K-1``.
    budget : float
        Absolute error allowed on each sum.

    Returns
    -------
    R1, R2 : (n, m) float64
    """
    n_deg, nodes = _degree_and_grid(w, float(f.max()), budget)
    h = np.pi / nodes
    theta = (np.arange(nodes + 4) - 1.0) * h           # one node before 0, two after pi
    ptab, dptab = _legendre_tables(np.cos(theta), n_deg)
    deg = np.arange(1, n_deg + 1, dtype=np.float64)[:, None]
    coef1 = (2 * deg + 1) * w[1:n_deg + 1, None] * f[None, :] ** (deg - 1)   # (N, m); 0**0 = 1
    # (m, nodes + 4): one source per row, so each gather below stays within a row
    grid1 = coef1.T @ ptab
    grid2 = (coef1 / deg).T @ dptab
    tt = np.ascontiguousarray(t.T)                      # (m, n), C order: gathers run along rows
    u = np.arccos(tt) / h
    k0 = np.minimum(np.floor(u), nodes - 1)
    x = u - k0
    flat = k0.astype(np.int64) + ((nodes + 4) * np.arange(tt.shape[0]))[:, None]   # node k0 - 1
    xm1, xp1, xm2 = x - 1.0, x + 1.0, x - 2.0
    xx = x * xm1
    weights = (xx * xm2 * (-1.0 / 6.0), xp1 * xm1 * xm2 * 0.5, xp1 * x * xm2 * -0.5, xp1 * xx * (1.0 / 6.0))
    g1, g2 = grid1.ravel(), grid2.ravel()
    r1 = np.zeros_like(tt)
    r2 = np.zeros_like(tt)
    buf = np.empty_like(tt)
    for j, wj in enumerate(weights):
        for grid, acc in ((g1, r1), (g2, r2)):
            np.take(grid[j:], flat, out=buf)       # shifted views: no index arithmetic per node
            buf *= wj
            acc += buf
    return r1.T, r2.T


def chunk_potentials(dirs: F64, src: F64, normals: F64 | None, weights: tuple[F64, F64, float, float],
                     radius: float, tol: float) -> F64:
    """Potentials of unit dipoles at ``src`` on electrodes at ``radius * dirs`` (no reference applied).

    Sources with ``f = b/R >= F_DIRECT`` get the closed-form sums of
    ``c_inf`` and ``alpha`` plus the remainder series with weights
    ``c_n - c_inf - alpha/(2n+1)``; those nearer the centre are summed
    directly with weights ``c_n`` (the closed forms would lose digits).

    Parameters
    ----------
    dirs : (n, 3) float64
        Unit electrode directions from the centre.
    src : (m, 3) float64, metres
        Dipole positions relative to the centre, inside the innermost sphere.
    normals : (m, 3) float64 or None
        Fixed orientations, or None for x, y, z.
    weights : tuple from :func:`weights_for`
    radius : float, metres
        Outer radius ``R``.
    tol : float
        Relative to each source's largest ``|S1| + |S2| sin(gamma)`` over the electrodes.

    Returns
    -------
    (n, m) or (n, m, 3) float64
        ``4 pi sigma_N R^2`` times the potential, i.e. still to be scaled.
    """
    c, delta, c_inf, alpha = weights
    b = np.linalg.norm(src, axis=1)
    f = b / radius
    safe = np.where(b > 0, b, 1.0)
    rhat0 = np.where((b > 0)[:, None], src / safe[:, None], np.array([0.0, 0.0, 1.0]))
    t = np.clip(dirs @ rhat0.T, -1.0, 1.0)
    s1 = np.empty_like(t)
    s2 = np.empty_like(t)
    split = int(np.searchsorted(f, F_DIRECT)) if np.all(np.diff(f) >= 0) else None
    groups = ((slice(0, split), False), (slice(split, None), True)) if split is not None else \
        ((f < F_DIRECT, False), (f >= F_DIRECT, True))
    for cols, accelerated in groups:
        fc = f[cols]
        if fc.size == 0:
            continue
        tc = t[:, cols]
        if accelerated:
            base1, base2 = closed_form_part(fc[None, :], tc, c_inf, alpha)
            # a lower bound of each source's scale (the S2 term left out): conservative
            scale = float(np.abs(base1).max(axis=0).min())
            r1, r2 = remainder_sums(fc, tc, delta, tol * scale)
            s1[:, cols] = base1 + r1
            s2[:, cols] = base2 + r2
        else:
            s1[:, cols], s2[:, cols] = remainder_sums(fc, tc, c, tol * 3.0 * abs(c[1]))
    radial = s1 - t * s2       # multiplies q . rhat0
    if normals is None:
        return radial[:, :, None] * rhat0[None, :, :] + s2[:, :, None] * dirs[:, None, :]
    q_r = np.einsum("ij,ij->i", normals, rhat0)
    return radial * q_r[None, :] + s2 * (dirs @ normals.T)
