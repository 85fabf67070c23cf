"""Resolution metrics and the reference check."""
from __future__ import annotations

import numpy as np
from inverse_solvers.frank_sphere import sphere_leadfield

from prep import LeadField, make_registry
from prep.geometry.linear_inverse import filter_factors, psf_metrics, thin_svd, tikhonov_lambda2
from prep_plugins import check_leadfield as cl


def _run(name, leadfield, sensors, **opts):
    reg = make_registry(entry_points=False, plugins=[cl])
    d = reg.get("check", name)
    return d.run(leadfield=leadfield, sensor_positions=sensors, **reg.options(d, opts, "test"))


def _lf(matrix, src, reference="average"):
    return LeadField(matrix=matrix, sensor_labels=[f"E{i + 1}" for i in range(matrix.shape[0])],
                     source_positions=src, source_normals=np.tile([0.0, 0, 1], (src.shape[0], 1)),
                     reference=reference)


def test_orthonormal_columns_resolve_perfectly():
    # L with orthonormal columns: L^T L = I, so R = diag(1/(1+lambda^2)) I: identity up to scale
    # (Hauk, Wakeman & Henson 2011: a resolution matrix equal to the identity means perfect resolution)
    rng = np.random.default_rng(0)
    q, _ = np.linalg.qr(rng.normal(size=(40, 25)))
    src = rng.normal(size=(25, 3)) * 0.05
    report = _run("leadfield-resolution", _lf(q, src), rng.normal(size=(40, 3)), snr=3.0)
    np.testing.assert_allclose(report.arrays["peak_localisation_error"], 0.0, atol=1e-12)
    np.testing.assert_allclose(report.arrays["spatial_dispersion"], 0.0, atol=1e-6)
    assert not report.findings


def test_blocked_metrics_equal_the_full_resolution_matrix():
    lf, el, src, nrm = sphere_leadfield(24, 120)
    u, s, vt = thin_svd(lf)
    f = filter_factors(s, tikhonov_lambda2(s, 24, 3.0))
    r = vt.T @ (f[:, None] * vt)  # full R: small enough here to form directly
    np.testing.assert_allclose(r, lf.T @ np.linalg.solve(lf @ lf.T + tikhonov_lambda2(s, 24, 3.0) * np.eye(24), lf),
                               atol=1e-9)  # R = L^T (L L^T + lambda^2 I)^-1 L (Hauk et al. 2011)
    d = np.linalg.norm(src[:, None] - src[None], axis=2)
    ple_ref = d[np.argmax(np.abs(r), axis=0), np.arange(120)]
    sd_ref = np.sqrt((d ** 2 * r ** 2).sum(axis=0) / (r ** 2).sum(axis=0))  # Molins et al. 2008
    for chunk in (1, 7, 1000):
        ple, sd = psf_metrics(vt, f, src, chunk=chunk)
        np.testing.assert_allclose(ple, ple_ref, atol=1e-12)
        np.testing.assert_allclose(sd, sd_ref, rtol=1e-8)


def test_free_orientation_groups_three_columns():
    lf, el, src, nrm = sphere_leadfield(24, 30)
    rng = np.random.default_rng(4)
    free = rng.normal(size=(24, 30, 3))
    free -= free.mean(axis=0)
    lfree = LeadField(matrix=free, sensor_labels=[f"E{i + 1}" for i in range(24)], source_positions=src)
    report = _run("leadfield-resolution", lfree, el)
    assert report.arrays["peak_localisation_error"].shape == (30,)
    assert report.metrics["n_sources"] == 30


def test_average_reference_check_catches_a_single_electrode_reference():
    lf_avg, el, src, nrm = sphere_leadfield(32, 200, reference="average")
    assert not _run("leadfield-reference", _lf(lf_avg, src), el).findings
    lf_e5, *_ = sphere_leadfield(32, 200, reference=4)  # computed against electrode E5
    report = _run("leadfield-reference", _lf(lf_e5, src, reference="average"), el)
    assert [(f.code, f.severity) for f in report.findings] == [("leadfield.reference", "fail")]
    assert report.findings[0].subjects == ("E5",)
    assert "E5" in report.findings[0].message
    # the same matrix is consistent when it says so
    assert not _run("leadfield-reference", _lf(lf_e5, src, reference="E5"), el).findings
    assert _run("leadfield-reference", _lf(lf_e5, src, reference="E7"), el).findings
