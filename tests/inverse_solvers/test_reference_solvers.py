"""Reference inverse solvers on a homogeneous-sphere lead field (Frank 1952, see frank_sphere.py)."""
from __future__ import annotations

import numpy as np
import pytest
from inverse_solvers.frank_sphere import (fibonacci_sphere, frank_potential, registry_sphere_model, series_potential,
                                          sphere_forward_model, sphere_leadfield)

from prep import InverseProblem, LeadField, make_registry
from prep_plugins import inverse_dipole, inverse_minnorm

RADIUS = 0.09


@pytest.fixture(scope="module")
def reg():
    return make_registry(entry_points=False, plugins=[inverse_minnorm, inverse_dipole])


@pytest.fixture(scope="module")
def sphere():
    lf, el, src, nrm = sphere_leadfield(48, 400, RADIUS, seed=5)
    leadfield = LeadField(matrix=lf, sensor_labels=[f"E{i + 1}" for i in range(48)], source_positions=src,
                          source_normals=nrm)
    return leadfield, el


def test_frank_closed_form_matches_legendre_series():
    el = fibonacci_sphere(6, RADIUS)
    src, q = np.array([[0.01, -0.02, 0.04]]), np.array([[0.2, 0.5, -0.8]])
    closed = frank_potential(el, src, q, RADIUS)[:, 0]
    series = np.array([series_potential(e, src[0], q[0], RADIUS) for e in el])
    np.testing.assert_allclose(closed - closed.mean(), series - series.mean(), rtol=1e-6)


@pytest.mark.parametrize("model", ["frank-closed-form", "spheres-plugin"])
def test_sloreta_localises_a_noiseless_dipole_exactly(reg, sphere, model):
    lf, el = sphere
    if model == "spheres-plugin":  # the kit's own 3-shell sphere solver, when installed
        fm = registry_sphere_model(el)
        if fm is None:
            pytest.skip("no 'spheres' forward solver installed")
        lf = fm.leadfield(lf.source_positions, lf.source_normals)
    solver = reg.get("inverse_solver", "sloreta")
    for j in (0, 57, 123, 399):  # zero localisation error without noise: Pascual-Marqui 2002
        data = lf.matrix[:, [j]] * 1e-8
        est = solver.solve(InverseProblem(leadfield=lf, data=data, snr=3.0))
        assert int(np.argmax(np.abs(est.amplitudes[:, 0]))) == j
        assert est.unit == "1"


def test_minimum_norm_equals_the_explicit_formula(reg, sphere):
    lf, _ = sphere
    data = np.random.default_rng(0).normal(size=(48, 2)) * 1e-6
    est = reg.get("inverse_solver", "minimum-norm").solve(InverseProblem(leadfield=lf, data=data, snr=3.0))
    L = lf.matrix
    lam2 = np.trace(L @ L.T) / (48 * 9.0)  # lambda^2 = trace(L L^T) / (n SNR^2): common practice
    ref = L.T @ np.linalg.solve(L @ L.T + lam2 * np.eye(48), data)
    np.testing.assert_allclose(est.amplitudes, ref, rtol=1e-8, atol=1e-12 * np.abs(ref).max())
    dspm = reg.get("inverse_solver", "dspm").solve(InverseProblem(leadfield=lf, data=data, snr=3.0))
    k = L.T @ np.linalg.inv(L @ L.T + lam2 * np.eye(48))
    np.testing.assert_allclose(dspm.amplitudes, ref / np.linalg.norm(k, axis=1)[:, None], rtol=1e-7)  # Dale 2000


def test_dipole_fit_grid_search_finds_the_patch_without_a_forward_model(reg, sphere):
    lf, _ = sphere
    est = reg.get("inverse_solver", "dipole-fit").solve(InverseProblem(leadfield=lf, data=lf.matrix[:, [77]]))
    np.testing.assert_allclose(est.positions[0], lf.source_positions[77])
    assert est.metrics["method"] == "grid"
    assert est.metrics["residual_variance"] == pytest.approx(0.0, abs=1e-12)


def test_dipole_fit_recovers_an_off_grid_dipole_with_the_forward_model(reg, sphere):
    lf, el = sphere
    fwd = sphere_forward_model(el, RADIUS)
    true_pos = np.array([[0.012, -0.018, 0.047]])  # not a patch centre
    moment = np.array([[2e-8, -1e-8, 3e-8]])
    data = fwd.evaluate(true_pos, moment / np.linalg.norm(moment))[:, :1] * np.linalg.norm(moment)
    est = reg.get("inverse_solver", "dipole-fit").solve(InverseProblem(leadfield=lf, data=data, forward=fwd))
    assert est.metrics["method"] == "nonlinear"
    assert np.linalg.norm(est.positions[0] - true_pos[0]) < 2e-4  # noiseless: exact up to the optimiser tolerance
    np.testing.assert_allclose(est.moments[0, :, 0], moment[0], rtol=0.02)
    assert est.metrics["residual_variance"] < 1e-6


def test_dipole_fit_steps_around_positions_the_model_refuses(reg, sphere):
    from dataclasses import replace

    from prep import UsageError

    lf, el = sphere
    fwd = sphere_forward_model(el, RADIUS)

    def guarded(pos, normals):
        if np.any(np.linalg.norm(pos, axis=1) > 0.07):  # like a model that cannot place a source there
            raise UsageError("outside the innermost compartment")
        return fwd.evaluate(pos, normals)

    true_pos = np.array([[0.0, 0.02, 0.066]])  # 69 mm from the centre: the search brushes the limit
    data = fwd.evaluate(true_pos, np.array([[0.0, 0.0, 1.0]])) * 1e-8
    est = reg.get("inverse_solver", "dipole-fit").solve(
        InverseProblem(leadfield=lf, data=data, forward=replace(fwd, evaluate=guarded)))
    assert np.linalg.norm(est.positions[0]) <= 0.07
    assert np.linalg.norm(est.positions[0] - true_pos[0]) < 0.005
