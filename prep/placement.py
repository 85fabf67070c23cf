"""Co-registration and placement QC, as the ``align`` command and the pipeline run it.

:func:`place_sensors` asks the registry for an aligner, moves the sensors into
the scalp's frame, projects them onto the scalp, asks a montage-template plugin
for the labelled reference layout on this scalp, and runs every check whose
target is ``"placement"``. The helpers above it are shared by aligner plugins
(fiducial pairing, the digitizer-handedness test, too-few-points errors).
"""
from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from .checks import run_checks
from .descriptors import Alignment, CheckReport
from .errors import UsageError
from .geometry.registration import spread_ratio
from .geometry.surface import closest_points
from .model import FIDUCIALS, Finding, Sensors, Surface
from .registry import Registry

__all__ = ["PlacementResult", "place_sensors", "paired_fiducials", "digitizer_handedness", "fit_points",
           "too_few_points", "mirror_matrix", "mirrored_finding", "placement_figure", "PREFERRED_SYSTEMS"]

#: the montage-template system asked for, first available wins (10-5 holds the 10-10 and 10-20 labels)
PREFERRED_SYSTEMS = ("10-5", "10-10", "10-20")
#: below this ratio of singular values three fiducials count as collinear (common practice)
COLLINEAR_RATIO = 0.05


# ------------------------------------------------------------------ helpers for aligners
def too_few_points(reason: str, advice: str) -> UsageError:
    """The UsageError aligners raise when the inputs cannot fix a transform."""
    return UsageError(f"input.too-few-points: {reason}; {advice}")


def paired_fiducials(digitized: Mapping[str, np.ndarray], anatomy: Mapping[str, np.ndarray] | None,
                     *, required: bool = True) -> tuple[np.ndarray, np.ndarray, tuple[str, ...]] | None:
    """Fiducials present (and finite) in both frames, as paired (k, 3) arrays.

    Parameters
    ----------
    digitized : mapping name -> (3,) metres, sensors' frame
    anatomy : mapping name -> (3,) metres, scalp frame, or None
    required : bool
        Raise when fewer than three non-collinear pairs exist; otherwise return None.

    Returns
    -------
    (source (k, 3), target (k, 3), names) or None

    Raises
    ------
    UsageError
        ``input.too-few-points: ...`` with advice, when ``required``.
    """
    anatomy = anatomy or {}
    names = tuple(n for n in (*FIDUCIALS, "inion") if n in digitized and n in anatomy
                  and np.isfinite(digitized[n]).all() and np.isfinite(anatomy[n]).all())
    if len(names) < 3:
        if not required:
            return None
        missing_d = [n for n in FIDUCIALS if n not in digitized]
        missing_a = [n for n in FIDUCIALS if n not in anatomy]
        where = []
        if missing_d:
            where.append(f"digitized file lacks {', '.join(missing_d)}")
        if missing_a:
            where.append(f"anatomy fiducials lack {', '.join(missing_a)}")
        raise too_few_points(f"{len(names)} fiducial(s) in both frames ({'; '.join(where) or 'non-finite values'})",
                             "give nasion, LPA and RPA in both the electrode file and --fiducials, "
                             "or use --method surface with head-shape points")
    src = np.array([digitized[n] for n in names])
    dst = np.array([anatomy[n] for n in names])
    for pts, which in ((src, "digitized"), (dst, "anatomy")):
        if spread_ratio(pts) < COLLINEAR_RATIO:
            if not required:
                return None
            raise too_few_points(f"the {which} fiducials {', '.join(names)} are (nearly) collinear",
                                 "check that nasion, LPA and RPA were not swapped or duplicated")
    return src, dst, names


def digitizer_handedness(sensors: Sensors) -> int:
    """+1 if the digitizer frame looks right-handed, -1 if mirrored, 0 if undecidable.

    With nasion, LPA and RPA, ``(rpa - lpa) x (nasion - lpa)`` points up in a
    right-handed frame, where the electrodes (and head shape) lie above the
    fiducial plane. A mirrored frame turns the cross product down.
    """
    f = sensors.fiducials
    if not all(n in f and np.isfinite(f[n]).all() for n in FIDUCIALS):
        return 0
    up = np.cross(f["rpa"] - f["lpa"], f["nasion"] - f["lpa"])
    pts = fit_points(sensors)
    if len(pts) < 3 or not np.linalg.norm(up) > 0:
        return 0
    origin = (f["lpa"] + f["rpa"]) / 2
    side = (pts - origin) @ (up / np.linalg.norm(up))
    frac = float(np.mean(side > 0))
    if frac >= 0.75:
        return 1
    if frac <= 0.25:
        return -1
    return 0


