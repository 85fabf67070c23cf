"""The boundary-element solver against analytic spheres (Meijs et al. 1989 RDM and MAG).

Reference of record: the registry's concentric-spheres solver ("spheres") when
it is installed; otherwise the Legendre series of tests/forward_solvers/_bem_reference.py
(Frank 1952 for one homogeneous sphere; the same series with shell factors).
Assembled models are cached per module (building one 642-vertex model takes
several seconds, a 2,562-vertex one about a minute).
"""
from __future__ import annotations

import numpy as np
import pytest

from prep import Surface, UsageError, VolumeConductor, make_registry
from prep.geometry.layers import icosphere
from prep_plugins import forward_bem

from ._bem_reference import homogeneous_sphere, mag, rdm, shell_potential

RADII = np.array([0.087, 0.092, 0.100])          # Meijs et al. 1989 style three-shell head, metres
SIGMA_80 = np.array([0.33, 0.0042, 0.33])        # S/m, skull about 1/80 (Rush & Driscoll 1968)
SIGMA_20 = np.array([0.33, 0.33 / 20, 0.33])     # S/m, skull 1/20 (Oostendorp et al. 2000 range)
SIGMA_EQ = np.array([0.33, 0.33, 0.33])          # homogeneous sphere (Frank 1952)
DIRECTION = np.array([0.0, 0.3, 0.95]) / np.linalg.norm([0.0, 0.3, 0.95])


def _electrodes() -> np.ndarray:
    v, _ = icosphere(2)
    return v[v[:, 2] > -0.3] * RADII[-1]           # 107 electrodes on the upper head


def _conductor(subdivisions: int, sigma: np.ndarray) -> VolumeConductor:
    v, f = icosphere(subdivisions)
    layers = tuple(Surface(vertices=v * r, faces=f, role=role)
                   for r, role in zip(RADII, ("inner_skull", "outer_skull", "scalp")))
    return VolumeConductor(kind="layers", conductivities=sigma, layers=layers)


def _bem(subdivisions: int, sigma: np.ndarray, cache_dir, keep: bool = True) -> object:
    reg = make_registry(entry_points=False, plugins=[forward_bem])
    desc = reg.get("forward_solver", "bem")
    pos = _electrodes()
    labels = tuple(f"E{i:03d}" for i in range(len(pos)))
    return desc.build(_conductor(subdivisions, sigma), labels, pos, reference="average",
                      cache=keep, cache_dir=str(cache_dir))


def _dipoles(ecc: float) -> list[tuple[str, np.ndarray, np.ndarray]]:
    pos = DIRECTION * ecc * RADII[0]
    tan = np.cross(DIRECTION, [1.0, 0.0, 0.0])
    return [("radial", pos, DIRECTION), ("tangential", pos, tan / np.linalg.norm(tan))]


def _reference(sigma: np.ndarray, electrodes: np.ndarray, pos: np.ndarray, q: np.ndarray) -> np.ndarray:
    """Concentric-spheres potentials from the registry's "spheres" solver, else from the series."""
    reg = make_registry()
    names = [d.name for d in reg.descriptors("forward_solver")]
    if "spheres" in names:
        desc = reg.get("forward_solver", "spheres")
        cond = VolumeConductor(kind="spheres", conductivities=sigma, centre=np.zeros(3), radii=RADII)
        labels = tuple(f"E{i:03d}" for i in range(len(electrodes)))
        model = desc.build(cond, labels, electrodes, reference="average")
        return model.evaluate(pos[None], q[None])[:, 0]
    if np.allclose(sigma, sigma[0]):
        return homogeneous_sphere(electrodes, RADII[-1], sigma[0], pos, q)
    return shell_potential(electrodes, RADII, sigma, pos, q)


def errors(model, sigma: np.ndarray, eccentricities) -> dict[tuple[float, str], tuple[float, float]]:
    """(eccentricity, orientation) -> (RDM, MAG) over all electrodes."""
    ele = _electrodes()
    out = {}
    for ecc in eccentricities:
        for name, pos, q in _dipoles(ecc):
            lf = model.evaluate(pos[None], q[None])[:, 0]
            ref = _reference(sigma, ele, pos, q)
            out[(ecc, name)] = (rdm(lf, ref), mag(lf, ref))
    return out


@pytest.fixture(scope="module")
def cache(tmp_path_factory):
    return tmp_path_factory.mktemp("bem-cache")


@pytest.fixture(scope="module")
def model_642(cache):
    return _bem(3, SIGMA_80, cache)


@pytest.fixture(scope="module")
def model_162(cache):
    return _bem(2, SIGMA_80, cache)


