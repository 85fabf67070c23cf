"""Sphere kernels: least-squares sphere fit and radial projection (metres, pure functions)."""
from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["fit_sphere", "project_to_sphere"]

F64 = NDArray[np.float64]


def _algebraic(p: F64) -> tuple[F64, float]:
    """Linear least squares on ``|p|^2 = 2 c . p + (r^2 - |c|^2)`` (Kasa 1976)."""
    a = np.hstack([2.0 * p, np.ones((len(p), 1))])
    rhs = np.einsum("ij,ij->i", p, p)
    sol, _, rank, _ = np.linalg.lstsq(a, rhs, rcond=None)
    if rank < 4:
        raise ValueError("points are coplanar or collinear: no unique sphere")
    centre = sol[:3]
    r2 = sol[3] + centre @ centre
    return centre, float(np.sqrt(max(r2, 0.0)))


def fit_sphere(points: ArrayLike, *, iterations: int = 50) -> tuple[F64, float]:
    """Least-squares sphere through ``points``.

    An algebraic fit (linear, Kasa 1976) starts Gauss-Newton iterations on the
    geometric residuals ``|p - c| - r`` (orthogonal distance regression).

    Parameters
    ----------
    points : (n, 3) float64, metres, n >= 4, not coplanar
    iterations : int
        Cap on Gauss-Newton steps (it normally converges in a handful).

    Returns
    -------
    centre : (3,) float64, metres
    radius : float, metres

    Raises
    ------
    ValueError
        Fewer than 4 points, non-finite values, or coplanar points.
    """
    p = np.asarray(points, dtype=np.float64)
    if p.ndim != 2 or p.shape[1] != 3:
        raise ValueError(f"points must be (n, 3), got {p.shape}")
    if len(p) < 4:
        raise ValueError(f"a sphere needs at least 4 points, got {len(p)}")
    if not np.all(np.isfinite(p)):
        raise ValueError("points contain non-finite values")
    shift = p.mean(axis=0)
    q = p - shift
    spread = float(np.sqrt((q * q).sum(axis=1).mean())) or 1.0
    q = q / spread                                   # well-conditioned units
    centre, radius = _algebraic(q)
    for _ in range(iterations):
        d = q - centre
        dist = np.linalg.norm(d, axis=1)
        dist = np.where(dist > 0, dist, 1e-300)
        res = dist - radius
        jac = np.hstack([-d / dist[:, None], -np.ones((len(q), 1))])
        step, *_ = np.linalg.lstsq(jac, -res, rcond=None)
        centre = centre + step[:3]
        radius = radius + step[3]
        if np.abs(step).max() < 1e-13:
            break
    return centre * spread + shift, float(abs(radius) * spread)


def project_to_sphere(points: ArrayLike, centre: ArrayLike, radius: float) -> tuple[F64, F64]:
    """Project ``points`` radially from ``centre`` onto the sphere of ``radius``.

    Parameters
    ----------
    points : (n, 3) float64, metres
    centre : (3,) float64, metres
    radius : float, metres

    Returns
    -------
    projected : (n, 3) float64, metres
    valid : (n,) bool
        False for points at the centre (left where they are) or non-finite.
    """
    p = np.asarray(points, dtype=np.float64)
    c = np.asarray(centre, dtype=np.float64)
    rel = p - c
    norm = np.linalg.norm(rel, axis=1)
    valid = np.isfinite(norm) & (norm > 0)
    scale = np.where(valid, radius / np.where(valid, norm, 1.0), 1.0)
    return c + rel * scale[:, None], valid