def mirrored_finding(source: str) -> Finding:
    """The finding for a left-handed digitizer frame (shared wording of the aligners)."""
    return Finding(code="placement.mirrored", severity="fail", source=source,
                   message="the digitized montage is left-right mirrored: the digitizer frame is left-handed "
                           "(nasion, LPA and RPA turn the wrong way around the electrodes); the fit mirrored "
                           "x -> -x to go on: fix the digitizer set-up or the file's axes")


def mirror_matrix() -> np.ndarray:
    """(4, 4) reflection x -> -x (undoes a left-handed digitizer frame)."""
    return np.diag([-1.0, 1.0, 1.0, 1.0])


def fit_points(sensors: Sensors, use_electrodes: bool = True) -> np.ndarray:
    """Finite surface points of a subject: head shape then EEG electrodes, (m, 3) metres."""
    parts = [sensors.headshape]
    if use_electrodes:
        parts.append(sensors.positions[sensors.eeg_mask])
    pts = np.vstack(parts) if parts else np.zeros((0, 3))
    return pts[np.isfinite(pts).all(axis=1)]


# ------------------------------------------------------------------ orchestration
@dataclass(frozen=True, kw_only=True)
class PlacementResult:
    """What :func:`place_sensors` returns.

    Attributes
    ----------
    alignment : Alignment
        The aligner's result (sensors' frame -> scalp frame).
    placed : Sensors
        Every channel as digitized, moved into the scalp's frame.
    projected : Sensors
        Same channels with positions projected onto the scalp (closest surface point).
    report : CheckReport
        Merged report of every placement check (metrics keyed by check name).
    findings : tuple of Finding
        Aligner findings, notes of this step, then check findings. Reader
        findings of the inputs are not repeated here.
    """

    alignment: Alignment
    placed: Sensors
    projected: Sensors
    report: CheckReport
    findings: tuple[Finding, ...] = field(default_factory=tuple)


def _note(message: str) -> Finding:
    return Finding(code="placement.unchecked", severity="info", message=message, source="placement")


def _reference_layout(registry: Registry, scalp: Surface, fiducials: Mapping[str, np.ndarray] | None,
                      labels: tuple[str, ...]) -> tuple[Sensors | None, Finding | None]:
    templates = registry.descriptors("montage_template")
    if not templates:
        return None, _note("no montage-template plugin is installed: swapped labels were not checked "
                           "against a reference layout")
    if not fiducials or not all(n in fiducials for n in FIDUCIALS):
        return None, _note("no nasion/LPA/RPA in the scalp frame: the reference layout could not be "
                           "placed, so swapped labels were not checked")
    for desc in templates:
        systems = tuple(getattr(desc, "systems", ()) or ())
        system = next((s for s in PREFERRED_SYSTEMS if s in systems), systems[0] if systems else None)
        kwargs = {"system": system} if system is not None else {}
        try:
            ref = registry.call(desc, "place", scalp, dict(fiducials),
                                step=f"montage template '{desc.name}' placing {system}", **kwargs)
        except UsageError as exc:
            return None, _note(f"montage template '{desc.name}' could not place {system}: {exc}; "
                               "swapped labels were not checked")
        if isinstance(ref, Sensors) and set(ref.labels) & set(labels):
            return ref, None
    return None, _note("the montage templates share no label with these electrodes: swapped labels "
                       "were not checked")


