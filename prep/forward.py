"""Head models and forward models, independent of which plugin computes them.

- :func:`fit_sphere` / :func:`sphere_conductor`: the concentric-spheres head
  model fitted to points (electrodes or scalp vertices), with published defaults
  for what the user leaves out (docs/sphere-model.md);
- :func:`build_forward`: the forward solver whose ``conductor_kind`` matches,
  called through the registry;
- :func:`forward_state` / :func:`forward_from_state`: what a bundle stores to
  rebuild a forward model, and the way back (a pure function pair).
"""
from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from ._typing import ArrayLike, FloatArray
from .errors import BundleError, PluginError, UsageError
from .geometry import spheres as _spheres
from .model import ForwardModel, VolumeConductor, _jsonable
from .registry import Registry

__all__ = ["fit_sphere", "sphere_conductor", "build_forward", "forward_state", "forward_from_state", "forward_from_bundle",
           "outside_innermost", "DEFAULT_SHELLS"]

#: Default shells by count: (radii as fractions of the outer radius, conductivities S/m), inside -> out.
#: 3 shells: brain/skull/scalp radii 8.0/8.5/9.2 cm of Rush & Driscoll (1968) -> 0.87/0.92/1.0,
#: conductivities 0.33/0.0042/0.33 S/m (skull:brain 1:80, Rush & Driscoll 1968; 0.33 S/m common practice).
#: 4 shells: a CSF layer of 1.79 S/m (Baumann, Wozny, Kelly & Meno 1997) between brain and skull,
#: radii fractions 0.84/0.87/0.92/1.0 (common practice). 1 shell: homogeneous 0.33 S/m.
DEFAULT_SHELLS: dict[int, tuple[tuple[float, ...], tuple[float, ...]]] = {
    1: ((1.0,), (0.33,)),
    3: ((0.87, 0.92, 1.0), (0.33, 0.0042, 0.33)),
    4: ((0.84, 0.87, 0.92, 1.0), (0.33, 1.79, 0.0042, 0.33)),
}


def fit_sphere(points: ArrayLike) -> tuple[FloatArray, float]:
    """Least-squares sphere through ``points`` (n, 3) metres: ``(centre (3,) m, radius m)``.

    :func:`prep.geometry.spheres.fit_sphere` with the kit's error: a
    :class:`UsageError` coded ``input.too-few-points`` when fewer than 4, non-finite
    or coplanar points cannot determine a sphere.
    """
    try:
        return _spheres.fit_sphere(points)
    except ValueError as exc:
        raise UsageError(f"input.too-few-points: cannot fit a sphere: {exc}") from exc


def _vector(name: str, values: ArrayLike | None) -> FloatArray | None:
    if values is None:
        return None
    arr = np.asarray(values, dtype=np.float64).ravel()
    if arr.size == 0 or not np.all(np.isfinite(arr)):
        raise UsageError(f"{name} must be finite numbers, got {arr.tolist()}")
    return arr


def sphere_conductor(points: ArrayLike, *, centre: ArrayLike | None = None, radii: ArrayLike | None = None,
                     conductivities: ArrayLike | None = None, frame: str = "anatomy") -> VolumeConductor:
    """Concentric-spheres head model; what is omitted is fitted to ``points`` or defaulted.

    Parameters
    ----------
    points : (n, 3) float64, metres, in ``frame``
        Electrodes or scalp vertices: they fix the centre (least-squares sphere)
        and the outer radius when those are not given.
    centre : (3,) float64, metres, optional
    radii : (k,) float64, metres, increasing, optional
        Without it the default fractions of :data:`DEFAULT_SHELLS` (by the number
        of ``conductivities``, 3 if those are omitted too) scale the outer
        radius: the fitted radius, or the mean distance of ``points`` from a
        given ``centre``.
    conductivities : (k,) float64, S/m, optional
        Without it the defaults of :data:`DEFAULT_SHELLS` for ``k`` shells.
    frame : str

    Returns
    -------
    VolumeConductor
        ``kind="spheres"``.

    Raises
    ------
    UsageError
        Mismatched counts, no default for that many shells, or invalid values.
    """
    c = _vector("centre", centre)
    r = _vector("radii", radii)
    s = _vector("conductivities", conductivities)
    if c is not None and c.size != 3:
        raise UsageError(f"centre needs 3 coordinates (x, y, z), got {c.size}")
    if r is not None and s is not None and r.size != s.size:
        raise UsageError(f"{r.size} radii but {s.size} conductivities: give one conductivity per shell")
    k = r.size if r is not None else (s.size if s is not None else 3)
    if (r is None or s is None) and k not in DEFAULT_SHELLS:
        raise UsageError(f"no default {'radii' if r is None else 'conductivities'} for {k} shells "
                         f"(defaults exist for {', '.join(map(str, sorted(DEFAULT_SHELLS)))}); give them explicitly")
    if c is None or r is None:
        pts = np.asarray(points, dtype=np.float64)
        if c is None:
            c, outer = fit_sphere(pts)
        else:
            if pts.ndim != 2 or pts.shape[1] != 3 or len(pts) == 0:
                raise UsageError("input.too-few-points: no points to set the outer radius")
            outer = float(np.linalg.norm(pts - c, axis=1).mean())
        if r is None:
            r = outer * np.asarray(DEFAULT_SHELLS[k][0])
    if s is None:
        s = np.asarray(DEFAULT_SHELLS[k][1])
    try:
        return VolumeConductor(kind="spheres", centre=c, radii=r, conductivities=s, frame=frame)
    except ValueError as exc:
        raise UsageError(f"sphere model: {exc}") from exc


