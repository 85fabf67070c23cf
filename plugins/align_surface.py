"""Built-in aligner ``surface``: robust ICP of head shape and electrodes onto the scalp.

Iterative closest point (Besl & McKay 1992) with the point-to-plane error
(Chen & Medioni 1992), Huber weights and rejection of gross outliers; the
fiducials, when marked in both frames, give the start (Horn 1987) and stay in
the fit as point-to-point terms weighted by their noise. Without anatomy-frame
fiducials, several starts are tried (principal axes of points and scalp, and
the head frame of the digitized fiducials), keeping those whose nose points
anterior (+y of the anatomy frame, assumed RAS-like), and the best fit wins.
"""
from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from prep import Aligner, Alignment, Finding, Sensors, Surface, Transform, hookimpl
from prep.geometry.registration import (absolute_orientation, bootstrap_step, rigid_matrix, robust_icp,
                                        rotvec_to_matrix)
from prep.geometry.surface import SurfaceQuery, surface_query
from prep.model import FIDUCIALS
from prep.placement import (digitizer_handedness, mirror_matrix, mirrored_finding, paired_fiducials,
                            too_few_points)

SOURCE = "aligner 'surface'"

DEFAULTS = {
    "use_electrodes": True,
    # fiducial standard deviation, weighting them against the surface points, whose
    # noise is estimated from the data, per class (common practice: landmarks are
    # digitized to a few mm); the scale estimate never goes below scale_floor_m
    "fiducial_sigma_m": 0.003,
    "scale_floor_m": 0.0005,
    # Huber (1964) tuning constant: 95 % efficiency under normal errors
    "huber_k": 1.345,
    # gross outliers: beyond max(reject_floor_m, reject_factor x robust scale) (common practice)
    "reject_factor": 3.0,
    "reject_floor_m": 0.005,
    "max_iter": 40,
    "min_points": 10,
    "n_boot": 200,
    "seed": 0,
    # RMS distance of the kept points after the fit (common practice)
    "misfit_warn_m": 0.004,
    "misfit_fail_m": 0.008,
    # share of head-shape points rejected above which the rejection is a warning
    "outlier_warn_fraction": 0.10,
}


def _principal_axes(points: np.ndarray) -> np.ndarray:
    """(3, 3) columns = principal axes, largest variance first, right-handed."""
    _, vecs = np.linalg.eigh(np.cov((points - points.mean(axis=0)).T))
    axes = vecs[:, ::-1]
    if np.linalg.det(axes) < 0:
        axes[:, 2] *= -1
    return axes


def _head_axes(fids: Mapping[str, np.ndarray]) -> np.ndarray | None:
    """(3, 3) columns = right, anterior, up of the digitized head frame; None without the three fiducials."""
    if not all(n in fids and np.isfinite(fids[n]).all() for n in FIDUCIALS):
        return None
    ex = fids["rpa"] - fids["lpa"]
    if not np.linalg.norm(ex) > 0:
        return None
    ex = ex / np.linalg.norm(ex)
    ey = fids["nasion"] - (fids["lpa"] + fids["rpa"]) / 2
    ey = ey - ex * (ey @ ex)
    if not np.linalg.norm(ey) > 0:
        return None
    ey = ey / np.linalg.norm(ey)
    return np.column_stack([ex, ey, np.cross(ex, ey)])


def _starts(points: np.ndarray, fids: Mapping[str, np.ndarray], vertices: np.ndarray) -> list[np.ndarray]:
    """Candidate (4, 4) starts when the anatomy frame has no fiducials."""
    rotations = []
    ap, av = _principal_axes(points), _principal_axes(vertices)
    for signs in ((1, 1, 1), (1, -1, -1), (-1, 1, -1), (-1, -1, 1)):
        rotations.append(av @ np.diag(signs) @ ap.T)
    head = _head_axes(fids)
    if head is not None:
        base = head.T  # head axes -> anatomy x, y, z
        for pitch in (-20.0, 0.0, 20.0):
            rotations.append(rotvec_to_matrix([np.radians(pitch), 0, 0]) @ base)
        nose = fids["nasion"] - points.mean(axis=0)
        rotations = [r for r in rotations if (r @ nose)[1] > 0] or rotations
    starts = []
    for rot in rotations:
        moved = points @ rot.T
        t = vertices.mean(axis=0) - moved.mean(axis=0)
        t[2] = vertices[:, 2].max() - moved[:, 2].max()  # the digitized cap sits on the crown
        starts.append(rigid_matrix(rot, t))
    return starts


