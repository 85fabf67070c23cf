"""End-to-end self-test of a bundle: simulate dipoles, recover them with every inverse solver.

For each of ``n_dipoles`` randomly chosen patches, the scalp map of a single
fixed-orientation dipole (the patch's lead-field column times 10 nA*m) is
corrupted by white sensor noise at the requested amplitude SNR (rms of the
signal over the sensors divided by the noise standard deviation), re-referenced
like the lead field. Every registered inverse solver then estimates the source
and the distance between its peak (or fitted dipole) and the true patch is the
localisation error.

The dipole fit evaluates the bundle's forward model at arbitrary positions
when one can be restored from the bundle (:mod:`prep.forward`); otherwise it
falls back to a grid search over the stored lead field.
"""
from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .bundle import Bundle
from .descriptors import InverseProblem, SourceEstimate
from .errors import HeadprepError, UsageError
from .model import ForwardModel, _jsonable
from .registry import Registry

__all__ = ["SelftestResult", "run_selftest", "restore_forward", "DIPOLE_MOMENT"]

#: simulated dipole moment, A*m (10 nA*m, a typical evoked-response strength)
DIPOLE_MOMENT = 1e-8


@dataclass(frozen=True, kw_only=True)
class SelftestResult:
    """Localisation errors of every solver on the same simulated dipoles.

    Parameters
    ----------
    snr : float
    seed : int
    true_indices : (k,) int64
        The patches that carried the simulated dipoles.
    errors : dict solver name -> (k,) float64, metres
    summary : dict solver name -> {"median_mm", "p90_mm", "max_mm", "unit"}
    forward : str
        How the dipole fit evaluated the model: ``"forward model"`` or
        ``"grid search (reason)"``.
    """

    snr: float
    seed: int
    true_indices: np.ndarray
    errors: dict[str, np.ndarray] = field(default_factory=dict)
    summary: dict[str, dict[str, Any]] = field(default_factory=dict)
    forward: str = ""

    def to_dict(self) -> dict[str, Any]:
        return _jsonable({"snr": self.snr, "seed": self.seed, "n_dipoles": int(self.true_indices.size),
                          "dipole_moment_Am": DIPOLE_MOMENT, "true_indices": self.true_indices,
                          "forward": self.forward, "solvers": self.summary,
                          "errors_mm": {k: v * 1e3 for k, v in self.errors.items()}})


def restore_forward(registry: Registry, bundle: Bundle) -> tuple[ForwardModel | None, str]:
    """The bundle's forward model if the kit can restore it, else None and the reason."""
    try:
        from . import forward as fwd
    except ImportError:
        return None, "grid search (this kit cannot restore forward models)"
    try:
        if hasattr(fwd, "forward_from_bundle"):
            return fwd.forward_from_bundle(registry, bundle), "forward model"
        return fwd.forward_from_state(registry, bundle.conductor(), bundle.manifest, bundle.arrays), "forward model"
    except (HeadprepError, KeyError) as exc:
        return None, f"grid search (forward model not restored: {exc})"


def _reference_operator(reference: str, labels: Sequence[str]) -> np.ndarray:
    """(n, n) matrix re-referencing sensor noise like the lead field."""
    n = len(labels)
    if reference == "average":
        return np.eye(n) - 1.0 / n
    op = np.eye(n)
    if reference in labels:
        op[:, list(labels).index(reference)] -= 1.0
    return op


def run_selftest(registry: Registry, bundle: Bundle, *, snr: float = 3.0, n_dipoles: int = 20, seed: int = 0,
                 forward: ForwardModel | None | str = "auto", solvers: Sequence[str] | None = None,
                 progress: Callable[[str | None], None] | None = None) -> SelftestResult:
    """Simulate ``n_dipoles`` single dipoles and localise each with every inverse solver.

    Parameters
    ----------
    registry : Registry
    bundle : Bundle
        Must hold a fixed-orientation lead field.
    snr : float
        Amplitude SNR of the simulated data (> 0).
    n_dipoles : int
        Patches drawn without replacement (at most the number of patches).
    seed : int
        Seed of numpy's default generator (patches and noise).
    forward : ForwardModel, None or "auto"
        "auto" restores it from the bundle when possible.
    solvers : names, optional
        Default: every registered inverse solver.
    progress : callable, optional
        Called with the solver's name after each solver has finished.

    Returns
    -------
    SelftestResult
    """
    if snr <= 0:
        raise UsageError(f"--snr must be positive, got {snr}")
    if n_dipoles < 1:
        raise UsageError(f"--n-dipoles must be at least 1, got {n_dipoles}")
    lf = bundle.leadfield("fixed")
    how = "forward model" if isinstance(forward, ForwardModel) else "grid search (no forward model given)"
    if isinstance(forward, str):
        forward, how = restore_forward(registry, bundle)
    descs = ([registry.get("inverse_solver", n) for n in solvers] if solvers is not None
             else registry.descriptors("inverse_solver"))
    if not descs:
        raise UsageError("no inverse solver is installed (see 'headprep plugins')")
    rng = np.random.default_rng(seed)
    n_src = lf.matrix.shape[1]
    idx = np.sort(rng.choice(n_src, size=min(int(n_dipoles), n_src), replace=False))
    ref_op = _reference_operator(lf.reference, lf.sensor_labels)
    signals = lf.matrix[:, idx] * DIPOLE_MOMENT  # (n, k) V
    sigmas = np.sqrt(np.mean(signals ** 2, axis=0)) / snr
    data = signals + ref_op @ (rng.normal(size=signals.shape) * sigmas)
    shape = ref_op @ ref_op.T

    def problem(cols: slice | list[int], sigma: float) -> InverseProblem:
        return InverseProblem(leadfield=lf, data=data[:, cols], forward=forward, noise_cov=sigma ** 2 * shape,
                              snr=snr)

    errors: dict[str, np.ndarray] = {}
    for d in descs:
        opts = registry.options(d, None, f"inverse solver '{d.name}'")

        def solve(prob: InverseProblem, what: str, d: Any = d, opts: dict[str, Any] = opts) -> SourceEstimate:
            return registry.call(d, "solve", prob, step=f"inverse solver '{d.name}' ({what})", **opts)

        first = solve(problem([0], float(sigmas[0])), "self-test dipole 1")
        if first.positions is not None:  # a dipole fit: one source per call, each with its own noise level
            peaks = [np.asarray(first.positions, dtype=np.float64)[0]]
            peaks += [np.asarray(solve(problem([k], float(sigmas[k])), f"self-test dipole {k + 1}").positions,
                                 dtype=np.float64)[0] for k in range(1, idx.size)]
            found = np.array(peaks)
        else:  # a linear distributed solver treats every column alone; a common noise scale moves no peak
            est = solve(problem(slice(None), float(np.median(sigmas))), "all self-test dipoles")
            found = lf.source_positions[np.argmax(np.abs(np.asarray(est.amplitudes)), axis=0)]
        errors[d.name] = np.linalg.norm(found - lf.source_positions[idx], axis=1)
        if progress is not None:
            progress(d.name)
    summary = {name: {"median_mm": float(np.median(e) * 1e3), "p90_mm": float(np.percentile(e, 90) * 1e3),
                      "max_mm": float(e.max() * 1e3)} for name, e in errors.items()}
    return SelftestResult(snr=snr, seed=seed, true_indices=idx, errors=errors, summary=summary, forward=how)
