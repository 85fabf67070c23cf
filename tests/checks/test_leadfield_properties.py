"""Property tests (hypothesis) of the linear-inverse kernels behind the passport."""
from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from prep.geometry.linear_inverse import (effective_rank, filter_factors, psf_metrics, resolution_diagonal,
                                          source_depth, thin_svd, tikhonov_lambda2)

shapes = st.tuples(st.integers(2, 12), st.integers(2, 60), st.integers(0, 2 ** 32 - 1))


@settings(max_examples=40, deadline=None)
@given(shapes)
def test_thin_svd_matches_numpy(shape):
    n, m, seed = shape
    a = np.random.default_rng(seed).normal(size=(n, m))
    u, s, vt = thin_svd(a)
    np.testing.assert_allclose(s, np.linalg.svd(a, compute_uv=False), rtol=1e-10, atol=1e-12)  # numpy
    np.testing.assert_allclose((u * s) @ vt, a, atol=1e-10)


@settings(max_examples=30, deadline=None)
@given(shapes, st.integers(1, 70), st.floats(0.5, 100.0))
def test_blocked_psf_metrics_equal_full_resolution_matrix(shape, chunk, snr):
    n, m, seed = shape
    rng = np.random.default_rng(seed)
    a = rng.normal(size=(n, m))
    pos = rng.normal(size=(m, 3))
    _u, s, vt = thin_svd(a)
    f = filter_factors(s, tikhonov_lambda2(s, n, snr))
    r = vt.T @ (f[:, None] * vt)  # the full matrix, small here (Hauk, Wakeman & Henson 2011)
    d = np.linalg.norm(pos[:, None] - pos[None], axis=2)
    ple, sd = psf_metrics(vt, f, pos, chunk=chunk)
    np.testing.assert_allclose(ple, d[np.argmax(r ** 2, axis=0), np.arange(m)], atol=1e-12)
    np.testing.assert_allclose(sd, np.sqrt((d ** 2 * r ** 2).sum(0) / (r ** 2).sum(0)), rtol=1e-6, atol=1e-9)
    np.testing.assert_allclose(resolution_diagonal(vt, f), np.diag(r), rtol=1e-10, atol=1e-14)


@settings(max_examples=30, deadline=None)
@given(st.lists(st.floats(1e-6, 1e3), min_size=2, max_size=40), st.floats(0.1, 1e3))
def test_effective_rank_is_monotone_in_snr(values, snr):
    s = np.sort(np.asarray(values))[::-1]
    low, _ = effective_rank(s, len(s), snr)
    high, _ = effective_rank(s, len(s), snr * 10)
    assert 0 <= low <= high <= len(s)


@settings(max_examples=30, deadline=None)
@given(st.integers(0, 2 ** 32 - 1))
def test_hull_depth_never_exceeds_distance_to_a_hull_vertex(seed):
    from scipy.spatial import ConvexHull

    rng = np.random.default_rng(seed)
    sensors = rng.normal(size=(12, 3))
    src = rng.normal(size=(20, 3)) * 0.3
    hull = source_depth(src, sensors, "hull")
    verts = sensors[ConvexHull(sensors).vertices]  # scipy reference hull
    nearest_vertex = np.linalg.norm(src[:, None] - verts[None], axis=2).min(axis=1)
    assert np.all(hull >= 0) and np.all(hull <= nearest_vertex + 1e-12)