def _facing(matrix: np.ndarray, points: np.ndarray, fids: Mapping[str, np.ndarray]) -> bool:
    """Whether the digitized nasion ends up anterior (+y) and the points above the ears (+z)."""
    if not all(n in fids for n in FIDUCIALS):
        return True
    lin = matrix[:3, :3]
    nose = lin @ (fids["nasion"] - points.mean(axis=0))
    up = lin @ (points.mean(axis=0) - (fids["lpa"] + fids["rpa"]) / 2)
    return bool(nose[1] > 0 and up[2] > 0)


def _search(points: np.ndarray, fids: Mapping[str, np.ndarray], q: SurfaceQuery, vertices: np.ndarray,
            icp_kw: dict) -> np.ndarray:
    sub = np.linspace(0, len(points) - 1, min(len(points), 150)).astype(int)  # an even subsample is enough here
    kw = {**icp_kw, "groups": icp_kw["groups"][sub], "max_iter": 15}
    found = []
    for start in _starts(points, fids, vertices):
        res = robust_icp(points[sub], q.query, q.normals.__getitem__, start, **kw)
        cost = float(np.mean(np.minimum(np.abs(res.distances), 0.02)))
        found.append((not _facing(res.matrix, points, fids), cost, len(found), res.matrix))
    # a symmetric head fits as well turned around: the nose decides, then the fit
    return min(found, key=lambda f: f[:3])[3]


def align(sensors: Sensors, scalp: Surface, anatomy_fiducials: Mapping[str, np.ndarray] | None, *,
          use_electrodes: bool = True, fiducial_sigma_m: float = 0.003, scale_floor_m: float = 0.0005,
          huber_k: float = 1.345, reject_factor: float = 3.0, reject_floor_m: float = 0.005,
          max_iter: int = 40, min_points: int = 10, n_boot: int = 200, seed: int = 0,
          misfit_warn_m: float = 0.004, misfit_fail_m: float = 0.008,
          outlier_warn_fraction: float = 0.10) -> Alignment:
    """Fit head-shape points and electrodes to the scalp surface.

    Returns
    -------
    Alignment
        ``headshape_inliers`` (m,) bool over ``sensors.headshape``; ``metrics``:
        ``rms_m`` (RMS signed distance of the kept points), ``fre_m`` (fiducial
        residual, if fiducials in both frames), ``n_points``, ``n_rejected``,
        ``iterations``, ``uncertainty`` (bootstrap over the fit points:
        ``translation_mm``, ``rotation_deg``, ``displacement_mm_95``).

    Raises
    ------
    UsageError
        ``input.too-few-points`` when neither three fiducials in both frames nor
        ``min_points`` surface points with digitized fiducials are available.
    """
    findings: list[Finding] = []
    pre = np.eye(4)
    if digitizer_handedness(sensors) < 0:
        pre = mirror_matrix()
        findings.append(mirrored_finding(SOURCE))
    lin = pre[:3, :3]
    hs_ok = np.isfinite(sensors.headshape).all(axis=1)
    hs = sensors.headshape[hs_ok] @ lin.T
    el = sensors.positions[sensors.eeg_mask] @ lin.T if use_electrodes else np.zeros((0, 3))
    el = el[np.isfinite(el).all(axis=1)]
    points = np.vstack([hs, el])
    fids = {k: v @ lin.T for k, v in sensors.fiducials.items()}
    pair = paired_fiducials(fids, anatomy_fiducials, required=len(points) < min_points)
    q = surface_query(scalp.vertices, scalp.faces)
    groups = np.r_[np.zeros(len(hs), dtype=np.int64), np.ones(len(el), dtype=np.int64)]
    icp_kw = {"landmark_sigma": fiducial_sigma_m, "groups": groups, "huber_k": huber_k,
              "reject_factor": reject_factor, "reject_floor": reject_floor_m, "scale_floor": scale_floor_m}
    if pair is not None:
        src, dst, names = pair
        rot, t, _ = absolute_orientation(src, dst)
        init = rigid_matrix(rot, t)
        icp_kw.update(landmarks=src, landmark_targets=dst)
        if len(points) < min_points:
            return _fiducials_only(sensors, scalp, init, pre, pair, len(points), findings)
    else:
        if len(points) < min_points or _head_axes(fids) is None:
            raise too_few_points(f"{len(points)} surface point(s) and no nasion/LPA/RPA in both frames",
                                 "give the anatomy fiducials (--fiducials) or digitize nasion, LPA and RPA "
                                 "and at least a few dozen head-shape points")
        names = ()
        findings.append(Finding(
            code="input.fiducial-missing", severity="warn", source=SOURCE,
            message="no fiducials in the anatomy frame: the start was searched from principal axes with the "
                    "nose taken from the digitized nasion (the anatomy frame is assumed to face +y); "
                    "check the picture"))
        init = _search(points, fids, q, scalp.vertices, icp_kw)
    res = robust_icp(points, q.query, q.normals.__getitem__, init, max_iter=max_iter, **icp_kw)
    matrix = res.matrix @ pre
    kept = res.inliers
    rms = float(np.sqrt(np.mean(res.distances[kept] ** 2))) if kept.any() else float("inf")
    n_hs = len(hs)
    inliers_hs = np.zeros(len(sensors.headshape), dtype=bool)
    inliers_hs[np.flatnonzero(hs_ok)] = kept[:n_hs]
    findings += _outlier_findings(inliers_hs, hs_ok, res.distances[:n_hs], outlier_warn_fraction)
    fre, per = None, {}
    if names:
        moved = src @ res.matrix[:3, :3].T + res.matrix[:3, 3]
        d = np.linalg.norm(moved - dst, axis=1)
        fre, per = float(np.sqrt(np.mean(d ** 2))), {n: float(x) for n, x in zip(names, d)}
    severity = ("fail" if rms > misfit_fail_m or kept.mean() < 0.5 else "warn" if rms > misfit_warn_m else None)
    if severity:
        findings.append(Finding(
            code="placement.misfit", severity=severity, source=SOURCE,
            message=f"the surface fit leaves {rms * 1e3:.1f} mm RMS between the kept points and the scalp "
                    f"({int((~kept).sum())} of {len(kept)} points rejected); check units, the scalp mesh "
                    "and the fiducials",
            values={"rms_m": rms, "kept_fraction": float(kept.mean())},
            threshold=misfit_fail_m if severity == "fail" else misfit_warn_m))
    at = el @ res.matrix[:3, :3].T + res.matrix[:3, 3] if len(el) else points @ res.matrix[:3, :3].T
    unc = bootstrap_step(res.system, len(points), at, n_boot=n_boot, seed=seed)
    unc["method"] = "bootstrap over the fit points of the final linearised step"
    metrics = {"rms_m": rms, "fre_m": fre, "fiducial_residuals_m": per, "n_points": len(points),
               "n_headshape": n_hs, "n_rejected": int((~kept).sum()), "robust_scale_m": res.scale,
               "iterations": res.iterations, "converged": res.converged, "uncertainty": unc,
               "mirrored": bool(pre[0, 0] < 0), "start": "fiducials" if names else "search"}
    transform = Transform(matrix=matrix, from_frame=sensors.frame, to_frame=scalp.frame, method="surface-fit",
                          residuals={"rms_m": rms, "fre_m": fre})
    return Alignment(transform=transform, findings=tuple(findings), headshape_inliers=inliers_hs, metrics=metrics)


