"""Built-in check ``placement``: every electrode against the scalp and against its label.

- distance: signed distance to the scalp (outside positive): lifted electrodes
  (``placement.off-scalp``), electrodes below the skin (``placement.inside-scalp``),
  and a montage that sits off the scalp as a whole (``placement.misfit``);
- labels: a left-right flipped montage (``placement.mirrored``: odd labels on the
  right, even on the left), and exchanged labels (``placement.swapped``): the
  digitized positions are matched to the reference layout by an optimal
  assignment (Kuhn 1955; scipy ``linear_sum_assignment``) after a robust
  similarity fit of the layout to the positions (Umeyama 1991), and each cycle
  of the assignment whose members moved far and clearly closer to another
  label's place is reported.
"""
from __future__ import annotations

import re
from collections.abc import Mapping

import numpy as np
from scipy.optimize import linear_sum_assignment

from prep import Check, CheckReport, Finding, Sensors, Surface, hookimpl
from prep.geometry.registration import absolute_orientation
from prep.geometry.surface import closest_points

SOURCE = "check 'placement'"

DEFAULTS = {
    # lifted electrodes: gel and electrode height are a few mm; beyond 10 mm the
    # electrode is off the skin (common practice)
    "off_scalp_warn_m": 0.006,
    "off_scalp_fail_m": 0.010,
    # below the skin by more than the digitizer noise (common practice)
    "inside_scalp_warn_m": 0.006,
    # the whole montage off the scalp: median |distance| (common practice)
    "misfit_median_m": 0.006,
    # swaps: each member at least this far from its own label's place, and at most
    # swap_ratio times that distance from the place it was matched to (common practice)
    "swap_min_shift_m": 0.012,
    "swap_ratio": 0.5,
    # mirror: share of lateral electrodes (|x| > lateral_min_m) on the wrong side (common practice)
    "mirror_fraction": 0.8,
    "lateral_min_m": 0.01,
}

_POSITION = re.compile(r"^([A-Za-z]+?)(z|Z|\d{1,2})(h|H)?$")


def label_side(label: str) -> int:
    """-1 for a left label (odd number), +1 for right (even), 0 midline (``z``) or not a system label."""
    m = _POSITION.match(label)
    if not m or m.group(2) in ("z", "Z"):
        return 0
    return -1 if int(m.group(2)) % 2 else 1


def counterpart(label: str) -> str | None:
    """The mirror label (``C3`` <-> ``C4``, ``Fp1`` <-> ``Fp2``); None for midline or other labels."""
    m = _POSITION.match(label)
    if not m or m.group(2) in ("z", "Z"):
        return None
    k = int(m.group(2))
    return f"{m.group(1)}{k + 1 if k % 2 else k - 1}{m.group(3) or ''}"


def _lateral_axis(fiducials: Mapping[str, np.ndarray] | None, reference: Sensors | None,
                  ) -> tuple[np.ndarray, np.ndarray] | None:
    """(origin, unit right-pointing axis) from LPA/RPA, else from the reference layout's label sides."""
    if fiducials and "lpa" in fiducials and "rpa" in fiducials:
        lpa, rpa = np.asarray(fiducials["lpa"]), np.asarray(fiducials["rpa"])
        if np.linalg.norm(rpa - lpa) > 0:
            return (lpa + rpa) / 2, (rpa - lpa) / np.linalg.norm(rpa - lpa)
    if reference is not None:
        sides = np.array([label_side(lab) for lab in reference.labels])
        pos = reference.positions
        if (sides > 0).any() and (sides < 0).any():
            axis = pos[sides > 0].mean(axis=0) - pos[sides < 0].mean(axis=0)
            return pos.mean(axis=0), axis / np.linalg.norm(axis)
    return None