def outside_innermost(conductor: VolumeConductor, positions: ArrayLike) -> np.ndarray:
    """(m,) bool: dipoles a sphere model cannot place (not strictly inside the innermost sphere).

    Always all False for other conductor kinds (their solver decides).
    """
    p = np.asarray(positions, dtype=np.float64).reshape(-1, 3)
    if conductor.kind != "spheres":
        return np.zeros(len(p), dtype=bool)
    return ~(np.linalg.norm(p - conductor.centre, axis=1) < conductor.radii[0])


def _solver_for(registry: Registry, kind: str, name: str | None) -> Any:
    if name:
        desc = registry.get("forward_solver", name)
        if desc.conductor_kind != kind:
            raise UsageError(f"forward solver '{name}' works on '{desc.conductor_kind}' conductors, not '{kind}'")
        return desc
    found = [d for d in registry.descriptors("forward_solver") if d.conductor_kind == kind]
    if len(found) == 1:
        return found[0]
    if found:
        names = ", ".join(f"{d.name} (plugin {d.plugin})" for d in found)
        raise UsageError(f"several forward solvers handle '{kind}' conductors: {names}; name one")
    missing = [f"{d.name} (missing {', '.join(m)})" for d, m in registry.unavailable("forward_solver")
               if getattr(d, "conductor_kind", None) == kind]
    extra = f"; unavailable: {', '.join(missing)}" if missing else ""
    raise UsageError(f"no forward solver installed for '{kind}' conductors{extra}")


def build_forward(registry: Registry, conductor: VolumeConductor, sensor_labels: Sequence[str],
                  sensor_positions: ArrayLike, *, reference: str = "average",
                  options: Mapping[str, Any] | None = None, solver: str | None = None) -> ForwardModel:
    """Build a forward model with the solver for ``conductor.kind``, through the registry.

    Parameters
    ----------
    registry : Registry
    conductor : VolumeConductor
    sensor_labels : sequence of str, length n
    sensor_positions : (n, 3) float64, metres, in the conductor's frame
    reference : str
        ``"average"`` or one of ``sensor_labels``.
    options : mapping, optional
        Solver options, checked against the descriptor's ``defaults``.
    solver : str, optional
        A solver by name when several handle the same conductor kind.

    Returns
    -------
    ForwardModel
    """
    desc = _solver_for(registry, conductor.kind, solver)
    opts = registry.options(desc, options, f"forward solver '{desc.name}'")
    fm = registry.call(desc, "build", conductor, tuple(sensor_labels), np.asarray(sensor_positions, dtype=float),
                       reference=reference, step=f"forward solver '{desc.name}' building the model", **opts)
    if not isinstance(fm, ForwardModel):
        raise PluginError(desc.plugin, registry.dist_label(desc.plugin), f"forward solver '{desc.name}'.build",
                          TypeError(f"returned {type(fm).__name__}, not ForwardModel"))
    return fm


def forward_state(fm: ForwardModel) -> tuple[dict[str, Any], dict[str, np.ndarray]]:
    """What a bundle stores to rebuild ``fm``.

    Returns
    -------
    manifest : dict
        ``{"forward": {"solver", "reference", "params", "sensor_labels", "sensor_positions_m"}}``,
        JSON-ready (floats survive a JSON round trip exactly).
    arrays : dict str -> ndarray
        ``"forward_<key>"`` for each entry of ``fm.arrays`` (SI units).
    """
    manifest = {"forward": {"solver": fm.solver, "reference": fm.reference, "params": _jsonable(fm.params),
                            "sensor_labels": list(fm.sensor_labels),
                            "sensor_positions_m": fm.sensor_positions.tolist()}}
    arrays = {f"forward_{k}": np.asarray(v) for k, v in fm.arrays.items()}
    return manifest, arrays


def forward_from_state(registry: Registry, conductor: VolumeConductor, manifest: Mapping[str, Any],
                       arrays: Mapping[str, np.ndarray]) -> ForwardModel:
    """Rebuild a forward model from :func:`forward_state` output (``manifest`` with or without its ``"forward"`` key).

    Raises
    ------
    BundleError
        A required manifest key is missing.
    UsageError
        The named solver is not installed.
    """
    state = manifest.get("forward", manifest)
    for key in ("solver", "reference", "params", "sensor_labels", "sensor_positions_m"):
        if key not in state:
            raise BundleError(f"manifest: forward.{key} is missing")
    desc = registry.get("forward_solver", state["solver"])
    own = {k[len("forward_"):]: v for k, v in arrays.items() if k.startswith("forward_")}
    fm = registry.call(desc, "restore", conductor=conductor, sensor_labels=tuple(state["sensor_labels"]),
                       sensor_positions=np.asarray(state["sensor_positions_m"], dtype=float),
                       reference=state["reference"], params=dict(state["params"]), arrays=own,
                       step=f"forward solver '{desc.name}' restoring the model")
    if not isinstance(fm, ForwardModel):
        raise BundleError(f"forward solver '{desc.name}' restored {type(fm).__name__}, not ForwardModel")
    return fm


def forward_from_bundle(registry: Registry, bundle: Any) -> ForwardModel:
    """The forward model stored in a loaded :class:`prep.bundle.Bundle`, evaluable at any dipole position.

    Works for every head model: the bundle names the solver that built it, and
    that solver restores it from the stored parameters and arrays.
    """
    return forward_from_state(registry, bundle.conductor(), bundle.manifest, bundle.arrays)
