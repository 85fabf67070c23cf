"""Built-in plugin ``inverse_minnorm``: the reference minimum-norm family (for self-tests, not the product).

Three inverse solvers on a fixed-orientation lead field L (n_sensors, n_sources):

``minimum-norm``
    Tikhonov-regularised minimum norm J = L^T (L L^T + lambda^2 I)^-1 y (A*m).
``dspm``
    Noise-normalised minimum norm (Dale et al. 2000): each source's estimate
    divided by the noise standard deviation of that estimate (unitless).
``sloreta``
    Standardised minimum norm (Pascual-Marqui 2002): each estimate divided by
    the square root of the resolution matrix's diagonal (unitless); a single
    noiseless dipole is localised without error.

Data and lead field are whitened with the noise covariance first (white noise
when none is given); lambda^2 = trace(L L^T) / (n * SNR^2) after whitening,
common practice. Everything goes through the thin SVD of the whitened lead
field, so nothing of size n_sources^2 is formed.
"""
from __future__ import annotations

from typing import Any

import numpy as np

from prep import InverseProblem, InverseSolver, SourceEstimate, UsageError, hookimpl
from prep.geometry.linear_inverse import effective_rank, thin_svd, tikhonov_lambda2, whitener

_UNIT = {"minimum-norm": "A*m", "dspm": "1", "sloreta": "1"}


def _solve(problem: InverseProblem, method: str) -> SourceEstimate:
    lf = problem.leadfield
    if lf.orientation != "fixed":
        raise UsageError(f"the '{method}' reference solver needs a fixed-orientation lead field")
    data = np.asarray(problem.data, dtype=np.float64)
    if data.ndim == 1:
        data = data[:, None]
    if data.shape[0] != lf.n_sensors:
        raise UsageError(f"data have {data.shape[0]} rows, the lead field has {lf.n_sensors} sensors")
    w = whitener(problem.noise_cov, lf.n_sensors)
    lw = w @ lf.matrix
    yw = w @ data
    u, s, vt = thin_svd(lw)
    lambda2 = tikhonov_lambda2(s, lw.shape[0], problem.snr)
    gain = s / (s * s + lambda2)
    amp = vt.T @ (gain[:, None] * (u.T @ yw))  # (n_sources, n_times)
    if method == "dspm":  # noise of the estimate: rows of K with whitened (identity) noise
        amp = amp / np.sqrt(np.einsum("ij,ij,i->j", vt, vt, gain * gain))[:, None]
    elif method == "sloreta":  # diag of R = V diag(s^2 / (s^2 + lambda^2)) V^T
        amp = amp / np.sqrt(np.einsum("ij,ij,i->j", vt, vt, gain * s))[:, None]
    eff, _floor = effective_rank(s, lw.shape[0], problem.snr)
    return SourceEstimate(solver=method, amplitudes=amp, unit=_UNIT[method],
                          metrics={"lambda2": lambda2, "snr": problem.snr, "effective_rank": eff})


def solve_minimum_norm(problem: InverseProblem, **_: Any) -> SourceEstimate:
    """Tikhonov minimum norm; amplitudes (n_sources, n_times) in A*m."""
    return _solve(problem, "minimum-norm")


def solve_dspm(problem: InverseProblem, **_: Any) -> SourceEstimate:
    """dSPM (Dale et al. 2000); unitless noise-normalised amplitudes."""
    return _solve(problem, "dspm")


def solve_sloreta(problem: InverseProblem, **_: Any) -> SourceEstimate:
    """sLORETA (Pascual-Marqui 2002); unitless standardised amplitudes (signed square root)."""
    return _solve(problem, "sloreta")


@hookimpl
def headprep_register_inverse_solvers() -> list[InverseSolver]:
    return [
        InverseSolver(name="minimum-norm", solve=solve_minimum_norm,
                      description="Tikhonov minimum norm (reference solver for self-tests)"),
        InverseSolver(name="dspm", solve=solve_dspm,
                      description="noise-normalised minimum norm, Dale et al. 2000 (reference solver)"),
        InverseSolver(name="sloreta", solve=solve_sloreta,
                      description="standardised minimum norm, Pascual-Marqui 2002 (reference solver)"),
    ]
