"""Linear-inverse kernels shared by the lead-field checks and the reference solvers.

Pure functions on arrays: the singular spectrum of a lead field, the Tikhonov
regularisation rule, minimum-norm filter factors and kernels, point-spread
metrics of the resolution matrix computed in column blocks (the full
``n_sources x n_sources`` matrix is never formed), and source depth.

Units: lead fields in V/(A*m), positions in metres, lambda in V/(A*m) (the
same unit as the singular values).
"""
from __future__ import annotations

import numpy as np
from scipy.spatial import ConvexHull, QhullError, cKDTree

from .._typing import ArrayLike, FloatArray

__all__ = ["thin_svd", "tikhonov_lambda2", "effective_rank", "filter_factors", "minnorm_kernel",
           "resolution_diagonal", "psf_metrics", "source_depth", "whitener"]


def tikhonov_lambda2(singular_values: ArrayLike, n_sensors: int, snr: float) -> float:
    """Regularisation parameter lambda^2 = trace(L L^T) / (n_sensors * SNR^2).

    Common practice: the signal power per sensor divided by the squared
    amplitude signal-to-noise ratio. ``trace(L L^T)`` is the sum of the squared
    singular values.

    Parameters
    ----------
    singular_values : (k,) float64, V/(A*m)
    n_sensors : int
    snr : float
        Amplitude SNR (> 0).

    Returns
    -------
    float
        lambda^2 in (V/(A*m))^2.
    """
    if snr <= 0:
        raise ValueError(f"snr must be positive, got {snr}")
    s = np.asarray(singular_values, dtype=np.float64)
    return float(np.sum(s * s) / (n_sensors * snr * snr))


def effective_rank(singular_values: ArrayLike, n_sensors: int, snr: float) -> tuple[int, float]:
    """Number of singular values above the noise floor lambda (see :func:`tikhonov_lambda2`).

    A component passes the Tikhonov filter with a gain above one half exactly
    when ``s > lambda``; that is the floor used here.

    Returns
    -------
    (int, float)
        The effective rank and the floor lambda in V/(A*m).
    """
    s = np.asarray(singular_values, dtype=np.float64)
    floor = float(np.sqrt(tikhonov_lambda2(s, n_sensors, snr)))
    return int(np.count_nonzero(s > floor)), floor


def filter_factors(singular_values: ArrayLike, lambda2: float) -> FloatArray:
    """Tikhonov filter factors s^2 / (s^2 + lambda^2), (k,) in [0, 1]."""
    s = np.asarray(singular_values, dtype=np.float64)
    return s * s / (s * s + lambda2)


def minnorm_kernel(u: FloatArray, s: FloatArray, vt: FloatArray, lambda2: float) -> FloatArray:
    """Minimum-norm inverse K = L^T (L L^T + lambda^2 I)^-1 from the thin SVD L = U diag(s) V^T.

    Parameters
    ----------
    u : (n_sensors, k)
    s : (k,)
    vt : (k, n_sources)
    lambda2 : float

    Returns
    -------
    (n_sources, n_sensors) float64, A*m/V
    """
    gain = s / (s * s + lambda2)
    return (vt.T * gain) @ u.T


def resolution_diagonal(vt: FloatArray, factors: FloatArray) -> FloatArray:
    """diag(R) of R = V diag(f) V^T without forming R: (n_sources,) float64."""
    return np.einsum("ij,ij,i->j", vt, vt, factors)


def thin_svd(matrix: ArrayLike, *, compute_uv: bool = True):
    """Thin SVD of a wide or tall matrix, fast for lead fields with many more columns than rows.

    LAPACK's divide and conquer on a 128 x 20,000 matrix takes seconds; a QR
    factorisation of the transpose followed by the SVD of the small triangular
    factor gives the same factors to working precision (Golub & Van Loan,
    "R-SVD") in a fraction of that.

    Parameters
    ----------
    matrix : (n, m) float64

    Returns
    -------
    u : (n, k), s : (k,) descending, vt : (k, m) with k = min(n, m); or only ``s``.
    """
    a = np.asarray(matrix, dtype=np.float64)
    n, m = a.shape
    if m <= 2 * n:
        return np.linalg.svd(a, full_matrices=False, compute_uv=compute_uv)
    q, r = np.linalg.qr(a.T)  # a = r.T q.T
    if not compute_uv:
        return np.linalg.svd(r.T, compute_uv=False)
    u, s, wt = np.linalg.svd(r.T, full_matrices=False)
    return u, s, (q @ wt.T).T


