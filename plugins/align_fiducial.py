"""Built-in aligner ``fiducial``: closed-form absolute orientation on nasion, LPA and RPA.

The least-squares rotation and translation (optionally an isotropic scale)
between the digitized fiducials and those marked in the anatomy frame
(Horn 1987; Umeyama 1991). The uncertainty is a parametric bootstrap: the
fiducials are perturbed by their stated localisation noise and refitted.
"""
from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from prep import Aligner, Alignment, Finding, Sensors, Surface, Transform, hookimpl
from prep.geometry.registration import absolute_orientation, rigid_matrix, rotation_angle_deg
from prep.geometry.surface import closest_points
from prep.placement import digitizer_handedness, fit_points, mirror_matrix, mirrored_finding, paired_fiducials

DEFAULTS = {
    "scale": False,
    # digitizer localisation of anatomical landmarks: a few mm (common practice)
    "fiducial_noise_m": 0.003,
    # residual of the fiducial fit that earns a warning / a failure (common practice)
    "fre_warn_m": 0.005,
    "fre_fail_m": 0.010,
    "n_boot": 200,
    "seed": 0,
}


def _fiducial_bootstrap(src: np.ndarray, dst: np.ndarray, noise: float, n_boot: int, seed: int,
                        at: np.ndarray, scale: bool) -> dict[str, float]:
    rng = np.random.default_rng(seed)
    rot0, t0, s0 = absolute_orientation(src, dst, scale=scale)
    centre = at.mean(axis=0)
    base = s0 * rot0 @ centre + t0
    angles = np.empty(n_boot)
    shifts = np.empty(n_boot)
    for b in range(n_boot):
        rot, t, s = absolute_orientation(src + rng.normal(0, noise, src.shape),
                                         dst + rng.normal(0, noise, dst.shape), scale=scale)
        angles[b] = rotation_angle_deg(rot @ rot0.T)
        shifts[b] = np.linalg.norm(s * rot @ centre + t - base)
    return {"translation_mm": float(np.sqrt(np.mean(shifts ** 2)) * 1e3),
            "rotation_deg": float(np.sqrt(np.mean(angles ** 2))), "n_boot": int(n_boot),
            "method": "parametric bootstrap over the fiducials"}


def align(sensors: Sensors, scalp: Surface, anatomy_fiducials: Mapping[str, np.ndarray] | None, *,
          scale: bool = False, fiducial_noise_m: float = 0.003, fre_warn_m: float = 0.005,
          fre_fail_m: float = 0.010, n_boot: int = 200, seed: int = 0) -> Alignment:
    """Align the digitized fiducials onto the anatomy fiducials.

    Returns
    -------
    Alignment
        ``metrics``: ``fre_m`` (RMS fiducial residual), ``rms_m`` (RMS scalp
        distance of head shape and electrodes), ``scale``, ``uncertainty``.

    Raises
    ------
    UsageError
        ``input.too-few-points``: fewer than three fiducials in both frames, or collinear.
    """
    findings: list[Finding] = []
    pre = np.eye(4)
    if digitizer_handedness(sensors) < 0:
        pre = mirror_matrix()
        findings.append(mirrored_finding("aligner 'fiducial'"))
    fids = {k: v @ pre[:3, :3].T for k, v in sensors.fiducials.items()}
    src, dst, names = paired_fiducials(fids, anatomy_fiducials)
    rot, t, s = absolute_orientation(src, dst, scale=scale)
    matrix = rigid_matrix(rot, t, s) @ pre
    res = src @ (s * rot).T + t - dst
    per = np.linalg.norm(res, axis=1)
    fre = float(np.sqrt(np.mean(per ** 2)))
    pts = fit_points(sensors)
    moved = pts @ matrix[:3, :3].T + matrix[:3, 3]
    rms = float(np.sqrt(np.mean(closest_points(scalp.vertices, scalp.faces, moved)[1] ** 2))) if len(pts) else None
    at = moved if len(moved) else dst
    unc = _fiducial_bootstrap(src, dst, fiducial_noise_m, n_boot, seed, at, scale)
    severity = "fail" if fre > fre_fail_m else "warn" if fre > fre_warn_m else None
    if severity:
        worst = names[int(np.argmax(per))]
        findings.append(Finding(
            code="placement.misfit", severity=severity, subjects=names, source="aligner 'fiducial'",
            message=f"the fiducials disagree by {fre * 1e3:.1f} mm RMS after the best rigid fit "
                    f"(largest: {worst}, {per.max() * 1e3:.1f} mm); check where they were marked",
            values={"fre_m": fre, **{f"{n}_m": float(d) for n, d in zip(names, per)}},
            threshold=fre_fail_m if severity == "fail" else fre_warn_m))
    metrics = {"fre_m": fre, "rms_m": rms, "scale": s, "fiducials": list(names),
               "fiducial_residuals_m": {n: float(d) for n, d in zip(names, per)}, "uncertainty": unc,
               "mirrored": bool(pre[0, 0] < 0)}
    transform = Transform(matrix=matrix, from_frame=sensors.frame, to_frame=scalp.frame, method="fiducials",
                          residuals={"fre_m": fre, "rms_m": rms})
    return Alignment(transform=transform, findings=tuple(findings), headshape_inliers=None, metrics=metrics)


@hookimpl
def headprep_register_aligners() -> list[Aligner]:
    return [Aligner(name="fiducial", align=align, defaults=dict(DEFAULTS),
                    description="closed-form absolute orientation of nasion, LPA and RPA (Horn 1987)")]
