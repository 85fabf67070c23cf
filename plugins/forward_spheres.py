"""Built-in plugin `forward_spheres`: EEG lead field of N concentric isotropic spherical shells.

Analytic Legendre-series solution (de Munck & Peters 1993; Zhang 1995 restricted
to isotropic shells) with per-degree interface factors from a transfer-matrix
recursion, the slow tail summed in closed form and the remainder summed until
converged (see ``_forward_spheres_series`` and docs/sphere-model.md).

Electrodes are projected radially from the centre onto the outer sphere.
Dipoles must lie strictly inside the innermost sphere: ``evaluate`` raises
:class:`prep.errors.UsageError` naming the first (0-based) source that does not,
and never returns NaN for it.
"""
from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from concurrent.futures import ThreadPoolExecutor
from typing import Any

import numpy as np

from prep import ForwardModel, ForwardSolver, UsageError, VolumeConductor, hookimpl
from prep.geometry.spheres import project_to_sphere

from . import _forward_spheres_series as series

NAME = "spheres"
DEFAULTS: dict[str, Any] = {
    "tolerance": 1e-7,       # relative to the largest |V| of a source over the electrodes
    "workers": 0,            # threads; 0 = up to 4, bounded by the CPU count
    "chunk_elements": 65536,  # electrodes x sources per block of work (bounds memory)
    "backend": "auto",       # "numba" (compiled kernel), "numpy", or "auto" (numba when importable)
}
BACKENDS = ("auto", "numba", "numpy")