def test_homogeneous_layers_match_closed_form(cache):
    # all conductivities equal: the three-layer model is one homogeneous sphere (Frank 1952)
    model = _bem(3, SIGMA_EQ, cache)
    ele = _electrodes()
    for ecc in (0.1, 0.5, 0.8):
        for _, pos, q in _dipoles(ecc):
            lf = model.evaluate(pos[None], q[None])[:, 0]
            ref = homogeneous_sphere(ele, RADII[-1], SIGMA_EQ[0], pos, q)
            assert rdm(lf, ref) <= 0.03      # measured <= 0.026 at 642 vertices
            assert abs(mag(lf, ref) - 1) <= 0.03


def test_642_vertices_meet_rdm_target(model_642):
    # target from the issue: RDM <= 0.08 up to eccentricity 0.8 at ~640 vertices per layer
    for (ecc, name), (r, _) in errors(model_642, SIGMA_80, (0.1, 0.5, 0.8)).items():
        assert r <= 0.08, (ecc, name, r)


def test_conductivity_ratio_changes_maps_more_than_error(model_642, cache):
    # 1/80 vs 1/20 skull: the maps differ far more than the numerical error (sanity, common practice)
    other = _bem(3, SIGMA_20, cache)
    pos, q = DIRECTION * 0.5 * RADII[0], DIRECTION
    a = model_642.evaluate(pos[None], q[None])[:, 0]
    b = other.evaluate(pos[None], q[None])[:, 0]
    err = errors(model_642, SIGMA_80, (0.5,))[(0.5, "radial")]
    assert abs(mag(b, a) - 1) > 5 * abs(err[1] - 1) or rdm(a, b) > 5 * err[0]
    assert mag(b, a) > 1.5   # a 4x more conductive skull passes more potential (measured 1.68)


def test_refinement_162_to_642_reduces_rdm(model_162, model_642):
    coarse = errors(model_162, SIGMA_80, (0.5, 0.8))
    fine = errors(model_642, SIGMA_80, (0.5, 0.8))
    for key in coarse:
        assert fine[key][0] < coarse[key][0], key


@pytest.mark.slow
def test_2562_vertices_meet_targets(model_642, cache):
    # targets from the issue (Meijs et al. 1989 measures): RDM <= 0.03, |MAG - 1| <= 0.03 up to 0.9;
    # RDM <= 0.05 at 0.95; refining 640 -> 2,560 at least halves the RDM
    model = _bem(4, SIGMA_80, cache, keep=False)   # electrode rows only: the cheaper solve
    fine = errors(model, SIGMA_80, (0.1, 0.5, 0.8, 0.9, 0.95))
    for (ecc, name), (r, m) in fine.items():
        if ecc <= 0.9:
            assert r <= 0.03 and abs(m - 1) <= 0.03, (ecc, name, r, m)
        else:
            assert r <= 0.05, (ecc, name, r)
    coarse = errors(model_642, SIGMA_80, (0.5, 0.8))
    for key, (r, _) in coarse.items():
        assert fine[key][0] <= 0.5 * r, key


def test_free_orientation_matches_fixed(model_642):
    pos = np.array([[0.01, 0.02, 0.03], [-0.02, 0.0, 0.05]])
    free = model_642.evaluate(pos, None)
    assert free.shape == (107, 2, 3)
    n = np.array([[0.0, 0.6, 0.8], [1.0, 0.0, 0.0]])
    np.testing.assert_allclose(np.einsum("smk,mk->sm", free, n), model_642.evaluate(pos, n), rtol=1e-12)
    np.testing.assert_allclose(free.sum(axis=0), 0.0, atol=1e-12 * np.abs(free).max())  # average reference


def test_source_outside_brain_gives_zero_column_not_nan(model_642):
    pos = np.array([[0.0, 0.0, 0.05], [0.0, 0.0, 0.09], [0.0, 0.0, 0.5]])  # in brain, in skull, outside head
    lf = model_642.evaluate(pos, np.tile([0.0, 0.0, 1.0], (3, 1)))
    assert np.all(np.isfinite(lf))
    assert np.abs(lf[:, 0]).max() > 0 and np.all(lf[:, 1:] == 0.0)


def test_restore_from_arrays_and_cache_hit(model_642, cache):
    reg = make_registry(entry_points=False, plugins=[forward_bem])
    desc = reg.get("forward_solver", "bem")
    again = _bem(3, SIGMA_80, cache)
    assert again.params["cache_hit"] is True
    restored = desc.restore(conductor=model_642.conductor, sensor_labels=model_642.sensor_labels,
                            sensor_positions=model_642.sensor_positions, reference="average",
                            params=model_642.params, arrays=model_642.arrays)
    pos = np.array([[0.01, -0.02, 0.04]])
    np.testing.assert_array_equal(restored.evaluate(pos, None), model_642.evaluate(pos, None))


