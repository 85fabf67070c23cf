"""Geometry kernels of prep.geometry.meshstats against trimesh (reference library) and invariants."""
from __future__ import annotations

import numpy as np
import pytest
import trimesh
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy.spatial.transform import Rotation

from prep.geometry import meshstats as ms
from prep.geometry.meshcheck import signed_volume


@pytest.fixture(scope="module")
def bumpy() -> trimesh.Trimesh:
    """An irregular closed surface: an icosphere with radial bumps (invented test shape)."""
    m = trimesh.creation.icosphere(subdivisions=4, radius=0.07)
    v = m.vertices * (1 + 0.08 * np.sin(5 * m.vertices[:, [0]] / 0.07) * np.cos(3 * m.vertices[:, [1]] / 0.07))
    return trimesh.Trimesh(v, m.faces, process=False)


def test_face_areas_match_trimesh(bumpy) -> None:
    np.testing.assert_allclose(ms.face_areas(bumpy.vertices, bumpy.faces), bumpy.area_faces, rtol=1e-12)


def test_vertex_areas_match_trimesh_incidence(bumpy) -> None:
    # reference: trimesh's vertex-face incidence matrix times a third of trimesh's face areas
    ref = bumpy.faces_sparse @ (bumpy.area_faces / 3.0)
    np.testing.assert_allclose(ms.vertex_areas(bumpy.vertices, bumpy.faces), ref, rtol=1e-12)


def test_vertex_normals_match_trimesh(bumpy) -> None:
    ours, valid = ms.vertex_normals(bumpy.vertices, bumpy.faces)
    assert valid.all()
    # exactly trimesh's mean of area-scaled face normals (trimesh.geometry.mean_vertex_normals)
    ref = trimesh.geometry.mean_vertex_normals(len(bumpy.vertices), bumpy.faces,
                                               bumpy.face_normals * bumpy.area_faces[:, None])
    np.testing.assert_allclose(ours, ref, atol=1e-12)
    # and close to trimesh's own angle-weighted normals (LIBRARIES.md: ~0.06 deg on average)
    ang = np.degrees(np.arccos(np.clip(np.einsum("ij,ij->i", ours, bumpy.vertex_normals), -1, 1)))
    assert ang.mean() < 0.5 and ang.max() < 3.0


def test_face_normals_match_trimesh(bumpy) -> None:
    n, valid = ms.face_normals(bumpy.vertices, bumpy.faces)
    assert valid.all()
    np.testing.assert_allclose(n, bumpy.face_normals, atol=1e-12)


@pytest.mark.parametrize("sub", [0, 1, 2, 3])
def test_euler_of_spheres_and_torus(sub: int) -> None:
    m = trimesh.creation.icosphere(subdivisions=sub)
    assert ms.euler_characteristic(len(m.vertices), m.faces) == 2  # sphere (Euler 1758)
    t = trimesh.creation.torus(0.05, 0.02, major_sections=16 + 4 * sub, minor_sections=8 + 2 * sub)
    assert ms.euler_characteristic(len(t.vertices), t.faces) == 0  # torus


def test_edge_counts_closed_and_open() -> None:
    m = trimesh.creation.icosphere(subdivisions=2)
    e = ms.edge_counts(m.faces)
    assert (e.count == 2).all() and not e.same_direction.any()
    assert len(e.unique) == len(m.edges_unique)  # reference: trimesh
    e2 = ms.edge_counts(m.faces[1:])
    assert (e2.count == 1).sum() == 3


def test_degenerate_faces_mask() -> None:
    v = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [2, 0, 0]], float) * 0.01
    f = np.array([[0, 1, 2], [0, 1, 3], [0, 0, 2]])  # second is collinear, third repeats a vertex
    np.testing.assert_array_equal(ms.degenerate_faces(v, f), [False, True, True])


def test_components_count_pieces() -> None:
    a = trimesh.creation.icosphere(subdivisions=1)
    f = np.vstack([a.faces, a.faces + len(a.vertices)])
    n, lab = ms.components(2 * len(a.vertices), f)
    assert n == 2 and len(np.unique(lab[: len(a.vertices)])) == 1


finite = st.floats(-0.2, 0.2, allow_nan=False, allow_infinity=False)


@settings(max_examples=60, deadline=None)
@given(arrays(np.float64, (12, 3), elements=finite), st.integers(0, 2**32 - 1))
def test_area_partition_and_rigid_invariance(points, seed) -> None:
    """Vertex areas sum to the face areas; areas and normals follow a rigid motion."""
    rng = np.random.default_rng(seed)
    faces = rng.integers(0, len(points), size=(20, 3))
    va = ms.vertex_areas(points, faces)
    assert np.isclose(va.sum(), ms.face_areas(points, faces).sum(), rtol=1e-12, atol=1e-18)
    assert (va >= 0).all()
    rot = Rotation.random(random_state=seed % (2**31)).as_matrix()
    moved = points @ rot.T + rng.normal(size=3)
    np.testing.assert_allclose(ms.vertex_areas(moved, faces), va, rtol=1e-9, atol=1e-15)
    n0, ok0 = ms.vertex_normals(points, faces)
    n1, _ = ms.vertex_normals(moved, faces)
    cross = ms.face_cross(points, faces)
    raw = np.stack([np.bincount(faces.ravel(), weights=np.repeat(cross[:, j], 3), minlength=len(points))
                    for j in range(3)], axis=1)
    strong = np.linalg.norm(raw, axis=1) > 1e-6  # m^2: well above rounding of the cancelling sums
    np.testing.assert_allclose(n1[strong], n0[strong] @ rot.T, atol=1e-6)
    assert np.allclose(np.linalg.norm(n0[ok0], axis=1), 1.0)


@settings(max_examples=40, deadline=None)
@given(st.floats(0.01, 0.2), st.floats(0.5, 2.0), st.floats(0.5, 2.0), st.integers(1, 3))
def test_signed_volume_of_ellipsoids(r, sy, sz, sub) -> None:
    """Divergence-theorem volume equals trimesh's volume; flipping the winding flips the sign."""
    m = trimesh.creation.icosphere(subdivisions=sub, radius=r)
    v = m.vertices * [1.0, sy, sz]
    ref = trimesh.Trimesh(v, m.faces, process=False).volume  # reference library
    assert np.isclose(signed_volume(v, m.faces), ref, rtol=1e-10)
    assert np.isclose(signed_volume(v, m.faces[:, ::-1]), -ref, rtol=1e-10)
