"""Least-squares sphere fit and the sphere head model's defaults."""
from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from prep import UsageError
from prep.forward import DEFAULT_SHELLS, fit_sphere, sphere_conductor
from prep.geometry.spheres import project_to_sphere


@settings(max_examples=60, deadline=None)
@given(cx=st.floats(-0.2, 0.2), cy=st.floats(-0.2, 0.2), cz=st.floats(-0.2, 0.2),
       radius=st.floats(0.03, 0.2), cap=st.floats(0.3, 1.0), noise=st.floats(0.0, 5e-4),
       seed=st.integers(0, 2**31 - 1))
def test_fit_recovers_centre_and_radius_of_noisy_points(cx, cy, cz, radius, cap, noise, seed):
    # points on a cap of the sphere (cap = 1: whole sphere; 0.3: a bit less than a hemisphere, like a cap of
    # electrodes), radial noise up to 0.5 mm (digitizer error, from memory); recovered within a few noise levels
    rng = np.random.default_rng(seed)
    n = 200
    z = rng.uniform(1 - 2 * cap, 1, n)
    phi = rng.uniform(0, 2 * np.pi, n)
    s = np.sqrt(1 - z**2)
    u = np.stack([s * np.cos(phi), s * np.sin(phi), z], axis=1)
    centre = np.array([cx, cy, cz])
    pts = centre + (radius + noise * rng.standard_normal(n))[:, None] * u
    c, r = fit_sphere(pts)
    tol = 1e-9 + 10 * noise / np.sqrt(cap)
    assert abs(r - radius) < tol
    assert np.linalg.norm(c - centre) < tol


def test_fit_is_exact_without_noise():
    rng = np.random.default_rng(0)
    u = rng.normal(size=(20, 3))
    u /= np.linalg.norm(u, axis=1)[:, None]
    c, r = fit_sphere(np.array([0.01, -0.02, 0.03]) + 0.09 * u)
    np.testing.assert_allclose(c, [0.01, -0.02, 0.03], atol=1e-13)
    assert r == pytest.approx(0.09, abs=1e-13)


@pytest.mark.parametrize("pts", [np.zeros((3, 3)), np.c_[np.random.default_rng(1).normal(size=(10, 2)), np.zeros(10)]])
def test_fit_refuses_too_few_or_coplanar_points(pts):
    with pytest.raises(UsageError, match="input.too-few-points"):
        fit_sphere(pts)


def test_project_to_sphere():
    p, ok = project_to_sphere([[0.2, 0, 0], [0, 0, 0], [0, 0.05, 0.05]], [0, 0, 0], 0.1)
    np.testing.assert_allclose(np.linalg.norm(p[ok], axis=1), 0.1)
    assert ok.tolist() == [True, False, True]


def _cap(radius=0.095, centre=(0.0, 0.01, 0.04)):
    rng = np.random.default_rng(2)
    u = rng.normal(size=(64, 3))
    u[:, 2] = np.abs(u[:, 2])
    u /= np.linalg.norm(u, axis=1)[:, None]
    return np.asarray(centre) + radius * u


def test_sphere_conductor_defaults_three_shells_rush_driscoll():
    cond = sphere_conductor(_cap())
    np.testing.assert_allclose(cond.radii, 0.095 * np.array([0.87, 0.92, 1.0]), rtol=1e-9)   # Rush & Driscoll 1968
    np.testing.assert_allclose(cond.conductivities, [0.33, 0.0042, 0.33])                   # 1:80, Rush & Driscoll 1968
    np.testing.assert_allclose(cond.centre, [0.0, 0.01, 0.04], atol=1e-9)


def test_sphere_conductor_partial_inputs():
    pts = _cap()
    four = sphere_conductor(pts, conductivities=[0.33, 1.79, 0.0042, 0.33])
    np.testing.assert_allclose(four.radii / four.radii[-1], DEFAULT_SHELLS[4][0])
    given_centre = sphere_conductor(pts, centre=[0.0, 0.01, 0.04])
    assert given_centre.radii[-1] == pytest.approx(0.095, rel=1e-9)
    explicit = sphere_conductor(pts, centre=[0, 0, 0], radii=[0.08, 0.09], conductivities=[0.33, 0.01])
    assert explicit.radii.tolist() == [0.08, 0.09]
    with pytest.raises(UsageError, match="2 radii but 3 conductivities"):
        sphere_conductor(pts, radii=[0.08, 0.09], conductivities=[0.33, 0.01, 0.33])
    with pytest.raises(UsageError, match="no default conductivities for 2 shells"):
        sphere_conductor(pts, radii=[0.08, 0.09])
    with pytest.raises(UsageError, match="radii must increase"):
        sphere_conductor(pts, radii=[0.09, 0.08, 0.1])
