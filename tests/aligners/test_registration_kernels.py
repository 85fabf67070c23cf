"""Kernels of prep.geometry.registration and prep.geometry.surface against reference libraries."""
from __future__ import annotations

import numpy as np
import pytest
import trimesh
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.spatial.transform import Rotation

from prep.geometry.registration import (absolute_orientation, bootstrap_step, huber_weights, rigid_matrix,
                                        robust_icp, rotation_angle_deg, rotvec_to_matrix, spread_ratio)
from prep.geometry.surface import SurfaceQuery, closest_points, surface_query

seeds = st.integers(min_value=0, max_value=2**31 - 1)


@settings(max_examples=40, deadline=None)
@given(seed=seeds, n=st.integers(min_value=3, max_value=40))
def test_absolute_orientation_agrees_with_scipy_align_vectors(seed: int, n: int) -> None:
    rng = np.random.default_rng(seed)
    src = rng.normal(size=(n, 3))
    w = rng.uniform(0.1, 2.0, n)
    rot_true = Rotation.random(random_state=seed).as_matrix()
    dst = src @ rot_true.T + rng.normal(0, 0.05, (n, 3)) + [0.3, -0.1, 0.2]
    rot, t, s = absolute_orientation(src, dst, w)
    mu_s, mu_d = w @ src / w.sum(), w @ dst / w.sum()
    # reference library: scipy's Rotation.align_vectors (Kabsch) on the centred vectors
    ref, _ = Rotation.align_vectors(dst - mu_d, src - mu_s, weights=w)
    assert s == 1.0
    assert np.allclose(rot, ref.as_matrix(), atol=1e-8)
    assert np.allclose(t, mu_d - rot @ mu_s, atol=1e-10)
    assert np.linalg.det(rot) == pytest.approx(1.0)


def test_absolute_orientation_recovers_scale_exactly() -> None:
    rng = np.random.default_rng(1)
    src = rng.normal(size=(6, 3))
    rot_true = rotvec_to_matrix([0.2, -0.4, 0.1])
    dst = 1.07 * src @ rot_true.T + [0.01, 0.02, 0.03]
    rot, t, s = absolute_orientation(src, dst, scale=True)
    # exact data: Umeyama 1991 returns the generating similarity
    assert s == pytest.approx(1.07, rel=1e-12)
    assert np.allclose(rot, rot_true, atol=1e-12)
    assert np.allclose(t, [0.01, 0.02, 0.03], atol=1e-12)


def test_absolute_orientation_refuses_a_reflection_unless_allowed() -> None:
    rng = np.random.default_rng(2)
    src = rng.normal(size=(10, 3))
    dst = src * [-1, 1, 1]
    rot, _, _ = absolute_orientation(src, dst)
    assert np.linalg.det(rot) == pytest.approx(1.0)
    rot, _, _ = absolute_orientation(src, dst, allow_reflection=True)
    assert np.allclose(rot, np.diag([-1, 1, 1]), atol=1e-12)


def test_spread_ratio_flags_collinear_points() -> None:
    line = np.outer(np.linspace(0, 1, 3), [1, 2, 3])
    assert spread_ratio(line) < 1e-12
    assert spread_ratio(np.eye(3)) > 0.5


@settings(max_examples=30, deadline=None)
@given(x=st.floats(-3, 3), y=st.floats(-3, 3), z=st.floats(-3, 3))
def test_rotvec_matches_scipy(x: float, y: float, z: float) -> None:
    ref = Rotation.from_rotvec([x, y, z]).as_matrix()  # reference library: scipy
    assert np.allclose(rotvec_to_matrix([x, y, z]), ref, atol=1e-12)
    assert rotation_angle_deg(ref) == pytest.approx(np.degrees(Rotation.from_matrix(ref).magnitude()), abs=1e-5)


def test_huber_weights() -> None:
    w = huber_weights(np.array([0.0, 1.0, 2.0, -4.0]), 1.0, k=2.0)
    assert np.allclose(w, [1, 1, 1, 0.5])  # Huber 1964: k*s/|r| beyond k*s


@pytest.fixture(scope="module")
def ellipsoid() -> trimesh.Trimesh:
    m = trimesh.creation.icosphere(subdivisions=4)
    m.vertices = m.vertices * [0.075, 0.095, 0.09]
    return m


@settings(max_examples=8, deadline=None)
@given(seed=seeds)
def test_closest_points_agree_with_trimesh(ellipsoid: trimesh.Trimesh, seed: int) -> None:
    rng = np.random.default_rng(seed)
    u = rng.normal(size=(60, 3))
    p = u / np.linalg.norm(u, axis=1)[:, None] * rng.uniform(0.05, 0.13, (60, 1))
    on, d, face = closest_points(ellipsoid.vertices, ellipsoid.faces, p)
    # reference library: trimesh.proximity (its signed distance is positive *inside*)
    ref_on, ref_d, _ = trimesh.proximity.closest_point(ellipsoid, p)
    ref_sd = trimesh.proximity.signed_distance(ellipsoid, p)
    assert np.all(np.abs(d) <= ref_d + 1e-9)        # never farther than trimesh's answer
    assert np.allclose(np.abs(d), ref_d, atol=1e-5)  # and equal to 10 micrometres
    assert np.allclose(d, -ref_sd, atol=1e-5)
    assert np.allclose(np.linalg.norm(on - p, axis=1), np.abs(d), atol=1e-12)
    assert np.all((face >= 0) & (face < len(ellipsoid.faces)))


