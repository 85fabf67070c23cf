"""Built-in forward solver ``bem``: a boundary-element model of nested head layers.

Three compartments (brain, skull, scalp) bounded by the inner skull, outer
skull and scalp meshes (``VolumeConductor(kind="layers")``, inside -> out).
Linear collocation with the isolated-problem approach (Hamalainen & Sarvas
1989; Stenroos & Sarvas 2012), analytic solid angles (van Oosterom &
Strackee 1983) and analytic linear-basis integrals (de Munck 1992 style),
deflation for the null space. See docs/boundary-elements.md.

The layer solution (scalp vertices x inner-skull vertices) is cached on disk,
keyed by the meshes' and conductivities' hashes. Electrodes are projected on
the scalp and interpolated barycentrically, so the model kept in a bundle is
one transfer matrix (electrodes x inner-skull vertices) plus the inner-skull
mesh: the lead field of any dipole is that matrix times the dipole's
infinite-medium potentials on the inner skull.

Sources outside the brain compartment get zero columns (never NaN); the
core's :func:`prep.layers.sources_outside` names them as findings.
"""
from __future__ import annotations

import hashlib
import io
import os
from pathlib import Path
from typing import Any

import numpy as np

from prep import ForwardModel, ForwardSolver, UsageError, VolumeConductor, hookimpl
from prep.atomic import write_bytes_atomic
from prep.geometry.surface import closest_points

from ._forward_bem_kernels import infinite_potentials, inside_closed
from ._forward_bem_solve import transfer_to_scalp

#: bump when the numerical method changes (invalidates cached layer solutions)
METHOD = "linear-collocation-isolated-v1"

#: conductivities (S/m) of brain, skull, scalp, each naming its published source
PRESETS: dict[str, dict[str, Any]] = {
    "skull-1-80": {"conductivities": (0.33, 0.33 / 80.0, 0.33),
                   "source": "skull 1/80 of brain and scalp: Rush & Driscoll 1968; 0.33 S/m brain, common practice"},
    "skull-1-20": {"conductivities": (0.33, 0.33 / 20.0, 0.33),
                   "source": "skull about 1/15 to 1/25 of brain: Oostendorp et al. 2000 (middle value 1/20)"},
}

DEFAULTS: dict[str, Any] = {"preset": "", "cache": True, "cache_dir": "", "threads": 0, "chunk": 2000}


def default_cache_dir() -> Path:
    """``$XDG_CACHE_HOME/headprep`` or ``~/.cache/headprep``."""
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "headprep"


def _conductivities(conductor: VolumeConductor, preset: str) -> np.ndarray:
    if not preset:
        return np.asarray(conductor.conductivities, dtype=float)
    if preset not in PRESETS:
        raise UsageError(f"bem: unknown preset '{preset}' (known: {', '.join(sorted(PRESETS))})")
    sig = np.asarray(PRESETS[preset]["conductivities"], dtype=float)
    if sig.size != len(conductor.layers):
        raise UsageError(f"bem: preset '{preset}' has {sig.size} conductivities, the model has "
                         f"{len(conductor.layers)} layers")
    return sig


def layer_key(layers: list[tuple[np.ndarray, np.ndarray]], sigma: np.ndarray) -> str:
    """sha256 over the method, every layer's vertices and faces, and the conductivities."""
    h = hashlib.sha256(METHOD.encode())
    for v, f in layers:
        h.update(np.ascontiguousarray(v, dtype="<f8").tobytes())
        h.update(np.ascontiguousarray(f, dtype="<i8").tobytes())
    h.update(np.ascontiguousarray(sigma, dtype="<f8").tobytes())
    return h.hexdigest()


def _layer_solution(layers: list[tuple[np.ndarray, np.ndarray]], sigma: np.ndarray, *,
                    cache_dir: str, threads: int) -> tuple[np.ndarray, str, bool]:
    key = layer_key(layers, sigma)
    path = (Path(cache_dir) if cache_dir else default_cache_dir()) / f"layers-{key[:32]}.npy"
    if path.is_file():
        try:
            arr = np.load(path, allow_pickle=False)
            if arr.shape == (len(layers[-1][0]), len(layers[0][0])):
                return arr, key, True
        except (OSError, ValueError):
            pass  # a damaged cache entry is recomputed and overwritten
    t = transfer_to_scalp(layers, sigma, threads=threads or None)
    buf = io.BytesIO()
    np.save(buf, t, allow_pickle=False)
    try:
        write_bytes_atomic(path, buf.getvalue())
    except OSError:
        pass  # an unwritable cache only costs time; the result is still returned
    return t, key, False