def _mirror(labels: tuple[str, ...], pos: np.ndarray, frame: tuple[np.ndarray, np.ndarray] | None,
            fraction: float, lateral_min: float) -> Finding | None:
    if frame is None:
        return None
    origin, axis = frame
    x = (pos - origin) @ axis
    sides = np.array([label_side(lab) for lab in labels])
    use = (sides != 0) & (np.abs(x) > lateral_min) & np.isfinite(x)
    if use.sum() < 4:
        return None
    wrong = use & (np.sign(x) != sides)
    share = float(wrong.sum() / use.sum())
    if share < fraction:
        return None
    return Finding(code="placement.mirrored", severity="fail", source=SOURCE,
                   subjects=tuple(lab for lab, w in zip(labels, wrong) if w),
                   message=f"the montage is left-right mirrored: {wrong.sum()} of {use.sum()} lateral electrodes "
                           "sit on the side opposite to their label (odd numbers belong on the left); check the "
                           "digitizer's axes or how the labels were assigned",
                   values={"wrong_side_fraction": share, "n_lateral": int(use.sum())}, threshold=fraction)


def _robust_similarity(src: np.ndarray, dst: np.ndarray) -> np.ndarray:
    """``src`` moved onto ``dst`` by a similarity fitted with trimming (pairs far off are left out)."""
    keep = np.ones(len(src), dtype=bool)
    moved = src
    for _ in range(4):
        rot, t, s = absolute_orientation(src[keep], dst[keep], scale=True)
        moved = src @ (s * rot).T + t
        r = np.linalg.norm(moved - dst, axis=1)
        new = r <= max(3.0 * 1.4826 * np.median(r), 0.005)
        if new.sum() < 4 or (new == keep).all():
            break
        keep = new
    return moved


def _cycles(perm: np.ndarray) -> list[list[int]]:
    seen = np.zeros(len(perm), dtype=bool)
    out = []
    for i in range(len(perm)):
        if seen[i] or perm[i] == i:
            continue
        cyc, j = [], i
        while not seen[j]:
            seen[j] = True
            cyc.append(j)
            j = perm[j]
        out.append(cyc)
    return out


def _swaps(labels: tuple[str, ...], pos: np.ndarray, reference: Sensors, min_shift: float,
           ratio: float) -> list[Finding]:
    ref_index = {lab: i for i, lab in enumerate(reference.labels)}
    common = [i for i, lab in enumerate(labels) if lab in ref_index and np.isfinite(pos[i]).all()]
    if len(common) < 4:
        return []
    p = pos[common]
    q = _robust_similarity(reference.positions[[ref_index[labels[i]] for i in common]], p)
    cost = ((p[:, None, :] - q[None, :, :]) ** 2).sum(axis=2)
    _, perm = linear_sum_assignment(cost)
    found = []
    for cyc in _cycles(perm):
        own = np.sqrt(cost[cyc, cyc])
        matched = np.sqrt(cost[cyc, perm[cyc]])
        if not ((own >= min_shift) & (matched <= ratio * own)).all():
            continue
        names = [labels[common[i]] for i in cyc]
        if len(names) == 2:
            text = f"labels {names[0]} and {names[1]} appear exchanged"
        else:
            text = "labels appear rotated along the cycle " + " -> ".join(names + [names[0]])
        found.append(Finding(
            code="placement.swapped", severity="fail", source=SOURCE, subjects=tuple(names),
            message=f"{text}: each sits {own.min() * 1e3:.0f}-{own.max() * 1e3:.0f} mm from its label's place "
                    f"and {matched.max() * 1e3:.0f} mm or less from another's; check the cap or the file",
            values={"own_distance_m": own.tolist(), "matched_distance_m": matched.tolist(),
                    "matched_to": [labels[common[perm[i]]] for i in cyc]},
            threshold={"swap_min_shift_m": min_shift, "swap_ratio": ratio}))
    return found


def _distance_findings(labels: tuple[str, ...], d: np.ndarray, *, off_warn: float, off_fail: float,
                       inside: float, misfit: float) -> list[Finding]:
    out = []
    finite = np.isfinite(d)
    if finite.any() and np.median(np.abs(d[finite])) > misfit:
        med = float(np.median(np.abs(d[finite])))
        out.append(Finding(code="placement.misfit", severity="fail", source=SOURCE,
                           message=f"the electrodes sit {med * 1e3:.1f} mm from the scalp on median: the "
                                   "co-registration or the units are wrong",
                           values={"median_abs_distance_m": med}, threshold=misfit))
    groups = (("placement.off-scalp", "fail", finite & (d > off_fail), off_fail, "above the skin (lifted)"),
              ("placement.off-scalp", "warn", finite & (d > off_warn) & (d <= off_fail), off_warn,
               "above the skin"),
              ("placement.inside-scalp", "warn", finite & (d < -inside), inside, "below the skin"))
    for code, severity, mask, limit, where in groups:
        if not mask.any():
            continue
        names = tuple(lab for lab, m in zip(labels, mask) if m)
        listing = ", ".join(f"{lab} {abs(x) * 1e3:.0f} mm" for lab, x in zip(names, d[mask]))
        out.append(Finding(code=code, severity=severity, source=SOURCE, subjects=names,
                           message=f"{len(names)} electrode(s) more than {limit * 1e3:.0f} mm {where}: {listing}",
                           values={"signed_distance_m": dict(zip(names, d[mask].tolist()))}, threshold=limit))
    return out