def test_reference_electrode_and_bad_options(model_642, cache):
    cond = model_642.conductor
    labels = model_642.sensor_labels
    m = forward_bem.build(cond, labels, _electrodes(), reference=labels[5], cache_dir=str(cache))
    lf = m.evaluate(np.array([[0.0, 0.01, 0.04]]), None)
    assert np.all(lf[5] == 0.0)
    with pytest.raises(UsageError):
        forward_bem.build(cond, labels, _electrodes(), preset="no-such-preset", cache_dir=str(cache))
    with pytest.raises(UsageError):
        forward_bem.build(cond, labels, _electrodes(), reference="nope", cache_dir=str(cache))


def test_preset_replaces_conductivities(model_162, cache):
    m = forward_bem.build(model_162.conductor, model_162.sensor_labels, _electrodes(), preset="skull-1-80",
                          cache_dir=str(cache))
    assert m.params["preset_source"].startswith("skull 1/80")
    np.testing.assert_allclose(m.conductor.conductivities, [0.33, 0.33 / 80, 0.33])


def test_linear_weights_match_quadrature_and_backends() -> None:
    # one triangle, two field points: the closed form against a fine midpoint rule (numpy reference)
    from prep_plugins._forward_bem_kernels import LinearDoubleLayer

    tri = np.array([[0.0, 0.0, 0.0], [1.0, 0.0, 0.0], [0.2, 0.9, 0.0]]) * 0.01
    op = LinearDoubleLayer(tri, np.array([[0, 1, 2]]))
    r = np.array([[0.003, 0.002, -0.004], [0.02, -0.01, 0.003]])
    n = 600
    a, b = np.meshgrid((np.arange(n) + 1 / 3) / n, (np.arange(n) + 1 / 3) / n)
    keep = a + b < 1
    a, b = a[keep], b[keep]
    x = tri[0] + a[:, None] * (tri[1] - tri[0]) + b[:, None] * (tri[2] - tri[0])
    psi = np.stack([1 - a - b, a, b], 1)
    for backend in ("numpy", "auto"):
        w = op.weights(r, backend=backend)
        for i in range(2):
            d = x - r[i]
            k = d[:, 2] / np.linalg.norm(d, axis=1) ** 3
            quad = (psi * k[:, None]).mean(0) * 0.5 * np.linalg.norm(np.cross(tri[1] - tri[0], tri[2] - tri[0]))
            np.testing.assert_allclose(w[i], quad, rtol=2e-3)


def test_weights_of_closed_mesh_sum_to_solid_angle() -> None:
    # a closed surface subtends 4 pi inside and 0 outside (Gauss); backends agree to rounding
    from prep_plugins._forward_bem_kernels import LinearDoubleLayer

    v, f = icosphere(3)
    op = LinearDoubleLayer(v * 0.09, f)
    pts = np.array([[0.0, 0.0, 0.0], [0.01, 0.02, 0.03], [0.2, 0.0, 0.0]])
    w = op.weights(pts, backend="numpy")
    np.testing.assert_allclose(w.sum(axis=1), [4 * np.pi, 4 * np.pi, 0.0], atol=1e-10)
    np.testing.assert_allclose(op.weights(np.vstack([pts, v[:50] * 0.09]), backend="auto"),
                               op.weights(np.vstack([pts, v[:50] * 0.09]), backend="numpy"), atol=1e-10)


def test_electrode_rows_only_equal_cached_scalp_solution(model_162) -> None:
    # cache=False solves only for the electrodes' rows; same transfer matrix to rounding
    direct = forward_bem.build(model_162.conductor, model_162.sensor_labels, _electrodes(), cache=False)
    np.testing.assert_allclose(direct.arrays["transfer"], model_162.arrays["transfer"],
                               atol=1e-9 * np.abs(model_162.arrays["transfer"]).max())


def test_inside_closed_matches_core_winding_number() -> None:
    # the ball pre-filter and the compiled kernel give the core's answer (prep.geometry.layers.inside)
    from prep.geometry.layers import inside
    from prep_plugins._forward_bem_kernels import inside_closed

    v, f = icosphere(2)
    rng = np.random.default_rng(3)
    for scale in (np.array([0.95, 1.1, 1.0]), np.array([1.0, 0.4, 1.0])):
        vv = v * 0.09 * scale
        pts = np.vstack([rng.uniform(-0.1, 0.1, size=(300, 3)), vv * 0.999, vv * 1.001])
        np.testing.assert_array_equal(inside_closed(pts, vv, f), inside(pts, vv, f))
    dent = v * 0.09
    dent[dent[:, 2] > 0.06] *= 0.2          # a deep dent over the top: a non-convex mesh
    pts = rng.uniform(-0.1, 0.1, size=(300, 3))
    np.testing.assert_array_equal(inside_closed(pts, dent, f), inside(pts, dent, f))