def psf_metrics(vt: FloatArray, factors: FloatArray, positions: ArrayLike, *, group: int = 1,
                chunk: int = 1024) -> tuple[FloatArray, FloatArray]:
    """Peak localisation error and spatial dispersion of every point-spread function.

    The resolution matrix R = V diag(f) V^T (Hauk, Wakeman & Henson 2011) is
    computed ``chunk`` columns at a time; column j is the point-spread function
    of source j (R is symmetric, so the block is built as rows). For
    free-orientation lead fields (``group=3``) the amplitude at a target is the
    norm over its three components and the metrics of a source are averaged
    over its three unit orientations.

    - peak localisation error: distance from the source to the target of
      largest PSF amplitude;
    - spatial dispersion: sqrt(sum_i d_ij^2 |r_ij|^2 / sum_i |r_ij|^2)
      (Molins et al. 2008; Hauk et al. 2019). The weighted sum of squared
      distances is expanded as |p_i|^2 - 2 p_i.p_j + |p_j|^2 so that it is one
      small matrix product per block instead of a block of distances.

    Parameters
    ----------
    vt : (k, group * n_sources) float64
        Right singular vectors (rows) of the lead field.
    factors : (k,) float64
        Filter factors, e.g. :func:`filter_factors`.
    positions : (n_sources, 3) float64, metres
    group : int
        1 for fixed, 3 for free orientation.
    chunk : int
        Sources per block; memory is about ``16 * group^2 * n_sources * chunk`` bytes.

    Returns
    -------
    ple, sd : (n_sources,) float64, metres
    """
    pos = np.asarray(positions, dtype=np.float64)
    n = pos.shape[0]
    if vt.shape[1] != group * n:
        raise ValueError(f"vt has {vt.shape[1]} columns, expected {group} x {n}")
    left = np.ascontiguousarray(vt.T * factors)  # (n_cols, k)
    sq_norm = np.einsum("ij,ij->i", pos, pos)
    moments = np.column_stack([np.ones(n), pos, sq_norm])  # (n, 5)
    ple = np.empty(group * n)
    sd = np.empty(group * n)
    step = max(1, int(chunk)) * group
    for start in range(0, group * n, step):
        rows = slice(start, min(start + step, group * n))
        block = left[rows] @ vt  # (c, n_cols): PSFs of these columns, one per row
        np.multiply(block, block, out=block)
        amp2 = block if group == 1 else block.reshape(block.shape[0], n, group).sum(axis=2)
        src = np.arange(rows.start, rows.stop) // group
        peak = np.argmax(amp2, axis=1)
        ple[rows] = np.linalg.norm(pos[peak] - pos[src], axis=1)
        mom = amp2 @ moments  # (c, 5): total, first moments, sum |p|^2 a
        total = mom[:, 0]
        num = mom[:, 4] - 2.0 * np.einsum("ij,ij->i", mom[:, 1:4], pos[src]) + sq_norm[src] * total
        with np.errstate(invalid="ignore", divide="ignore"):
            sd[rows] = np.sqrt(np.maximum(num, 0.0) / total)
    if group > 1:
        ple = ple.reshape(n, group).mean(axis=1)
        sd = sd.reshape(n, group).mean(axis=1)
    return ple, sd


def source_depth(sources: ArrayLike, sensors: ArrayLike, how: str = "nearest-sensor") -> FloatArray:
    """Depth of every source below the electrodes, metres.

    ``"nearest-sensor"``: distance to the closest electrode. ``"hull"``:
    distance to the boundary of the electrodes' convex hull (0 for sources
    outside it, e.g. below the lowest electrodes); falls back to
    ``"nearest-sensor"`` when the electrodes are coplanar.

    Parameters
    ----------
    sources : (m, 3) float64, metres
    sensors : (n, 3) float64, metres, same frame
    how : {'nearest-sensor', 'hull'}

    Returns
    -------
    (m,) float64, metres
    """
    src = np.asarray(sources, dtype=np.float64)
    sen = np.asarray(sensors, dtype=np.float64)
    if how == "hull" and len(sen) >= 4:
        try:
            hull = ConvexHull(sen)
        except QhullError:
            hull = None
        if hull is not None:
            eq = hull.equations  # n . x + b <= 0 inside, n unit
            inside = -(src @ eq[:, :3].T + eq[:, 3])
            return np.maximum(inside.min(axis=1), 0.0)
    elif how not in ("nearest-sensor", "hull"):
        raise ValueError(f"depth measure must be 'nearest-sensor' or 'hull', got {how!r}")
    dist, _ = cKDTree(sen).query(src)
    return np.asarray(dist, dtype=np.float64)


def whitener(noise_cov: ArrayLike | None, n_sensors: int, *, rtol: float = 1e-10) -> FloatArray:
    """A whitening matrix W with W C W^T = I on the range of C, (k, n_sensors).

    ``None`` means white noise of unit variance (W = I). Directions with
    eigenvalues below ``rtol`` times the largest (e.g. the one removed by an
    average reference) are dropped, so W may have fewer rows than sensors.
    """
    if noise_cov is None:
        return np.eye(n_sensors)
    c = np.asarray(noise_cov, dtype=np.float64)
    if c.shape != (n_sensors, n_sensors):
        raise ValueError(f"noise covariance must be ({n_sensors}, {n_sensors}), got {c.shape}")
    w, v = np.linalg.eigh(0.5 * (c + c.T))
    keep = w > rtol * max(float(w.max()), 0.0)
    return (v[:, keep] / np.sqrt(w[keep])).T
