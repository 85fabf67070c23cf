"""Lead-field checks: spectrum, rank, conditioning, finiteness, duplicates, depth."""
from __future__ import annotations

import numpy as np
import pytest
from inverse_solvers.frank_sphere import sphere_leadfield

from prep import LeadField, make_registry
from prep.geometry.linear_inverse import effective_rank, source_depth, thin_svd, tikhonov_lambda2
from prep_plugins import check_leadfield as cl


def _lf(matrix, sources=None, reference="average"):
    n, m = matrix.shape[:2]
    src = np.random.default_rng(1).normal(size=(m, 3)) * 0.03 if sources is None else sources
    nrm = np.tile([0.0, 0.0, 1.0], (m, 1)) if matrix.ndim == 2 else None
    return LeadField(matrix=matrix, sensor_labels=[f"E{i + 1}" for i in range(n)], source_positions=src,
                     source_normals=nrm, reference=reference)


def _known_spectrum(s, n_cols=400, seed=0):
    """U diag(s) V^T with random orthonormal U, V: its singular values are s exactly."""
    rng = np.random.default_rng(seed)
    u, _ = np.linalg.qr(rng.normal(size=(len(s), len(s))))
    v, _ = np.linalg.qr(rng.normal(size=(n_cols, len(s))))
    return (u * s) @ v.T


def _run(name, leadfield, sensors=None, **opts):
    reg = make_registry(entry_points=False, plugins=[cl])
    d = reg.get("check", name)
    sensors = np.random.default_rng(2).normal(size=(leadfield.n_sensors, 3)) if sensors is None else sensors
    return d.run(leadfield=leadfield, sensor_positions=sensors, **reg.options(d, opts, "test"))


def test_singular_values_match_numpy_svd():
    lf, *_ = sphere_leadfield(32, 500)
    report = _run("leadfield-spectrum", _lf(lf))
    ref = np.linalg.svd(lf, compute_uv=False)  # reference: numpy.linalg.svd
    np.testing.assert_allclose(report.arrays["singular_values"], ref, rtol=1e-10, atol=1e-12 * ref[0])
    assert report.metrics["numerical_rank"] == 31 == report.metrics["expected_rank"]  # average reference: n - 1


def test_thin_svd_factors_reconstruct_and_match_numpy():
    a = np.random.default_rng(3).normal(size=(20, 300))
    u, s, vt = thin_svd(a)
    np.testing.assert_allclose(s, np.linalg.svd(a, compute_uv=False), rtol=1e-12)  # numpy.linalg.svd
    np.testing.assert_allclose((u * s) @ vt, a, atol=1e-12)
    np.testing.assert_allclose(vt @ vt.T, np.eye(20), atol=1e-12)


def test_effective_rank_of_a_known_spectrum():
    s = np.logspace(0, -6, 30)  # synthetic: singular values 1 ... 1e-6, log-spaced
    a = _known_spectrum(s)
    snr = 10.0
    floor = np.sqrt(np.sum(s ** 2) / (30 * snr ** 2))  # lambda from trace(L L^T) / (n SNR^2), common practice
    expected = int(np.sum(s > floor))
    assert effective_rank(s, 30, snr) == (expected, pytest.approx(floor))
    report = _run("leadfield-spectrum", _lf(a), snr=snr, min_effective_rank=1)
    assert report.metrics["effective_rank"] == expected
    assert 0 < expected < 30
    assert tikhonov_lambda2(s, 30, snr) == pytest.approx(floor ** 2)


def test_condition_number_and_ill_conditioned_finding():
    s = np.logspace(0, -10, 20)  # condition number 1e10 over the first n - 1 = 19 values: s[0]/s[18]
    report = _run("leadfield-spectrum", _lf(_known_spectrum(s)), max_condition=1e8)
    assert report.metrics["condition_number"] == pytest.approx(s[0] / s[18], rel=1e-3)
    assert [f.code for f in report.findings] == ["leadfield.ill-conditioned"]


def test_rank_deficient_when_two_rows_repeat():
    a = _known_spectrum(np.linspace(1, 0.5, 12))
    a[5] = a[4]
    a[7] = a[4]
    report = _run("leadfield-spectrum", _lf(a), min_effective_rank=1)
    assert report.metrics["numerical_rank"] == 10
    assert "leadfield.rank-deficient" in [f.code for f in report.findings]


def test_nonfinite_entries_fail_and_other_checks_skip():
    a = np.ones((6, 10))
    a[2, 3] = np.nan
    lf = _lf(a)
    report = _run("leadfield-finite", lf)
    assert [(f.code, f.severity) for f in report.findings] == [("leadfield.nonfinite", "fail")]
    assert "E3" in report.findings[0].subjects
    assert "skipped" in _run("leadfield-resolution", lf).metrics


def test_duplicate_sensors_by_correlation_and_distance():
    lf, el, src, nrm = sphere_leadfield(24, 200)
    lf = lf.copy()
    lf[3] = lf[9] * 1.0001  # synthetic duplicate row (correlation 1)
    el = el.copy()
    el[20] = el[21] + [0.002, 0.0, 0.0]  # 2 mm apart: below the 5 mm limit of the issue
    report = _run("leadfield-sensors", _lf(lf, src), el)
    assert report.metrics["correlated_pairs"] == [["E4", "E10"]]
    assert report.metrics["close_pairs"] == [["E21", "E22"]]
    assert [f.code for f in report.findings] == ["leadfield.duplicate-sensors"] * 2


def test_depth_profile_on_the_sphere_and_threshold():
    lf, el, src, nrm = sphere_leadfield(32, 600)
    report = _run("leadfield-depth", _lf(lf, src), el)
    # superficial sources are stronger on a sphere (potential falls with distance): from memory
    assert report.metrics["ratio"] > 1.0
    assert not report.findings
    strict = _run("leadfield-depth", _lf(lf, src), el, max_depth_ratio=1.0)
    assert [f.code for f in strict.findings] == ["leadfield.depth-bias"]


def test_source_depth_measures():
    sensors = np.array([[1.0, 0, 0], [-1, 0, 0], [0, 1, 0], [0, -1, 0], [0, 0, 1], [0, 0, -1]])
    src = np.array([[0.0, 0, 0], [0.5, 0, 0]])
    np.testing.assert_allclose(source_depth(src, sensors), [1.0, 0.5])  # geometry by hand
    np.testing.assert_allclose(source_depth(src, sensors, "hull"), [1 / np.sqrt(3), 0.5 / np.sqrt(3)])
