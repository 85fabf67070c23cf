"""Built-in plugin ``inverse_dipole``: single equivalent-dipole fit (reference solver for self-tests).

Nonlinear least squares over the dipole position with the moment solved
linearly at every trial position, minimising the residual variance
||y - G(r) m||^2 / ||y||^2 (Scherg & von Cramon 1985; Mosher, Lewis & Leahy
1992). The forward model is evaluated at arbitrary positions through
``problem.forward.leadfield(positions)`` (free orientation, so the moment has
three components). The search starts from the best patch of a grid search
over the stored lead field; without a forward model that grid search is the
answer (position of the best patch, moment along its normal).
"""
from __future__ import annotations

from typing import Any

import numpy as np
from scipy.optimize import minimize

from prep import InverseProblem, InverseSolver, SourceEstimate, UsageError, hookimpl
from prep.geometry.linear_inverse import whitener


#: cost of a trial position the forward model refuses (a residual variance is at most 1)
OUTSIDE = 2.0


def _residual_variance(gw: np.ndarray, yw: np.ndarray) -> tuple[float, np.ndarray]:
    """Residual variance of the best moment for a whitened gain (n, 3) and data (n, t)."""
    moment, *_ = np.linalg.lstsq(gw, yw, rcond=None)
    res = yw - gw @ moment
    return float(np.sum(res * res) / np.sum(yw * yw)), moment


def solve_dipole(problem: InverseProblem, *, refine: bool = True, max_iterations: int = 400,
                 margin: float = 0.01, **_: Any) -> SourceEstimate:
    """Fit one dipole to all time samples of ``problem.data`` (n_sensors, n_times), V.

    Returns positions (1, 3) metres and moments (1, 3, n_times) A*m.
    """
    lf = problem.leadfield
    if lf.orientation != "fixed":
        raise UsageError("the dipole fit's grid search needs a fixed-orientation lead field")
    data = np.asarray(problem.data, dtype=np.float64)
    if data.ndim == 1:
        data = data[:, None]
    w = whitener(problem.noise_cov, lf.n_sensors)
    yw = w @ data
    lw = w @ lf.matrix
    power = np.sum(yw * yw)
    if power == 0:
        raise UsageError("the data are all zero: nothing to fit")
    col2 = np.einsum("ij,ij->j", lw, lw)
    with np.errstate(invalid="ignore", divide="ignore"):
        explained = np.where(col2 > 0, np.sum((lw.T @ yw) ** 2, axis=1) / col2, 0.0)
    best = int(np.argmax(explained))
    pos = lf.source_positions[best]
    amp = (lw[:, best] @ yw) / col2[best]
    moments = lf.source_normals[best][:, None] * amp[None, :]
    rv = float(1.0 - explained[best] / power)
    metrics: dict[str, Any] = {"method": "grid", "grid_index": best, "residual_variance": rv}
    fwd = problem.forward
    if fwd is not None and refine:
        if tuple(fwd.sensor_labels) != tuple(lf.sensor_labels):
            raise UsageError("the forward model's sensors differ from the lead field's")

        def cost(p: np.ndarray) -> float:
            try:
                g = fwd.leadfield(p[None, :]).matrix[:, 0, :]
            except UsageError:  # the model cannot place a dipole there (e.g. outside the brain)
                return OUTSIDE
            return _residual_variance(w @ g, yw)[0]

        lo = lf.source_positions.min(axis=0) - margin
        hi = lf.source_positions.max(axis=0) + margin
        simplex = pos + np.vstack([np.zeros(3), 0.005 * np.eye(3)])
        res = minimize(cost, pos, method="Nelder-Mead", bounds=list(zip(lo, hi)),
                       options={"initial_simplex": simplex, "xatol": 1e-5, "fatol": 1e-12,
                                "maxiter": max_iterations})
        if res.fun <= rv:
            pos = res.x
            g = fwd.leadfield(pos[None, :]).matrix[:, 0, :]
            rv, moments = _residual_variance(w @ g, yw)
            metrics.update(method="nonlinear", iterations=int(res.nit), converged=bool(res.success))
        metrics["residual_variance"] = rv
    return SourceEstimate(solver="dipole-fit", positions=np.asarray(pos, dtype=np.float64)[None, :],
                          moments=np.asarray(moments)[None, :, :], metrics=metrics)


@hookimpl
def headprep_register_inverse_solvers() -> list[InverseSolver]:
    return [InverseSolver(name="dipole-fit", solve=solve_dipole,
                          description="single equivalent dipole, least-squares position with linear moment "
                                      "(reference solver for self-tests)",
                          defaults={"refine": True, "max_iterations": 400, "margin": 0.01})]
