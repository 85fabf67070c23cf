"""Independent reference: potential of a current dipole in a homogeneous sphere.

Closed form after Frank (1952), derived here from the point-source series
sum_n (2n+1)/n t^n P_n(cos g) (insulated sphere, electrodes on the surface):

    V(r) = 1/(4 pi sigma) q . [ 2 (r - r0)/d^3 + (r/R + (r - r0)/d) / (R^2 - r.r0 + R d) ]

with |r| = R, d = |r - r0|. ``series_potential`` sums the Legendre series
(the same physics written another way) so the two can check each other.
Used by the tests only; the kit's own sphere solver is a plugin.
"""
from __future__ import annotations

import numpy as np
from scipy.special import eval_legendre


def fibonacci_sphere(n: int, radius: float, upper_only: bool = True) -> np.ndarray:
    """(n, 3) points spread evenly over a sphere (or its upper part), metres."""
    i = np.arange(n) + 0.5
    z = 1 - i / n * (1.2 if upper_only else 2.0)  # down to z = -0.2 R for a cap
    r = np.sqrt(1 - z * z)
    phi = np.pi * (1 + 5 ** 0.5) * i
    return radius * np.column_stack([r * np.cos(phi), r * np.sin(phi), z])


def frank_potential(electrodes: np.ndarray, dipoles: np.ndarray, moments: np.ndarray,
                    radius: float, sigma: float = 0.33) -> np.ndarray:
    """(n_electrodes, n_dipoles) potential in V for dipoles (m, 3) with moments (m, 3) A*m."""
    r = electrodes[:, None, :]
    r0 = dipoles[None, :, :]
    dv = r - r0
    d = np.linalg.norm(dv, axis=2)
    big_f = radius ** 2 - np.einsum("ijk,ijk->ij", r, r0 * np.ones_like(r)) + radius * d
    term = 2 * dv / d[..., None] ** 3 + (r / radius + dv / d[..., None]) / big_f[..., None]
    return np.einsum("ijk,jk->ij", term, moments) / (4 * np.pi * sigma)


def series_potential(electrode: np.ndarray, dipole: np.ndarray, moment: np.ndarray, radius: float,
                     sigma: float = 0.33, n_terms: int = 400, h: float = 1e-7) -> float:
    """The same potential from the Legendre series, differentiated numerically in r0."""
    def mono(r0: np.ndarray) -> float:
        t = np.linalg.norm(r0) / radius
        cosg = np.dot(electrode, r0) / (radius * np.linalg.norm(r0))
        n = np.arange(1, n_terms)
        return float(np.sum((2 * n + 1) / n * t ** n * eval_legendre(n, cosg)) / (4 * np.pi * sigma * radius))

    grad = np.array([(mono(dipole + h * e) - mono(dipole - h * e)) / (2 * h) for e in np.eye(3)])
    return float(grad @ moment)


def sphere_leadfield(n_sensors: int = 64, n_sources: int = 300, radius: float = 0.09, seed: int = 0,
                     reference: str | int = "average") -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """A fixed-orientation lead field (radial-ish random normals) on a homogeneous sphere.

    Returns (L (n, m) V/(A*m), electrodes (n, 3), sources (m, 3), normals (m, 3)).
    """
    rng = np.random.default_rng(seed)
    el = fibonacci_sphere(n_sensors, radius)
    src = rng.normal(size=(n_sources, 3))
    src /= np.linalg.norm(src, axis=1, keepdims=True)
    src *= radius * rng.uniform(0.3, 0.8, size=(n_sources, 1))
    nrm = src / np.linalg.norm(src, axis=1, keepdims=True) + 0.3 * rng.normal(size=(n_sources, 3))
    nrm /= np.linalg.norm(nrm, axis=1, keepdims=True)
    lf = frank_potential(el, src, nrm, radius)
    lf = lf - (lf.mean(axis=0) if reference == "average" else lf[int(reference)])
    return lf, el, src, nrm


def registry_sphere_model(electrodes: np.ndarray, registry=None):
    """The kit's own "spheres" forward solver on a 3-shell head (radii 81/85/90 mm), or None if absent."""
    from prep import VolumeConductor, make_registry
    from prep.forward import build_forward

    reg = registry or make_registry()
    if "spheres" not in [d.name for d in reg.descriptors("forward_solver")]:
        return None
    cond = VolumeConductor(kind="spheres", conductivities=[0.33, 0.0042, 0.33], centre=[0.0, 0.0, 0.0],
                           radii=[0.081, 0.085, 0.09])  # common textbook 3-shell values
    return build_forward(reg, cond, [f"E{i + 1}" for i in range(len(electrodes))], electrodes)


def write_sphere_bundle(path, n_sensors: int = 32, n_sources: int = 150, radius: float = 0.09, seed: int = 0,
                        reference: str | int = "average", leadfield: np.ndarray | None = None,
                        model: str = "frank"):
    """Write a small bundle around a sphere lead field; returns its path.

    ``model="frank"``: the closed form above (no forward state stored);
    ``model="spheres"``: the kit's sphere solver, with its state stored so the
    bundle's forward model can be restored. ``leadfield`` replaces the matrix
    (e.g. to plant a fault).
    """
    from prep import VolumeConductor
    from prep.bundle import write_bundle

    lf, el, src, nrm = sphere_leadfield(n_sensors, n_sources, radius, seed, reference)
    labels = [f"E{i + 1}" for i in range(n_sensors)]
    ref = "average" if reference == "average" else labels[int(reference)]
    conductor = VolumeConductor(kind="spheres", conductivities=[0.33], centre=[0.0, 0.0, 0.0], radii=[radius])
    forward = {"solver": "spheres", "reference": ref, "params": {}}
    if model == "spheres":
        from prep.forward import forward_state

        fm = registry_sphere_model(el)
        lf = fm.leadfield(src, nrm).matrix
        conductor = fm.conductor
        forward = forward_state(fm)[0]["forward"]
    if leadfield is not None:
        lf = leadfield
    manifest = {"kit": {"name": "headprep", "version": "test"}, "frame": "anatomy",
                "sensors": {"labels": labels}, "findings": [], "inputs": [], "plugins": [], "parameters": {},
                "forward": forward, "head_model": conductor.describe()}
    arrays = {"leadfield": lf, "sensor_positions": el, "source_positions": src, "source_normals": nrm,
              "source_areas": np.full(n_sources, 1e-5), "source_spread": np.zeros(n_sources),
              "source_hemisphere": (src[:, 0] > 0).astype(np.int8)}
    return write_bundle(path, manifest, arrays)


def sphere_forward_model(electrodes: np.ndarray, radius: float = 0.09):
    """A ForwardModel evaluating the closed form at any position (average reference)."""
    from prep import ForwardModel, VolumeConductor

    def evaluate(pos, normals):
        out = np.stack([frank_potential(electrodes, pos, np.tile(e, (len(pos), 1)), radius) for e in np.eye(3)],
                       axis=2)
        out -= out.mean(axis=0)
        return out if normals is None else np.einsum("nmk,mk->nm", out, normals)

    cond = VolumeConductor(kind="spheres", conductivities=[0.33], centre=[0, 0, 0], radii=[radius])
    return ForwardModel(solver="test-sphere", conductor=cond,
                        sensor_labels=[f"E{i + 1}" for i in range(len(electrodes))],
                        sensor_positions=electrodes, evaluate=evaluate)