def place_sensors(registry: Registry, sensors: Sensors, scalp: Surface,
                  anatomy_fiducials: Mapping[str, np.ndarray] | None, *, method: str = "surface",
                  options: Mapping[str, Any] | None = None,
                  check_options: Mapping[str, Any] | None = None) -> PlacementResult:
    """Co-register ``sensors`` to ``scalp`` and check every electrode's placement.

    Parameters
    ----------
    registry : Registry
    sensors : Sensors
        Any frame (normally ``device``); metres.
    scalp : Surface
        Closed, outward-oriented scalp mesh in the anatomy frame.
    anatomy_fiducials : mapping name -> (3,) metres in the scalp's frame, or None
    method : str
        Aligner name (``"surface"`` or ``"fiducial"`` among the built-ins).
    options : mapping, optional
        Aligner options (validated against its ``defaults``).
    check_options : mapping, optional
        A flat ``{option: value}`` namespace: each placement check receives the
        keys its ``defaults`` declare (as :func:`prep.checks.run_checks`).

    Returns
    -------
    PlacementResult

    Raises
    ------
    UsageError
        Unknown aligner or option; ``input.too-few-points`` from the aligner.
    """
    aligner = registry.get("aligner", method)
    opts = registry.options(aligner, options, f"aligner '{method}' options")
    alignment = registry.call(aligner, "align", sensors, scalp, anatomy_fiducials,
                              step=f"aligner '{method}'", **opts)
    if not isinstance(alignment, Alignment):
        raise UsageError(f"aligner '{method}' returned {type(alignment).__name__}, not Alignment")
    placed = sensors.transformed(alignment.transform)
    finite = np.isfinite(placed.positions).all(axis=1)
    proj = placed.positions.copy()
    if finite.any():
        proj[finite] = closest_points(scalp.vertices, scalp.faces, placed.positions[finite])[0]
    projected = replace(placed, positions=proj)

    fids = dict(anatomy_fiducials) if anatomy_fiducials else dict(placed.fiducials)
    eeg = placed.select(placed.eeg_mask)
    findings: list[Finding] = list(alignment.findings)
    reference, note = _reference_layout(registry, scalp, fids, eeg.labels)
    if note is not None:
        findings.append(note)
    report = run_checks(registry, "placement", options=check_options, sensors=eeg, scalp=scalp,
                        fiducials=fids or None, reference=reference)
    findings.extend(report.findings)
    return PlacementResult(alignment=alignment, placed=placed, projected=projected, report=report,
                           findings=tuple(findings))


# ------------------------------------------------------------------ picture
def placement_figure(result: PlacementResult, scalp: Surface, path: Any, *, limit_m: float = 0.010) -> Any:
    """Write a PNG: three views of the scalp with electrodes coloured by signed distance.

    Electrodes named in a finding have their label written beside them (the
    colour is never the only carrier of the verdict).

    Parameters
    ----------
    result : PlacementResult
    scalp : Surface
    path : path of the PNG (written atomically)
    limit_m : float
        Colour scale runs from ``-limit_m`` (inside) to ``+limit_m`` (lifted).
    """
    from .render import figure, save_figure_png

    pos = result.placed.positions
    finite = np.isfinite(pos).all(axis=1)
    d = np.full(len(pos), np.nan)
    if finite.any():
        d[finite] = closest_points(scalp.vertices, scalp.faces, pos[finite])[1]
    flagged = {s for f in result.findings if f.severity != "info" for s in f.subjects}
    fig = figure(figsize=(13, 4.8))
    views = (("top (x right, y front)", 0, 1), ("side (y front, z up)", 1, 2), ("back (x right, z up)", 0, 2))
    step = max(1, len(scalp.vertices) // 6000)
    sc = None
    for k, (title, i, j) in enumerate(views):
        ax = fig.add_subplot(1, 3, k + 1)
        v = scalp.vertices[::step]
        ax.scatter(v[:, i] * 1e3, v[:, j] * 1e3, s=1, c="0.85", linewidths=0)
        sc = ax.scatter(pos[finite, i] * 1e3, pos[finite, j] * 1e3, c=d[finite] * 1e3, cmap="coolwarm",
                        vmin=-limit_m * 1e3, vmax=limit_m * 1e3, s=28, edgecolors="k", linewidths=0.4)
        for lab, p in zip(result.placed.labels, pos):
            if lab in flagged and np.isfinite(p).all():
                ax.annotate(lab, (p[i] * 1e3, p[j] * 1e3), xytext=(4, 4), textcoords="offset points",
                            fontsize=8, weight="bold")
        ax.set_title(title, fontsize=9)
        ax.set_aspect("equal")
        ax.set_xlabel("mm", fontsize=8)
        ax.tick_params(labelsize=7)
    if sc is not None:
        bar = fig.colorbar(sc, ax=fig.axes, shrink=0.8)
        bar.set_label("signed distance to the scalp (mm, outside +)")
    fig.suptitle(f"electrode placement: {len(flagged)} flagged electrode(s) labelled", fontsize=10)
    return save_figure_png(fig, path)
