"""Built-in plugin ``check_leadfield``: the lead-field conditioning checks (the passport).

Six checks of target ``"leadfield"``, each ``run(leadfield=, sensor_positions=, **options)
-> CheckReport``. Fixed-orientation lead fields are (n_sensors, n_sources); free
ones are handled column-wise with the three components of a source together.
Method notes, thresholds and their sources: ``docs/passport.md``.
"""
from __future__ import annotations

from typing import Any

import numpy as np
from scipy.spatial import cKDTree

from prep import Check, CheckReport, Finding, LeadField, hookimpl
from prep.geometry.linear_inverse import (effective_rank, filter_factors, psf_metrics,
                                          source_depth, thin_svd, tikhonov_lambda2)

PLUGIN = "check_leadfield"


# ----------------------------------------------------------------- helpers
def _matrix(leadfield: LeadField) -> tuple[np.ndarray, int]:
    """(n_sensors, group * n_sources) and the group size (1 fixed, 3 free)."""
    return leadfield.as_2d(), 1 if leadfield.orientation == "fixed" else 3


def _finite(leadfield: LeadField) -> bool:
    return bool(np.isfinite(leadfield.matrix).all())


def _skipped(reason: str) -> CheckReport:
    return CheckReport(metrics={"skipped": reason})


_NONFINITE = "the lead field has non-finite entries (see leadfield.nonfinite)"


def _finding(code: str, severity: str, message: str, source: str, **kw: Any) -> Finding:
    return Finding(code=code, severity=severity, message=message, source=f"{PLUGIN}:{source}", **kw)


def _pct(values: np.ndarray, percentiles: tuple[float, ...], scale: float = 1e3) -> dict[str, float]:
    """Percentiles as ``{"p50_mm": ...}`` (values in metres, reported in mm)."""
    ok = values[np.isfinite(values)]
    if ok.size == 0:
        return {f"p{p:g}_mm": float("nan") for p in percentiles}
    return {f"p{p:g}_mm": float(np.percentile(ok, p) * scale) for p in percentiles}


