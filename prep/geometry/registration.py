"""Rigid registration kernels: absolute orientation and robust point-to-plane ICP.

- :func:`absolute_orientation`: closed-form least-squares similarity between
  paired points (Horn 1987; Umeyama 1991, with the reflection guard), optional
  isotropic scale.
- :func:`robust_icp`: iterative closest point (Besl & McKay 1992) with the
  point-to-plane error (Chen & Medioni 1992), linearised small-angle steps
  (Low 2004), Huber weights (Huber 1964) on a robust scale (median absolute
  deviation) and hard rejection of gross outliers. Optional paired landmarks
  (fiducials) enter as point-to-point terms, which pin the rotation on
  near-spherical heads where the surface alone cannot.
- :func:`bootstrap_step`: a bootstrap (Efron & Tibshirani 1993) of the final
  linearised step over the fit points: the spread of the transform if the
  points had been drawn again.

All functions are pure: arrays in, arrays out, inputs never mutated. Matrices
are 4x4 homogeneous, acting on column vectors, metres.
"""
from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from .._typing import ArrayLike, FloatArray

__all__ = [
    "absolute_orientation", "rigid_matrix", "rotation_angle_deg", "rotvec_to_matrix", "spread_ratio",
    "point_to_plane_system", "IcpResult", "robust_icp", "bootstrap_step", "huber_weights", "robust_scale",
]


def rigid_matrix(rotation: ArrayLike, translation: ArrayLike, scale: float = 1.0) -> FloatArray:
    """(4, 4) matrix of ``x -> scale * R x + t``."""
    m = np.eye(4)
    m[:3, :3] = scale * np.asarray(rotation, dtype=float)
    m[:3, 3] = np.asarray(translation, dtype=float)
    return m


def spread_ratio(points: ArrayLike) -> float:
    """Second over first singular value of the centred points (0 for collinear or single points)."""
    p = np.asarray(points, dtype=float)
    if len(p) < 2:
        return 0.0
    s = np.linalg.svd(p - p.mean(axis=0), compute_uv=False)
    return float(s[1] / s[0]) if s[0] > 0 else 0.0


def absolute_orientation(source: ArrayLike, target: ArrayLike, weights: ArrayLike | None = None, *,
                         scale: bool = False, allow_reflection: bool = False) -> tuple[FloatArray, FloatArray, float]:
    """Least-squares ``R, t, s`` minimising ``sum w |s R source + t - target|^2``.

    Parameters
    ----------
    source, target : (n, 3) float, n >= 3 non-collinear points (paired rows)
    weights : (n,) float, optional
    scale : bool
        Estimate an isotropic scale (Umeyama 1991); otherwise ``s = 1``.
    allow_reflection : bool
        Let ``R`` be a reflection (det -1) if that fits better.

    Returns
    -------
    rotation : (3, 3) float64
    translation : (3,) float64
    scale : float
    """
    a = np.asarray(source, dtype=float)
    b = np.asarray(target, dtype=float)
    if a.shape != b.shape or a.ndim != 2 or a.shape[1] != 3:
        raise ValueError(f"source and target must both be (n, 3), got {a.shape} and {b.shape}")
    w = np.ones(len(a)) if weights is None else np.asarray(weights, dtype=float)
    w = w / w.sum()
    mu_a, mu_b = w @ a, w @ b
    da, db = a - mu_a, b - mu_b
    cov = (db * w[:, None]).T @ da
    u, d, vt = np.linalg.svd(cov)
    sign = np.ones(3)
    if not allow_reflection and np.linalg.det(u) * np.linalg.det(vt) < 0:
        sign[2] = -1.0
    rot = (u * sign) @ vt
    s = float((d * sign).sum() / (w @ (da * da).sum(axis=1))) if scale else 1.0
    return rot, mu_b - s * rot @ mu_a, s


def rotvec_to_matrix(omega: ArrayLike) -> FloatArray:
    """Rotation matrix of a rotation vector (axis times angle in radians), Rodrigues' formula."""
    w = np.asarray(omega, dtype=float)
    theta = float(np.linalg.norm(w))
    if theta < 1e-15:
        return np.eye(3)
    k = w / theta
    kx = np.array([[0, -k[2], k[1]], [k[2], 0, -k[0]], [-k[1], k[0], 0]])
    return np.eye(3) + np.sin(theta) * kx + (1 - np.cos(theta)) * kx @ kx


def rotation_angle_deg(rotation: ArrayLike) -> float:
    """Angle of a (3, 3) rotation, degrees."""
    r = np.asarray(rotation, dtype=float)
    return float(np.degrees(np.arccos(np.clip((np.trace(r) - 1) / 2, -1.0, 1.0))))


def huber_weights(residuals: ArrayLike, scale: ArrayLike, k: float = 1.345) -> FloatArray:
    """IRLS weights of Huber's loss (Huber 1964): 1 inside ``k * scale``, ``k * scale / |r|`` outside.

    ``scale`` is a float or an array broadcasting against ``residuals``.
    """
    r = np.abs(np.asarray(residuals, dtype=float))
    c = k * np.asarray(scale, dtype=float)
    return np.where(r <= c, 1.0, c / np.maximum(r, 1e-300))