def _project(conductor: VolumeConductor, positions: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Unit directions (n, 3) from the centre and positions (n, 3) m on the outer sphere."""
    projected, valid = project_to_sphere(positions, conductor.centre, float(conductor.radii[-1]))
    if not valid.all():
        bad = int(np.flatnonzero(~valid)[0])
        raise UsageError(f"sensor {bad} is at the sphere centre or not finite: cannot project it onto the "
                         f"outer sphere")
    return (projected - conductor.centre) / conductor.radii[-1], projected


def _reference_row(labels: Sequence[str], reference: str) -> int | None:
    if reference == "average":
        return None
    if reference not in labels:
        raise UsageError(f"reference electrode '{reference}' is not among the sensors "
                         f"({', '.join(labels[:8])}{'...' if len(labels) > 8 else ''})")
    return list(labels).index(reference)


def _workers(requested: int) -> int:
    if requested > 0:
        return int(requested)
    return max(1, min(4, os.cpu_count() or 1))


def _run_blocks(one, blocks: list[np.ndarray], workers: int) -> None:  # noqa: ANN001
    """Call ``one(idx)`` for every block, on a thread pool when there are several workers and blocks."""
    if workers == 1 or len(blocks) == 1:
        for idx in blocks:
            one(idx)
    else:
        with ThreadPoolExecutor(max_workers=workers) as pool:
            list(pool.map(one, blocks))


def _compiled(backend: str):  # noqa: ANN202 - the numba kernel or None
    if backend == "numpy":
        return None
    try:
        from ._forward_spheres_jit import lead_block
    except ImportError:
        if backend == "numba":
            raise UsageError(f"forward solver '{NAME}': backend 'numba' asked for but numba is not "
                             f"importable") from None
        return None
    return lead_block


def _make_evaluate(conductor: VolumeConductor, dirs: np.ndarray, ref_row: int | None,
                   params: Mapping[str, Any]):  # noqa: ANN202
    kernel = _compiled(str(params["backend"]))
    radii = conductor.radii
    sig = conductor.conductivities
    radius = float(radii[-1])
    tol = float(params["tolerance"])
    workers = _workers(int(params["workers"]))
    per_chunk = max(1, int(params["chunk_elements"]) // max(1, len(dirs)))
    gain = 1.0 / (4.0 * np.pi * sig[-1] * radius * radius)

    def evaluate(positions: np.ndarray, normals: np.ndarray | None) -> np.ndarray:
        """Lead field (n, m) for fixed or (n, m, 3) for free orientation, V/(A*m)."""
        src = np.asarray(positions, dtype=np.float64).reshape(-1, 3) - conductor.centre
        nrm = None if normals is None else np.asarray(normals, dtype=np.float64).reshape(-1, 3)
        if nrm is not None and nrm.shape != src.shape:
            raise ValueError(f"normals {nrm.shape} do not match positions {src.shape}")
        b = np.linalg.norm(src, axis=1)
        outside = ~(b < radii[0])
        if outside.any():
            i = int(np.flatnonzero(outside)[0])
            raise UsageError(f"source {i} lies {b[i]:.6g} m from the centre, not inside the innermost "
                             f"sphere (radius {radii[0]:.6g} m); the sphere model cannot place it")
        m = len(src)
        shape = (len(dirs), m) if nrm is not None else (len(dirs), m, 3)
        out = np.empty(shape)
        if m == 0:
            return out
        weights = series.weights_for(radii, sig, float(b.max()) / radius, tol)
        if kernel is not None:
            return _evaluate_compiled(kernel, dirs, src, nrm, out, weights, radius, tol, gain, ref_row,
                                      per_chunk, workers)
        order = np.argsort(b, kind="stable")
        blocks = [order[i:i + per_chunk] for i in range(0, m, per_chunk)]

        flat = out.reshape(len(dirs), -1)          # a view: scatter single values, ~3x faster than (.., 3) rows

        def one(idx: np.ndarray) -> None:
            block = series.chunk_potentials(dirs, src[idx], None if nrm is None else nrm[idx], weights, radius, tol)
            cols = idx if nrm is not None else (3 * idx[:, None] + np.arange(3)).ravel()
            flat[:, cols] = block.reshape(len(dirs), -1)

        _run_blocks(one, blocks, workers)
        out *= gain
        if ref_row is None:
            out -= out.mean(axis=0, keepdims=True)
        else:
            out -= out[ref_row].copy()[None]
        return out

    return evaluate


def _evaluate_compiled(kernel, dirs: np.ndarray, src: np.ndarray, nrm: np.ndarray | None,  # noqa: ANN001
                       out: np.ndarray, weights: tuple, radius: float, tol: float, gain: float,
                       ref_row: int | None, per_chunk: int, workers: int) -> np.ndarray:
    """Fill ``out`` with the compiled kernel, contiguous source blocks on a thread pool (the kernel drops the GIL)."""
    if len(dirs) == 0:
        return out
    c, delta, c_inf, alpha = weights
    flat = out.reshape(len(dirs), -1)
    fixed = nrm is not None
    normals = nrm if fixed else np.empty((0, 3))
    ref = -1 if ref_row is None else int(ref_row)
    m = len(src)
    blocks = [np.arange(i, min(m, i + per_chunk)) for i in range(0, m, per_chunk)]

    def one(idx: np.ndarray) -> None:
        kernel(dirs, src, normals, fixed, idx, flat, c, delta, c_inf, alpha, radius, tol, series.F_DIRECT,
               gain, ref)

    _run_blocks(one, blocks, workers)
    return out


def build(conductor: VolumeConductor, sensor_labels: Sequence[str], sensor_positions: np.ndarray, *,
          reference: str = "average", **options: Any) -> ForwardModel:
    """Prepare the sphere model for one set of electrodes.

    Parameters
    ----------
    conductor : VolumeConductor
        ``kind="spheres"``: centre (3,) m, radii (N,) m and conductivities (N,) S/m inside -> out.
    sensor_labels : sequence of str, length n
    sensor_positions : (n, 3) float64, metres, in the conductor's frame
        Projected radially from the centre onto the outer sphere.
    reference : str
        ``"average"`` or one of ``sensor_labels``.
    **options
        ``tolerance`` (float, relative), ``workers`` (int, 0 = auto),
        ``chunk_elements`` (int), ``backend`` (``"auto"``, ``"numba"``, ``"numpy"``).

    Returns
    -------
    ForwardModel
        ``evaluate(positions (m,3), normals (m,3) or None)`` gives (n, m) or
        (n, m, 3) V/(A*m) against ``reference``.
    """
    return _build(conductor, sensor_labels, sensor_positions, reference, options, None)


def _build(conductor: VolumeConductor, sensor_labels: Sequence[str], sensor_positions: np.ndarray,
           reference: str, options: Mapping[str, Any], stored: Mapping[str, np.ndarray] | None,
           ) -> ForwardModel:
    """Common part of :func:`build` and :func:`restore`."""
    if conductor.kind != "spheres":
        raise UsageError(f"the '{NAME}' forward solver needs a concentric-spheres conductor, "
                         f"got kind '{conductor.kind}'")
    unknown = set(options) - set(DEFAULTS)
    if unknown:
        raise UsageError(f"unknown option(s) for forward solver '{NAME}': {', '.join(sorted(unknown))}")
    params = {**DEFAULTS, **options}
    if params["backend"] not in BACKENDS:
        raise UsageError(f"forward solver '{NAME}': backend must be one of {', '.join(BACKENDS)}, "
                         f"got {params['backend']!r}")
    if not 0 < float(params["tolerance"]) < 1:
        raise UsageError(f"forward solver '{NAME}': tolerance must be in (0, 1), got {params['tolerance']}")
    labels = tuple(sensor_labels)
    given = (stored or {}).get("directions")
    if given is not None and np.shape(given) == np.shape(sensor_positions):
        dirs = np.asarray(given, dtype=np.float64)           # restored: bit-identical to the original build
        projected = np.asarray(sensor_positions, dtype=np.float64)
    else:
        dirs, projected = _project(conductor, sensor_positions)
    ref_row = _reference_row(labels, reference)
    return ForwardModel(solver=NAME, conductor=conductor, sensor_labels=labels, sensor_positions=projected,
                        evaluate=_make_evaluate(conductor, dirs, ref_row, params), reference=reference,
                        params=params, arrays={"directions": dirs}, frame=conductor.frame)


def restore(*, conductor: VolumeConductor, sensor_labels: Sequence[str], sensor_positions: np.ndarray,
            reference: str = "average", params: Mapping[str, Any] | None = None,
            arrays: Mapping[str, np.ndarray] | None = None) -> ForwardModel:
    """Rebuild a model from what a bundle stored (``arrays["directions"]``: unit electrode directions)."""
    opts = {k: v for k, v in dict(params or {}).items() if k in DEFAULTS}
    return _build(conductor, sensor_labels, sensor_positions, reference, opts, arrays)


@hookimpl
def headprep_register_forward_solvers() -> list[ForwardSolver]:
    return [ForwardSolver(
        name=NAME,
        description="concentric isotropic spheres (N shells), analytic Legendre series",
        conductor_kind="spheres", defaults=dict(DEFAULTS), build=build, restore=restore)]
