"""Closed-form references and error measures for the boundary-element tests."""
from __future__ import annotations

import numpy as np


def homogeneous_sphere(electrodes: np.ndarray, radius: float, sigma: float, position: np.ndarray,
                       moment: np.ndarray, n_terms: int = 400) -> np.ndarray:
    """Surface potential (V) of a dipole in a homogeneous sphere (Frank 1952, Legendre series).

    V(r) = 1/(4 pi sigma R^2) sum_n (2n+1)/n (b/R)^(n-1) [n q_r P_n(c) + (q_t . r_hat) P_n'(c)]
    with b = |r0|, c = cos of the angle between r and r0; the factor (2n+1)/n
    is the insulated-boundary solution of each multipole term.
    """
    r = np.asarray(electrodes, dtype=float)
    rh = r / np.linalg.norm(r, axis=1, keepdims=True)
    b = float(np.linalg.norm(position))
    q = np.asarray(moment, dtype=float)
    if b == 0.0:
        return 3.0 * (rh @ q) / (4.0 * np.pi * sigma * radius ** 2)
    r0h = np.asarray(position, dtype=float) / b
    qr = float(q @ r0h)
    qt_dot = rh @ (q - qr * r0h)
    c = rh @ r0h
    p_prev, p = np.ones_like(c), c.copy()          # P_0, P_1
    dp_prev, dp = np.zeros_like(c), np.ones_like(c)  # P_0', P_1'
    total = np.zeros_like(c)
    for n in range(1, n_terms + 1):
        total += (2 * n + 1) / n * (b / radius) ** (n - 1) * (n * qr * p + qt_dot * dp)
        p_next = ((2 * n + 1) * c * p - n * p_prev) / (n + 1)
        dp_next = dp_prev + (2 * n + 1) * p
        p_prev, p, dp_prev, dp = p, p_next, dp, dp_next
    return total / (4.0 * np.pi * sigma * radius ** 2)


def rdm(a: np.ndarray, b: np.ndarray) -> float:
    """Relative difference measure (Meijs et al. 1989) between average-referenced maps."""
    a = a - a.mean()
    b = b - b.mean()
    return float(np.linalg.norm(a / np.linalg.norm(a) - b / np.linalg.norm(b)))


def mag(a: np.ndarray, b: np.ndarray) -> float:
    """Magnification factor (Meijs et al. 1989): |a| / |b| of average-referenced maps."""
    a = a - a.mean()
    b = b - b.mean()
    return float(np.linalg.norm(a) / np.linalg.norm(b))


def shell_factors(radii: np.ndarray, sigma: np.ndarray, n_terms: int) -> np.ndarray:
    """Outer-surface gain of each multipole order in concentric shells, (n_terms,) for n = 1..n_terms.

    Solves, per order n, V = c r^-(n+1) + A_1 r^n inside the first shell and
    A_j r^n + B_j r^-(n+1) in shell j, continuity of V and sigma dV/dr at each
    interface and no current through the outer one; returns V(R_L) for c = 1 with
    radii scaled so that R_L = 1. Used only when the concentric-spheres solver
    is not installed (the registry's "spheres" solver is the reference of record).
    """
    rho = np.asarray(radii, dtype=float) / radii[-1]
    sig = np.asarray(sigma, dtype=float)
    n_layers = len(rho)
    out = np.empty(n_terms)
    for n in range(1, n_terms + 1):
        size = 2 * n_layers - 1
        m = np.zeros((size, size))
        rhs = np.zeros(size)
        # unknowns: A_1, then (A_j, B_j) for j = 2..L
        def cols(j: int) -> tuple[int, int | None]:
            return (0, None) if j == 0 else (2 * j - 1, 2 * j)
        row = 0
        for j in range(n_layers - 1):
            r = rho[j]
            ai, bi = cols(j)
            ao, bo = cols(j + 1)
            # continuity of V
            m[row, ai] += r ** n
            if bi is not None:
                m[row, bi] += r ** -(n + 1)
            else:
                rhs[row] -= r ** -(n + 1)
            m[row, ao] -= r ** n
            m[row, bo] -= r ** -(n + 1)
            row += 1
            # continuity of normal current
            m[row, ai] += sig[j] * n * r ** (n - 1)
            if bi is not None:
                m[row, bi] += -sig[j] * (n + 1) * r ** -(n + 2)
            else:
                rhs[row] -= -sig[j] * (n + 1) * r ** -(n + 2)
            m[row, ao] -= sig[j + 1] * n * r ** (n - 1)
            m[row, bo] -= -sig[j + 1] * (n + 1) * r ** -(n + 2)
            row += 1
        a_l, b_l = cols(n_layers - 1)
        m[row, a_l] = n
        if b_l is not None:
            m[row, b_l] = -(n + 1)
            x = np.linalg.solve(m, rhs)
            out[n - 1] = x[a_l] + x[b_l]
        else:
            out[n - 1] = (2 * n + 1) / n
    return out


def shell_potential(electrodes: np.ndarray, radii: np.ndarray, sigma: np.ndarray, position: np.ndarray,
                    moment: np.ndarray, n_terms: int = 300) -> np.ndarray:
    """Outer-surface potential (V) of a dipole in concentric shells (Legendre series)."""
    r = np.asarray(electrodes, dtype=float)
    rh = r / np.linalg.norm(r, axis=1, keepdims=True)
    big_r = float(radii[-1])
    b = float(np.linalg.norm(position))
    q = np.asarray(moment, dtype=float)
    fac = shell_factors(radii, sigma, n_terms)
    r0h = np.asarray(position, dtype=float) / b if b > 0 else np.array([0.0, 0.0, 1.0])
    qr = float(q @ r0h)
    qt_dot = rh @ (q - qr * r0h)
    c = rh @ r0h
    p_prev, p = np.ones_like(c), c.copy()
    dp_prev, dp = np.zeros_like(c), np.ones_like(c)
    total = np.zeros_like(c)
    for n in range(1, n_terms + 1):
        total += fac[n - 1] * (b / big_r) ** (n - 1) * (n * qr * p + qt_dot * dp)
        p_next = ((2 * n + 1) * c * p - n * p_prev) / (n + 1)
        dp_next = dp_prev + (2 * n + 1) * p
        p_prev, p, dp_prev, dp = p, p_next, dp, dp_next
    return total / (4.0 * np.pi * sigma[0] * big_r ** 2)