def run(sensors: Sensors, scalp: Surface, fiducials: Mapping[str, np.ndarray] | None = None,
        reference: Sensors | None = None, *, off_scalp_warn_m: float = 0.006, off_scalp_fail_m: float = 0.010,
        inside_scalp_warn_m: float = 0.006, misfit_median_m: float = 0.006, swap_min_shift_m: float = 0.012,
        swap_ratio: float = 0.5, mirror_fraction: float = 0.8, lateral_min_m: float = 0.01) -> CheckReport:
    """Check placed electrodes (anatomy frame) against the scalp and their labels.

    Returns
    -------
    CheckReport
        ``arrays``: ``signed_distance_m`` (n,), ``projected_m`` (n, 3);
        ``metrics``: ``electrodes`` (per-electrode table: label, signed distance,
        projected position, codes), counts and the thresholds used.
    """
    labels = sensors.labels
    pos = sensors.positions
    finite = np.isfinite(pos).all(axis=1)
    d = np.full(len(labels), np.nan)
    proj = np.full((len(labels), 3), np.nan)
    if finite.any():
        proj[finite], d[finite], _ = closest_points(scalp.vertices, scalp.faces, pos[finite])
    findings = _distance_findings(labels, d, off_warn=off_scalp_warn_m, off_fail=off_scalp_fail_m,
                                  inside=inside_scalp_warn_m, misfit=misfit_median_m)
    axis = _lateral_axis(fiducials, reference)
    if axis is None:
        findings.append(Finding(code="placement.unchecked", severity="info", source=SOURCE,
                                message="no LPA/RPA and no reference layout: left-right mirroring was not checked"))
    mirrored = _mirror(labels, proj, axis, mirror_fraction, lateral_min_m)
    if mirrored is not None:
        findings.append(mirrored)
    elif reference is not None:
        ref_ok = np.isfinite(reference.positions).all(axis=1)
        ref = reference.select(ref_ok)
        if ref_ok.any():
            ref_proj = closest_points(scalp.vertices, scalp.faces, ref.positions)[0]
            findings += _swaps(labels, proj, Sensors(labels=ref.labels, positions=ref_proj, frame=ref.frame),
                               swap_min_shift_m, swap_ratio)
    codes: dict[str, list[str]] = {lab: [] for lab in labels}
    for f in findings:
        for s in f.subjects:
            if s in codes:
                codes[s].append(f.code)
    table = [{"label": lab, "signed_distance_m": None if not np.isfinite(x) else float(x),
              "projected_m": None if not np.isfinite(p).all() else p.tolist(), "codes": sorted(set(codes[lab]))}
             for lab, x, p in zip(labels, d, proj)]
    metrics = {"electrodes": table, "n_electrodes": len(labels),
               "median_abs_distance_m": float(np.median(np.abs(d[finite]))) if finite.any() else None,
               "max_distance_m": float(np.max(d[finite])) if finite.any() else None,
               "min_distance_m": float(np.min(d[finite])) if finite.any() else None,
               "swap_check": "reference layout" if reference is not None and mirrored is None else "skipped"}
    return CheckReport(findings=tuple(findings), metrics=metrics,
                       arrays={"signed_distance_m": d, "projected_m": proj})


@hookimpl
def headprep_register_checks() -> list[Check]:
    return [Check(name="placement", target="placement", run=run, defaults=dict(DEFAULTS),
                  description="electrodes against the scalp (lifted, below the skin) and their labels "
                              "(swapped, mirrored)")]