@settings(max_examples=8, deadline=None)
@given(seed=seeds, bad=st.sets(st.integers(0, 19), min_size=1, max_size=20))
def test_nonfinite_points_get_nan_and_leave_the_others_unchanged(ellipsoid: trimesh.Trimesh, seed: int,
                                                                 bad: set[int]) -> None:
    """A NaN electrode (a data problem reported as input.nonfinite) must not crash the query (numpy-like NaN out)."""
    rng = np.random.default_rng(seed)
    p = rng.normal(size=(20, 3)) * 0.05
    ref = closest_points(ellipsoid.vertices, ellipsoid.faces, p)
    q = p.copy()
    idx = sorted(bad)
    q[idx, rng.integers(0, 3)] = rng.choice([np.nan, np.inf, -np.inf])
    on, d, face = closest_points(ellipsoid.vertices, ellipsoid.faces, q)
    keep = np.setdiff1d(np.arange(20), idx)
    assert np.isnan(on[idx]).all() and np.isnan(d[idx]).all() and (face[idx] == -1).all()
    assert np.array_equal(on[keep], ref[0][keep]) and np.array_equal(d[keep], ref[1][keep])
    assert np.array_equal(face[keep], ref[2][keep])


def test_sign_at_vertices_and_edges(ellipsoid: trimesh.Trimesh) -> None:
    v = np.asarray(ellipsoid.vertices)
    edges = np.asarray(ellipsoid.edges_unique)
    mids = v[edges].mean(axis=1)
    for pts in (v, mids):
        _, out, _ = closest_points(ellipsoid.vertices, ellipsoid.faces, pts * 1.002)
        _, inn, _ = closest_points(ellipsoid.vertices, ellipsoid.faces, pts * 0.998)
        assert (out > 0).all() and (inn < 0).all()


def test_query_is_cached_by_content(ellipsoid: trimesh.Trimesh) -> None:
    a = surface_query(ellipsoid.vertices, ellipsoid.faces)
    b = surface_query(np.array(ellipsoid.vertices), np.array(ellipsoid.faces))
    assert a is b
    assert isinstance(a, SurfaceQuery)
    with pytest.raises(ValueError):
        SurfaceQuery(np.zeros((3, 3)), np.zeros((0, 3), dtype=int))


def test_approximate_query_matches_exact_near_the_surface(ellipsoid: trimesh.Trimesh) -> None:
    q = surface_query(ellipsoid.vertices, ellipsoid.faces)
    rng = np.random.default_rng(3)
    p = np.asarray(ellipsoid.vertices)[rng.choice(len(ellipsoid.vertices), 100)] * rng.uniform(0.97, 1.03, (100, 1))
    assert np.allclose(q.query(p, exact=False)[1], q.query(p)[1], atol=1e-9)


def test_icp_recovers_a_small_motion_and_rejects_outliers(ellipsoid: trimesh.Trimesh) -> None:
    q = surface_query(ellipsoid.vertices, ellipsoid.faces)
    rng = np.random.default_rng(4)
    on = trimesh.sample.sample_surface(ellipsoid, 400, seed=4)[0]
    on = on[on[:, 2] > -0.01]
    truth = rigid_matrix(rotvec_to_matrix([0.05, -0.03, 0.04]), [0.004, -0.003, 0.002])
    inv = np.linalg.inv(truth)
    pts = on @ inv[:3, :3].T + inv[:3, 3]
    pts[:20] *= rng.uniform(1.1, 1.4, (20, 1))  # gross outliers, 9-36 mm off the surface
    res = robust_icp(pts, q.query, q.normals.__getitem__, np.eye(4))
    assert res.converged
    assert not res.inliers[:20].any()
    assert res.inliers[20:].all()
    clean = pts[20:] @ res.matrix[:3, :3].T + res.matrix[:3, 3]
    assert np.abs(clean - on[20:]).max() < 1e-4  # noise-free points: exact to 0.1 mm (common practice)
    unc = bootstrap_step(res.system, len(pts), clean)
    assert set(unc) >= {"translation_mm", "rotation_deg", "displacement_mm_95"}
    assert unc["translation_mm"] < 0.1


@settings(max_examples=10, deadline=None)
@given(seed=seeds)
def test_signed_distance_is_invariant_under_rigid_motion(ellipsoid: trimesh.Trimesh, seed: int) -> None:
    rng = np.random.default_rng(seed)
    m = rigid_matrix(Rotation.random(random_state=seed).as_matrix(), rng.normal(0, 0.1, 3))
    p = rng.normal(0, 0.08, (40, 3))
    _, d0, f0 = closest_points(ellipsoid.vertices, ellipsoid.faces, p)
    moved_v = np.asarray(ellipsoid.vertices) @ m[:3, :3].T + m[:3, 3]
    _, d1, _ = closest_points(moved_v, ellipsoid.faces, p @ m[:3, :3].T + m[:3, 3])
    assert np.allclose(d0, d1, atol=1e-12)
