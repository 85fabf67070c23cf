"""Properties of the patch kernels (prep.geometry.patching) on random meshes and seeds."""
from __future__ import annotations

import numpy as np
import trimesh
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import sparse
from scipy.sparse import csgraph

from prep.geometry.meshstats import surface_area, vertex_areas, vertex_normals
from prep.geometry.patching import (assign_along_surface, count_for_spacing, decimation_seeds, patch_statistics,
                                    recentre_seeds)

BALL = trimesh.creation.icosphere(subdivisions=3, radius=0.05)  # 642 vertices


def _bumpy(seed: int) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    v = BALL.vertices * (1 + 0.2 * rng.random((len(BALL.vertices), 1)))
    return v, np.asarray(BALL.faces)


@settings(max_examples=30, deadline=None)
@given(st.integers(0, 10_000), st.integers(1, 120))
def test_partition_is_complete_connected_and_area_exact(seed: int, n_seeds: int) -> None:
    v, f = _bumpy(seed)
    seeds = np.sort(np.random.default_rng(seed + 1).choice(len(v), size=n_seeds, replace=False))
    patch, dist = assign_along_surface(v, f, seeds)
    assert (patch >= 0).all() and np.isfinite(dist).all()
    np.testing.assert_array_equal(patch[seeds], np.arange(n_seeds))  # a seed owns itself
    e = np.concatenate([f[:, [0, 1]], f[:, [1, 2]], f[:, [2, 0]]])
    e = e[patch[e[:, 0]] == patch[e[:, 1]]]
    n_pieces, _ = csgraph.connected_components(
        sparse.coo_matrix((np.ones(len(e)), (e[:, 0], e[:, 1])), shape=(len(v), len(v))), directed=False)
    assert n_pieces == n_seeds  # every patch is one connected piece of the surface
    areas, normals, spread = patch_statistics(v, f, patch, n_seeds)
    assert np.isclose(areas.sum(), surface_area(v, f), rtol=1e-9, atol=0)
    assert np.allclose(np.linalg.norm(normals, axis=1), 1.0) and (spread >= 0).all() and (spread <= np.pi).all()
    moved = recentre_seeds(v, patch, n_seeds, vertex_areas(v, f))
    np.testing.assert_array_equal(patch[moved], np.arange(n_seeds))  # new seeds stay in their patch


@settings(max_examples=20, deadline=None)
@given(st.integers(1, 300))
def test_decimation_seeds_near_target(n: int) -> None:
    seeds = decimation_seeds(BALL.vertices, BALL.faces, n)
    assert len(np.unique(seeds)) == len(seeds)
    assert abs(len(seeds) - n) <= max(3, 0.05 * n)


def test_single_patch_is_the_whole_surface() -> None:
    v, f = _bumpy(3)
    seeds = decimation_seeds(v, f, 1)
    assert len(seeds) == 1
    patch, _ = assign_along_surface(v, f, seeds)
    areas, normals, spread = patch_statistics(v, f, patch, 1)
    assert np.isclose(areas[0], surface_area(v, f), rtol=1e-12)
    # a closed surface's area-weighted normals cancel: the fallback still gives a unit normal
    assert np.isclose(np.linalg.norm(normals[0]), 1.0)


def test_flat_patch_has_zero_spread() -> None:
    plane = trimesh.creation.box(extents=(0.04, 0.04, 0.001))
    top = plane.faces[plane.face_normals[:, 2] > 0.9]
    patch = np.zeros(len(plane.vertices), np.int64)
    used = np.unique(top)
    patch[np.setdiff1d(np.arange(len(plane.vertices)), used)] = -1
    _, n, spread = patch_statistics(plane.vertices, top, patch, 1)
    np.testing.assert_allclose(n[0], [0, 0, 1], atol=1e-12)
    assert spread[0] < 1e-7
    assert vertex_normals(plane.vertices, top)[1][used].all()


def test_count_for_spacing_regular_grid() -> None:
    # a regular triangulation with 1 mm edges: one vertex per sqrt(3)/2 mm^2 (geometry of the triangular lattice)
    assert count_for_spacing(np.sqrt(3) / 2 * 1e-6 * 1000, 1.0) == 1000