# ----------------------------------------------------------------- checks
def check_finite(*, leadfield: LeadField, sensor_positions: np.ndarray, **_: Any) -> CheckReport:
    """``leadfield.nonfinite``: NaN or infinite entries, by sensor and source."""
    m, group = _matrix(leadfield)
    bad = ~np.isfinite(m)
    n_bad = int(bad.sum())
    metrics = {"n_nonfinite": n_bad, "n_entries": int(m.size)}
    if not n_bad:
        return CheckReport(metrics=metrics)
    rows = np.flatnonzero(bad.any(axis=1))
    cols = np.unique(np.flatnonzero(bad.any(axis=0)) // group)
    labels = [leadfield.sensor_labels[i] for i in rows]
    msg = (f"{n_bad} lead-field entries are NaN or infinite, in {len(rows)} sensor row(s) "
           f"({', '.join(labels[:8])}{'...' if len(labels) > 8 else ''}) and {len(cols)} source(s) "
           f"(first: {', '.join(str(c) for c in cols[:8])}); the other checks were skipped")
    return CheckReport(findings=(_finding("leadfield.nonfinite", "fail", msg, "finite",
                                          subjects=tuple(labels) + tuple(f"source {c}" for c in cols[:50]),
                                          values=metrics),), metrics=metrics)


def check_spectrum(*, leadfield: LeadField, sensor_positions: np.ndarray, snr: float,
                   max_condition: float, min_effective_rank: int, **_: Any) -> CheckReport:
    """Singular spectrum, numerical rank, condition number and effective rank at ``snr``.

    ``leadfield.rank-deficient`` when the numerical rank (numpy's default
    tolerance, s_max * max(shape) * eps) is below min(n_sensors - 1, n_columns):
    EEG loses one degree of freedom to the reference. ``leadfield.ill-conditioned``
    when s_1 / s_r (r the expected rank) exceeds ``max_condition`` or fewer than
    ``min_effective_rank`` singular values exceed the noise floor.
    """
    if not _finite(leadfield):
        return _skipped(_NONFINITE)
    m, _group = _matrix(leadfield)
    n, k = m.shape
    s = thin_svd(m, compute_uv=False)
    tol = s[0] * max(m.shape) * np.finfo(np.float64).eps if s.size else 0.0
    rank = int(np.count_nonzero(s > tol))
    expected = max(1, min(n - 1, k))
    s_r = s[expected - 1] if s.size >= expected else 0.0
    cond = float(s[0] / s_r) if s_r > 0 else float("inf")
    eff, floor = effective_rank(s, n, snr)
    metrics = {"n_sensors": n, "n_columns": k, "numerical_rank": rank, "expected_rank": expected,
               "condition_number": cond, "effective_rank": eff, "noise_floor": floor, "snr": snr,
               "singular_value_max": float(s[0]) if s.size else 0.0,
               "singular_value_min": float(s[-1]) if s.size else 0.0}
    found = []
    if rank < expected:
        found.append(_finding(
            "leadfield.rank-deficient", "fail",
            f"numerical rank {rank} is below the expected {expected} (n_sensors - 1 = {n - 1}, "
            f"{k} columns): some sensors carry no independent information (duplicates or a dead row?)",
            "spectrum", values={"numerical_rank": rank}, threshold=expected))
    if cond > max_condition or eff < min_effective_rank:
        found.append(_finding(
            "leadfield.ill-conditioned", "warn",
            f"condition number {cond:.3g} (limit {max_condition:.3g}); {eff} singular values above "
            f"the noise floor at SNR {snr:g} (need {min_effective_rank})", "spectrum",
            values={"condition_number": cond, "effective_rank": eff},
            threshold={"max_condition": max_condition, "min_effective_rank": min_effective_rank}))
    return CheckReport(findings=tuple(found), metrics=metrics, arrays={"singular_values": s})


def check_reference(*, leadfield: LeadField, sensor_positions: np.ndarray, max_column_sum: float,
                    **_: Any) -> CheckReport:
    """``leadfield.reference``: the lead field agrees with its stated reference.

    Average reference: every column sums to about zero, measured as
    |sum_i L_ij| / (sqrt(n) ||L_j||) (0 for a zero-mean column, 1 for a
    constant one). Single electrode: that electrode's row is zero. A zero
    row under average reference names the electrode the lead field was
    probably computed against.
    """
    if not _finite(leadfield):
        return _skipped(_NONFINITE)
    m, _group = _matrix(leadfield)
    n = m.shape[0]
    labels = leadfield.sensor_labels
    scale = float(np.abs(m).max()) if m.size else 0.0
    zero_rows = np.flatnonzero(np.abs(m).max(axis=1) <= max_column_sum * scale)
    zero_labels = [labels[i] for i in zero_rows]
    norms = np.linalg.norm(m, axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        rel = np.where(norms > 0, np.abs(m.sum(axis=0)) / (np.sqrt(n) * norms), 0.0)
    metrics: dict[str, Any] = {"reference": leadfield.reference, "max_relative_column_sum": float(rel.max()),
                               "zero_rows": zero_labels}
    found = []
    if leadfield.reference == "average":
        bad = int(np.count_nonzero(rel > max_column_sum))
        metrics["n_columns_not_zero_sum"] = bad
        if bad:
            hint = (f"; the row of {', '.join(zero_labels)} is zero, so it was probably computed against "
                    f"that electrode" if zero_labels else "")
            found.append(_finding(
                "leadfield.reference", "fail",
                f"{bad} of {m.shape[1]} columns do not sum to zero although the lead field is said to be "
                f"average-referenced (worst relative sum {rel.max():.3g}){hint}", "reference",
                subjects=tuple(zero_labels), values={"max_relative_column_sum": float(rel.max()),
                                                     "n_columns": bad},
                threshold=max_column_sum))
    elif leadfield.reference in labels:
        i = labels.index(leadfield.reference)
        if i not in zero_rows:
            found.append(_finding(
                "leadfield.reference", "fail",
                f"the lead field is said to be referenced to {leadfield.reference}, but that electrode's "
                f"row is not zero" + (f" ({', '.join(zero_labels)} is)" if zero_labels else ""),
                "reference", subjects=(leadfield.reference, *zero_labels), threshold=max_column_sum))
    return CheckReport(findings=tuple(found), metrics=metrics)


def check_sensors(*, leadfield: LeadField, sensor_positions: np.ndarray, max_row_correlation: float,
                  min_sensor_distance_m: float, **_: Any) -> CheckReport:
    """``leadfield.duplicate-sensors``: rows correlated above a limit or electrodes too close."""
    if not _finite(leadfield):
        return _skipped(_NONFINITE)
    m, _group = _matrix(leadfield)
    labels = leadfield.sensor_labels
    pos = np.asarray(sensor_positions, dtype=np.float64)
    centred = m - m.mean(axis=1, keepdims=True)
    norms = np.linalg.norm(centred, axis=1)
    live = norms > 0
    corr = np.zeros((m.shape[0], m.shape[0]))
    corr[np.ix_(live, live)] = (centred[live] @ centred[live].T) / np.outer(norms[live], norms[live])
    iu, ju = np.triu_indices(m.shape[0], k=1)
    hit = corr[iu, ju] > max_row_correlation
    pairs_corr = [(int(i), int(j)) for i, j in zip(iu[hit], ju[hit])]
    tree = cKDTree(pos) if len(pos) > 1 else None
    pairs_dist = sorted(tree.query_pairs(min_sensor_distance_m)) if tree is not None else []
    metrics = {"max_row_correlation": float(corr[iu, ju].max()) if iu.size else 0.0,
               "min_sensor_distance_m": float(tree.query(pos, k=2)[0][:, 1].min()) if tree is not None else None,
               "correlated_pairs": [[labels[i], labels[j]] for i, j in pairs_corr],
               "close_pairs": [[labels[i], labels[j]] for i, j in pairs_dist]}
    found = []
    for kind, pairs, limit in (("lead-field rows correlated above", pairs_corr, max_row_correlation),
                               ("electrodes closer than", pairs_dist, min_sensor_distance_m)):
        if pairs:
            names = [f"{labels[i]}/{labels[j]}" for i, j in pairs]
            unit = " m" if "closer" in kind else ""
            found.append(_finding(
                "leadfield.duplicate-sensors", "warn",
                f"{len(pairs)} pair(s) of {kind} {limit:g}{unit}: {', '.join(names[:10])}"
                f"{'...' if len(names) > 10 else ''}", "sensors",
                subjects=tuple(sorted({labels[k] for p in pairs for k in p})),
                values={"pairs": [[labels[i], labels[j]] for i, j in pairs]}, threshold=limit))
    return CheckReport(findings=tuple(found), metrics=metrics)


def check_depth(*, leadfield: LeadField, sensor_positions: np.ndarray, depth_measure: str,
                max_depth_ratio: float, **_: Any) -> CheckReport:
    """``leadfield.depth-bias``: column norm against source depth.

    The ratio of the median column norm of the most superficial decile of
    sources to that of the deepest decile. Depth is the distance to the
    nearest electrode (default) or to the electrodes' convex hull.
    """
    if not _finite(leadfield):
        return _skipped(_NONFINITE)
    m, group = _matrix(leadfield)
    norms = np.linalg.norm(m, axis=0)
    if group > 1:
        norms = np.sqrt((norms.reshape(-1, group) ** 2).mean(axis=1))
    depth = source_depth(leadfield.source_positions, sensor_positions, depth_measure)
    lo, hi = np.percentile(depth, [10, 90])
    sup = np.median(norms[depth <= lo])
    deep = np.median(norms[depth >= hi])
    ratio = float(sup / deep) if deep > 0 else float("inf")
    metrics = {"depth_measure": depth_measure, "ratio": ratio, "superficial_depth_m": float(lo),
               "deep_depth_m": float(hi), "superficial_median_norm": float(sup), "deep_median_norm": float(deep)}
    found = []
    if ratio > max_depth_ratio:
        found.append(_finding(
            "leadfield.depth-bias", "warn",
            f"the most superficial tenth of the sources (depth <= {lo * 1e3:.0f} mm) has {ratio:.3g} times "
            f"the lead-field norm of the deepest tenth (depth >= {hi * 1e3:.0f} mm); limit {max_depth_ratio:g}: "
            f"an unweighted minimum-norm estimate will favour superficial sources", "depth",
            values={"ratio": ratio}, threshold=max_depth_ratio))
    return CheckReport(findings=tuple(found), metrics=metrics,
                       arrays={"column_norm": norms, "source_depth": depth})


def check_resolution(*, leadfield: LeadField, sensor_positions: np.ndarray, snr: float, psf_chunk: int,
                     max_median_peak_error_m: float, max_median_dispersion_m: float, **_: Any) -> CheckReport:
    """``leadfield.resolution``: point-spread functions of Tikhonov minimum norm at ``snr``.

    lambda^2 = trace(L L^T) / (n_sensors SNR^2) (common practice); the
    resolution matrix is handled through the thin SVD, ``psf_chunk`` columns at a
    time (Hauk, Wakeman & Henson 2011; Hauk et al. 2019).
    """
    if not _finite(leadfield):
        return _skipped(_NONFINITE)
    m, group = _matrix(leadfield)
    _u, s, vt = thin_svd(m)
    lambda2 = tikhonov_lambda2(s, m.shape[0], snr)
    ple, sd = psf_metrics(vt, filter_factors(s, lambda2), leadfield.source_positions, group=group, chunk=psf_chunk)
    pcts = (10.0, 50.0, 90.0)
    metrics = {"snr": snr, "lambda2": lambda2, "peak_localisation_error": _pct(ple, pcts),
               "spatial_dispersion": _pct(sd, pcts), "n_sources": int(ple.size)}
    med_ple, med_sd = float(np.nanmedian(ple)), float(np.nanmedian(sd))
    found = []
    if med_ple > max_median_peak_error_m or med_sd > max_median_dispersion_m:
        found.append(_finding(
            "leadfield.resolution", "warn",
            f"minimum-norm point-spread functions at SNR {snr:g}: median peak localisation error "
            f"{med_ple * 1e3:.1f} mm (limit {max_median_peak_error_m * 1e3:.0f} mm), median spatial dispersion "
            f"{med_sd * 1e3:.1f} mm (limit {max_median_dispersion_m * 1e3:.0f} mm)", "resolution",
            values={"median_peak_error_m": med_ple, "median_dispersion_m": med_sd},
            threshold={"max_median_peak_error_m": max_median_peak_error_m,
                       "max_median_dispersion_m": max_median_dispersion_m}))
    return CheckReport(findings=tuple(found), metrics=metrics,
                       arrays={"peak_localisation_error": ple, "spatial_dispersion": sd})


# ----------------------------------------------------------------- registration
@hookimpl
def headprep_register_checks() -> list[Check]:
    return [
        Check(name="leadfield-finite", target="leadfield", run=check_finite,
              description="NaN or infinite lead-field entries"),
        Check(name="leadfield-spectrum", target="leadfield", run=check_spectrum,
              description="singular spectrum, rank, condition number, effective rank at an SNR",
              defaults={"snr": 3.0, "max_condition": 1e8, "min_effective_rank": 5}),
        Check(name="leadfield-reference", target="leadfield", run=check_reference,
              description="columns sum to zero under average reference; reference row zero",
              defaults={"max_column_sum": 1e-6}),
        Check(name="leadfield-sensors", target="leadfield", run=check_sensors,
              description="near-duplicate sensors: correlated rows or electrodes too close",
              defaults={"max_row_correlation": 0.999, "min_sensor_distance_m": 0.005}),
        Check(name="leadfield-depth", target="leadfield", run=check_depth,
              description="column norm against source depth (superficial / deep decile ratio)",
              defaults={"depth_measure": "nearest-sensor", "max_depth_ratio": 50.0}),
        Check(name="leadfield-resolution", target="leadfield", run=check_resolution,
              description="minimum-norm point-spread functions: peak localisation error and dispersion",
              defaults={"snr": 3.0, "psf_chunk": 1024, "max_median_peak_error_m": 0.03,
                        "max_median_dispersion_m": 0.04}),
    ]