def interpolation_matrix(points: np.ndarray, vertices: np.ndarray, faces: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Project points on a mesh; barycentric weights (m, n_vertices) and projected points (m, 3)."""
    import trimesh

    v = np.asarray(vertices, dtype=float)
    proj, _, tri = closest_points(v, faces, np.asarray(points, dtype=float))
    corners = v[np.asarray(faces)[tri]]
    bary = trimesh.triangles.points_to_barycentric(corners, proj)
    bary = np.clip(bary, 0.0, None)
    bary /= bary.sum(axis=1, keepdims=True)
    e = np.zeros((len(points), len(vertices)))
    rows = np.repeat(np.arange(len(points)), 3)
    np.add.at(e, (rows, np.asarray(faces)[tri].ravel()), bary.ravel())
    return e, np.asarray(proj, dtype=float)


def _referenced(t: np.ndarray, labels: tuple[str, ...], reference: str) -> np.ndarray:
    if reference == "average":
        return t - t.mean(axis=0, keepdims=True)
    if reference not in labels:
        raise UsageError(f"bem: reference '{reference}' is not one of the sensor labels")
    return t - t[labels.index(reference)][None, :]


def _evaluator(transfer: np.ndarray, inner_v: np.ndarray, inner_f: np.ndarray, chunk: int):
    def evaluate(positions: np.ndarray, normals: np.ndarray | None) -> np.ndarray:
        p = np.asarray(positions, dtype=float)
        nrm = None if normals is None else np.asarray(normals, dtype=float)
        m = len(p)
        shape = (transfer.shape[0], m) if nrm is not None else (transfer.shape[0], m, 3)
        out = np.zeros(shape)
        ok = np.flatnonzero(inside_closed(p, inner_v, inner_f)) if m else np.zeros(0, dtype=np.int64)
        for s in range(0, len(ok), chunk):
            idx = ok[s:s + chunk]
            g = infinite_potentials(inner_v, p[idx], None if nrm is None else nrm[idx])
            lf = transfer @ g
            if nrm is None:
                out[:, idx, :] = lf.reshape(transfer.shape[0], len(idx), 3)
            else:
                out[:, idx] = lf
        return out
    return evaluate


def build(conductor: VolumeConductor, sensor_labels: tuple[str, ...], sensor_positions: np.ndarray, *,
          reference: str = "average", preset: str = "", cache: bool = True, cache_dir: str = "",
          threads: int = 0, chunk: int = 2000) -> ForwardModel:
    """Solve the layer problem and restrict it to the electrodes.

    Parameters
    ----------
    conductor : VolumeConductor
        ``kind="layers"``, layers inside -> out (inner skull, outer skull, scalp),
        closed and outward; conductivities S/m of the compartment inside each.
    sensor_labels : tuple of str, length n
    sensor_positions : (n, 3) float64, metres, conductor frame; projected on the scalp.
    reference : ``"average"`` or a sensor label.
    preset : str
        A key of :data:`PRESETS` replacing the conductor's conductivities, or ``""``.
    cache, cache_dir : bool, str
        Keep the layer solution on disk (default dir: :func:`default_cache_dir`).
    threads : int
        Threads for the assembly (0: all cores).
    chunk : int
        Sources per block when evaluating.

    Returns
    -------
    ForwardModel
        ``evaluate(positions (m,3), normals (m,3) | None)`` -> (n, m) or (n, m, 3) V/(A*m).
    """
    if conductor.kind != "layers" or not conductor.layers:
        raise UsageError("bem: the volume conductor must be nested layers (inner skull, outer skull, scalp)")
    sigma = _conductivities(conductor, preset)
    layers = [(np.asarray(s.vertices), np.asarray(s.faces)) for s in conductor.layers]
    labels = tuple(sensor_labels)
    e, projected = interpolation_matrix(sensor_positions, *layers[-1])
    if cache:
        t_scalp, key, hit = _layer_solution(layers, sigma, cache_dir=cache_dir, threads=threads)
        t_e = e @ t_scalp
    else:  # only the electrodes' rows: a solve with n_electrodes right-hand sides, not n_scalp
        key, hit = layer_key(layers, sigma), False
        t_e = transfer_to_scalp(layers, sigma, threads=threads or None, rows=e)
    transfer = _referenced(t_e, labels, reference)
    if preset:
        conductor = VolumeConductor(kind="layers", conductivities=sigma, layers=conductor.layers,
                                    frame=conductor.frame)
    params = {"method": METHOD, "layer_key": key, "cache_hit": hit, "preset": preset,
              "preset_source": PRESETS[preset]["source"] if preset else "",
              "conductivities_S_per_m": sigma.tolist(), "chunk": chunk,
              "outside_sources": "zero columns; see prep.layers.sources_outside"}
    arrays = {"transfer": transfer, "inner_skull_vertices": layers[0][0],
              "inner_skull_faces": layers[0][1].astype(np.int64)}
    return ForwardModel(solver="bem", conductor=conductor, sensor_labels=labels,
                        sensor_positions=projected, reference=reference, params=params, arrays=arrays,
                        evaluate=_evaluator(transfer, layers[0][0], layers[0][1], chunk), frame=conductor.frame)


def restore(*, conductor: VolumeConductor, sensor_labels: tuple[str, ...], sensor_positions: np.ndarray,
            reference: str, params: dict[str, Any], arrays: dict[str, np.ndarray]) -> ForwardModel:
    """Rebuild the model from a bundle's transfer matrix and inner-skull mesh (no solve)."""
    transfer = np.asarray(arrays["transfer"], dtype=float)
    if "inner_skull_vertices" in arrays:
        iv, iff = np.asarray(arrays["inner_skull_vertices"], dtype=float), np.asarray(arrays["inner_skull_faces"])
    else:
        iv, iff = np.asarray(conductor.layers[0].vertices), np.asarray(conductor.layers[0].faces)
    if transfer.shape != (len(sensor_labels), len(iv)):
        raise UsageError(f"bem: stored transfer matrix is {transfer.shape}, expected "
                         f"({len(sensor_labels)}, {len(iv)})")
    chunk = int(params.get("chunk", 2000))
    return ForwardModel(solver="bem", conductor=conductor, sensor_labels=tuple(sensor_labels),
                        sensor_positions=sensor_positions, reference=reference, params=dict(params),
                        arrays=dict(arrays), evaluate=_evaluator(transfer, iv, iff, chunk), frame=conductor.frame)


@hookimpl
def headprep_register_forward_solvers() -> list[ForwardSolver]:
    return [ForwardSolver(name="bem", conductor_kind="layers", build=build, restore=restore,
                          description="boundary elements, 3 nested layers (linear collocation, isolated problem)",
                          defaults=dict(DEFAULTS))]