def robust_scale(residuals: ArrayLike, floor: float) -> float:
    """1.4826 x the median absolute deviation about zero, at least ``floor``."""
    r = np.abs(np.asarray(residuals, dtype=float))
    return max(float(1.4826 * np.median(r)) if r.size else floor, floor)


def point_to_plane_system(points: FloatArray, targets: FloatArray, normals: FloatArray,
                          landmarks: FloatArray | None = None,
                          landmark_targets: FloatArray | None = None) -> tuple[FloatArray, FloatArray]:
    """Rows of the linearised least-squares system ``A [omega, t] = b``.

    Surface rows: ``n . (x + omega x x + t - c) = 0``; landmark rows (3 per
    landmark): ``x + omega x x + t - y = 0``.

    Returns
    -------
    A : (k + 3 m, 6) float64
    b : (k + 3 m,) float64
    """
    a_surf = np.hstack([np.cross(points, normals), normals])
    b_surf = -np.einsum("ij,ij->i", normals, points - targets)
    if landmarks is None or len(landmarks) == 0:
        return a_surf, b_surf
    m = len(landmarks)
    a_lm = np.zeros((m, 3, 6))
    x = landmarks
    # omega x x = -[x]_x omega
    a_lm[:, 0, 1], a_lm[:, 0, 2] = x[:, 2], -x[:, 1]
    a_lm[:, 1, 0], a_lm[:, 1, 2] = -x[:, 2], x[:, 0]
    a_lm[:, 2, 0], a_lm[:, 2, 1] = x[:, 1], -x[:, 0]
    a_lm[:, :, 3:] = np.eye(3)
    b_lm = (landmark_targets - landmarks).reshape(-1)
    return np.vstack([a_surf, a_lm.reshape(-1, 6)]), np.concatenate([b_surf, b_lm])


def _solve_step(a: FloatArray, b: FloatArray, w: FloatArray, damping: float) -> FloatArray:
    ata = (a * w[:, None]).T @ a
    atb = (a * w[:, None]).T @ b
    tr = np.trace(ata)
    if not tr > 0:  # every point rejected or weightless: stay where we are
        return np.zeros(6)
    return np.linalg.solve(ata + damping * tr / 6 * np.eye(6), atb)


def _step_matrix(x: FloatArray) -> FloatArray:
    return rigid_matrix(rotvec_to_matrix(x[:3]), x[3:])


@dataclass(frozen=True)
class IcpResult:
    """Outcome of :func:`robust_icp`.

    Attributes
    ----------
    matrix : (4, 4) float64
        From the points' frame to the surface's frame.
    distances : (n,) float64, metres
        Signed point-to-surface distance at the solution (positive outside).
    inliers : (n,) bool
        Points kept (not rejected as gross outliers) in the last iteration.
    scale : float, metres
        Robust scale of the distances of the inliers.
    iterations : int
    converged : bool
    system : tuple
        ``(A, b, w)`` of the last linearised step (for :func:`bootstrap_step`).
    """

    matrix: FloatArray
    distances: FloatArray
    inliers: np.ndarray
    scale: float
    iterations: int
    converged: bool
    system: tuple[FloatArray, FloatArray, FloatArray]


Query = Callable[..., tuple[FloatArray, FloatArray, np.ndarray]]