def _fiducials_only(sensors: Sensors, scalp: Surface, init: np.ndarray, pre: np.ndarray, pair: tuple,
                    n_points: int, findings: list[Finding]) -> Alignment:
    """Too few surface points to fit: the fiducial alignment, said so."""
    src, dst, names = pair
    d = np.linalg.norm(src @ init[:3, :3].T + init[:3, 3] - dst, axis=1)
    fre = float(np.sqrt(np.mean(d ** 2)))
    findings = [*findings, Finding(
        code="input.too-few-points", severity="warn", source=SOURCE,
        message=f"only {n_points} head-shape point(s) and electrode(s): the surface fit was skipped and the "
                "fiducials alone give the transform")]
    transform = Transform(matrix=init @ pre, from_frame=sensors.frame, to_frame=scalp.frame, method="fiducials",
                          residuals={"fre_m": fre})
    return Alignment(transform=transform, findings=tuple(findings), headshape_inliers=None,
                     metrics={"rms_m": None, "fre_m": fre, "fiducial_residuals_m": dict(zip(names, d.tolist())),
                              "n_points": n_points, "start": "fiducials", "uncertainty": {},
                              "mirrored": bool(pre[0, 0] < 0)})


def _outlier_findings(inliers: np.ndarray, finite: np.ndarray, dist: np.ndarray, warn_fraction: float) -> list:
    bad = np.flatnonzero(finite & ~inliers)
    if not len(bad):
        return []
    frac = len(bad) / max(int(finite.sum()), 1)
    far = dict(zip(np.flatnonzero(finite).tolist(), dist.tolist()))
    return [Finding(
        code="placement.headshape-outliers", severity="warn" if frac > warn_fraction else "info", source=SOURCE,
        subjects=tuple(f"headshape {i}" for i in bad),
        message=f"{len(bad)} of {int(finite.sum())} head-shape points ({100 * frac:.0f} %) lie too far from the "
                "scalp and were left out of the fit",
        values={"indices": bad.tolist(), "distances_m": [far[i] for i in bad.tolist()], "fraction": frac},
        threshold=warn_fraction)]


@hookimpl
def headprep_register_aligners() -> list[Aligner]:
    return [Aligner(name="surface", align=align, defaults=dict(DEFAULTS),
                    description="robust point-to-plane ICP of head shape and electrodes onto the scalp")]