def robust_icp(points: ArrayLike, query: Query, normals_of: Callable[[np.ndarray], FloatArray],
               init: ArrayLike, *, groups: ArrayLike | None = None, landmarks: ArrayLike | None = None,
               landmark_targets: ArrayLike | None = None, landmark_sigma: float = 0.003, max_iter: int = 40,
               tol_m: float = 5e-5, huber_k: float = 1.345, reject_factor: float = 3.0,
               reject_floor: float = 0.005, scale_floor: float = 0.0005, damping: float = 1e-9) -> IcpResult:
    """Robust point-to-plane ICP of ``points`` onto a surface.

    Parameters
    ----------
    points : (n, 3) float, metres, source frame
    query : callable ``(x (n,3), exact=bool) -> (closest (n,3), signed distance (n,), face (n,))``
        Surface query in the target frame, e.g. :meth:`prep.geometry.surface.SurfaceQuery.query`.
    normals_of : callable ``(face (n,)) -> (n, 3)`` unit outward normals
    init : (4, 4) float
        Starting transform (source -> target).
    groups : (n,) int, optional
        Point classes with their own noise level (e.g. head shape 0, electrodes 1):
        each gets its own robust scale and is weighted by its inverse variance.
    landmarks, landmark_targets : (m, 3) float, optional
        Paired points (source and target frame) fitted point-to-point with
        standard deviation ``landmark_sigma`` (m).
    tol_m : float
        Stop when a step moves no point by more than this (m).
    reject_factor, reject_floor : float
        A point is a gross outlier if ``|d| > max(reject_floor, reject_factor * scale)``.

    Returns
    -------
    IcpResult
    """
    p = np.asarray(points, dtype=float)
    g = np.zeros(len(p), dtype=np.int64) if groups is None else np.asarray(groups, dtype=np.int64)
    lm = None if landmarks is None else np.asarray(landmarks, dtype=float)
    lt = None if landmark_targets is None else np.asarray(landmark_targets, dtype=float)
    n_lm = 0 if lm is None else len(lm)
    lm_w = np.full(3 * n_lm, 1.0 / landmark_sigma ** 2)
    m = np.asarray(init, dtype=float).copy()
    converged = False
    it = 0
    keep = np.ones(len(p), dtype=bool)

    def weigh(dist: np.ndarray, prior: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        scale = np.empty(len(dist))
        for k in np.unique(g):
            sel = g == k
            scale[sel] = robust_scale(dist[sel & prior] if (sel & prior).any() else dist[sel], scale_floor)
        inl = np.abs(dist) <= np.maximum(reject_floor, reject_factor * scale)
        return huber_weights(dist, scale, huber_k) * inl / scale ** 2, inl, scale

    for it in range(1, max_iter + 1):
        x = p @ m[:3, :3].T + m[:3, 3]
        closest, dist, face = query(x, exact=False)
        w, keep, _ = weigh(dist, np.ones(len(p), dtype=bool))
        xl = None if lm is None else lm @ m[:3, :3].T + m[:3, 3]
        a, b = point_to_plane_system(x, closest, normals_of(face), xl, lt)
        step = _solve_step(a, b, np.concatenate([w, lm_w]), damping)
        m = _step_matrix(step) @ m
        x_move = np.abs(np.cross(step[:3], x) + step[3:]).max()
        if x_move < tol_m:
            converged = True
            break
    x = p @ m[:3, :3].T + m[:3, 3]
    closest, dist, face = query(x, exact=True)
    w, inliers, scales = weigh(dist, keep)
    scale = float(np.sqrt(np.mean(scales ** 2)))
    xl = None if lm is None else lm @ m[:3, :3].T + m[:3, 3]
    a, b = point_to_plane_system(x, closest, normals_of(face), xl, lt)
    return IcpResult(matrix=m, distances=dist, inliers=inliers, scale=scale, iterations=it,
                     converged=converged, system=(a, b, np.concatenate([w, lm_w])))


def bootstrap_step(system: tuple[FloatArray, FloatArray, FloatArray], n_points: int, at: ArrayLike, *,
                   n_boot: int = 200, seed: int = 0, damping: float = 1e-9) -> dict[str, float]:
    """Bootstrap of the last linearised ICP step over the surface points.

    The first ``n_points`` rows of the system are resampled with replacement
    (landmark rows are kept); each resample's step is solved, and its
    rotation and the displacement it causes at the points ``at`` are summarised.

    Parameters
    ----------
    system : (A (k, 6), b (k,), w (k,))
    n_points : int
        Number of leading rows that are resampled (the surface points).
    at : (q, 3) float, metres, target frame
        Where displacements are measured (e.g. the electrodes).

    Returns
    -------
    dict
        ``translation_mm`` (RMS displacement of the centroid of ``at``),
        ``rotation_deg`` (RMS angle), ``displacement_mm_95`` (95th percentile of
        the displacement over ``at`` and resamples), ``n_boot``.
    """
    a, b, w = system
    rng = np.random.default_rng(seed)
    idx = rng.integers(0, n_points, size=(n_boot, n_points))
    flat = (idx + n_points * np.arange(n_boot)[:, None]).ravel()
    counts = np.bincount(flat, minlength=n_boot * n_points).reshape(n_boot, n_points).astype(float)
    wb = np.concatenate([counts * w[:n_points], np.broadcast_to(w[n_points:], (n_boot, len(w) - n_points))], axis=1)
    outer = (a[:, :, None] * a[:, None, :]).reshape(len(a), 36)
    ata = (wb @ outer).reshape(n_boot, 6, 6)  # one matrix product instead of n_boot normal equations
    atb = wb @ (a * b[:, None])
    tr = np.trace(ata, axis1=1, axis2=2)[:, None, None]
    steps = np.linalg.solve(ata + damping * tr / 6 * np.eye(6), atb[..., None])[..., 0]
    steps -= steps.mean(axis=0)
    pts = np.asarray(at, dtype=float)
    centre = pts.mean(axis=0)
    disp_c = np.linalg.norm(np.cross(steps[:, :3], centre) + steps[:, 3:], axis=1)
    disp = np.linalg.norm(np.cross(steps[:, None, :3], pts[None]) + steps[:, None, 3:], axis=2)
    return {"translation_mm": float(np.sqrt(np.mean(disp_c ** 2)) * 1e3),
            "rotation_deg": float(np.degrees(np.sqrt(np.mean(np.sum(steps[:, :3] ** 2, axis=1))))),
            "displacement_mm_95": float(np.percentile(disp, 95) * 1e3), "n_boot": int(n_boot)}
