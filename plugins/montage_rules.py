"""Built-in plugin ``montage_rules``: the 10-20, 10-10 and 10-5 systems placed by their percentage rules.

Implemented from the published definitions (Jasper 1958; Chatrian, Lettich &
Nelson 1985; Oostenveld & Praamstra 2001), not from position tables:

1. The midline arc nasion -> inion and the coronal arc LPA -> RPA are traced
   over the scalp; Cz is where both are halved (found by alternating the two,
   each through the other's midpoint, until it moves less than 0.01 mm).
2. Midline positions sit at 5 % steps of the nasion-inion arc: Nz 0 %, NFpz 5 %,
   Fpz 10 %, AFpz 15 %, AFz 20 % ... Cz 50 % ... Oz 90 %, OIz 95 %, Iz 100 %.
3. Two closed rings: the 10 % ring (Fpz, T7, Oz, T8) and the 0 % ring (Nz,
   LPA, Iz, RPA); on each half ring, row ``i`` (the midline level i*5 %) has
   its lateral end at i*5 % of the half ring (Fp1 10 %, AF7 20 %, F7 30 %,
   FT7 40 %, T7 50 % ...; on the 0 % ring N1, AF9, F9, FT9, T9 ...).
4. Each row's arc from its left 10 %-ring point through the midline to the
   right one is divided per half in quarters (10-10: 7, 5, 3, 1, z) or eighths
   (10-5: adds 7h, 5h, 3h, 1h). Column 9h is halfway between 9 and 7.

The plane arcs are a geodesic approximation (see :mod:`prep.geometry.arcs`).
Names follow docs/electrode-files.md. When no inion is given it is estimated as
the far point of the scalp on the line from the nasion through the midpoint of
the preauricular points.
"""
from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import trimesh

from prep import Finding, MontageTemplate, Provenance, Sensors, Surface, UsageError, hookimpl
from prep.geometry.arcs import plane_arc, surface_hits

SYSTEMS = ("10-20", "10-10", "10-5")
#: rows at 5 % steps of the nasion-inion arc (index i = percent / 5).
ROWS = ("N", "NFp", "Fp", "AFp", "AF", "AFF", "F", "FFC", "FC", "FCC", "C", "CCP", "CP", "CPP", "P",
        "PPO", "PO", "POO", "O", "OI", "I")
#: rows whose lateral columns 7/9 (and their halves) use a temporal prefix.
TEMPORAL = {"FFC": "FFT", "FC": "FT", "FCC": "FTT", "C": "T", "CCP": "TTP", "CP": "TP", "CPP": "TPP"}
#: the 19 positions of the 10-20 system (Jasper 1958), with the 10-10 temporal names.
TEN_TWENTY = ("Fp1", "Fp2", "F7", "F3", "Fz", "F4", "F8", "T7", "C3", "Cz", "C4", "T8", "P7", "P3", "Pz",
              "P4", "P8", "O1", "O2")
#: half-row columns from the row's 10 %-ring end (t=0) to the midline (t=1); (name_left, name_right, t).
_COLUMNS = (("7", "8", 0.0), ("7h", "8h", 0.125), ("5", "6", 0.25), ("5h", "6h", 0.375), ("3", "4", 0.5),
            ("3h", "4h", 0.625), ("1", "2", 0.75), ("1h", "2h", 0.875))


def _name(row: int, column: str) -> str:
    prefix = ROWS[row]
    if column.rstrip("h") in ("7", "8", "9", "10"):
        prefix = TEMPORAL.get(prefix, prefix)
    return prefix + column


class _Head:
    """The scalp and landmarks of one placement (metres, the scalp's frame)."""

    def __init__(self, scalp: Surface, fiducials: Mapping[str, np.ndarray], samples: int) -> None:
        missing = [k for k in ("nasion", "lpa", "rpa") if k not in fiducials]
        if missing:
            raise UsageError(f"template placement needs the {', '.join(missing)} fiducial(s)")
        self.mesh = trimesh.Trimesh(np.asarray(scalp.vertices), np.asarray(scalp.faces), process=False)
        self.samples = samples
        self.nas, self.lpa, self.rpa = (np.asarray(fiducials[k], dtype=float) for k in ("nasion", "lpa", "rpa"))
        self.centre = (self.lpa + self.rpa) / 2
        right = self.rpa - self.lpa
        front = self.nas - self.centre
        self.up = np.cross(right, front)
        self.up /= np.linalg.norm(self.up)
        self.findings: list[Finding] = []
        if "inion" in fiducials:
            self.ini = np.asarray(fiducials["inion"], dtype=float)
        else:
            back = -front / np.linalg.norm(front)
            hit = surface_hits(self.mesh, self.centre, back[None])[0]
            if not np.all(np.isfinite(hit)):
                raise UsageError("cannot estimate the inion: the scalp has no surface behind the ear midpoint")
            self.ini = hit
            self.findings.append(Finding(
                code="input.landmark-estimated", severity="info", subjects=("inion",), source="montage_rules",
                message="no inion given; estimated where the line from the nasion through the ear "
                        "midpoint leaves the scalp", values={"inion_m": hit.tolist()}))

    def arc(self, start: np.ndarray, end: np.ndarray, via: np.ndarray | None):  # noqa: ANN201 - PlaneArc
        return plane_arc(self.mesh, start, end, via, self.centre, samples=self.samples)


def _layout(head: _Head) -> dict[str, np.ndarray]:
    """Every 10-5 position by the rules: label -> (3,) metres."""
    pos: dict[str, np.ndarray] = {}
    f21 = np.arange(21) / 20
    # 1. Cz: alternate the midline and coronal arcs until Cz settles
    cz = head.centre + head.up * np.linalg.norm(head.rpa - head.lpa)
    for _ in range(8):
        sag = head.arc(head.nas, head.ini, cz)
        cz_s = sag.at_fractions(np.array([0.5]))[0]
        cor = head.arc(head.lpa, head.rpa, cz_s)
        new = cor.at_fractions(np.array([0.5]))[0]
        moved = np.linalg.norm(new - cz)
        cz = new
        if moved < 1e-5:
            break
    sag = head.arc(head.nas, head.ini, cz)
    cor = head.arc(head.lpa, head.rpa, cz)
    # 2. midline
    mid = sag.at_fractions(f21)
    for i in range(21):
        pos[ROWS[i] + "z"] = mid[i]
    pos["Cz"] = cz
    t7, t8 = cor.at_fractions(np.array([0.1, 0.9]))
    # 3. rings, per half: 10 % ring through T7/T8, 0 % ring through the preauricular points
    rings = {}
    for side, t, ear in (("L", t7, head.lpa), ("R", t8, head.rpa)):
        rings[side, 10] = head.arc(pos["Fpz"], pos["Oz"], t).at_fractions(f21)
        rings[side, 0] = head.arc(pos["Nz"], pos["Iz"], ear).at_fractions(f21)
    ends = {}
    for i in range(2, 19):
        ends["L", i, 7] = rings["L", 10][i]
        ends["R", i, 7] = rings["R", 10][i]
        ends["L", i, 9] = rings["L", 0][i]
        ends["R", i, 9] = rings["R", 0][i]
    # 4. rows
    for i in range(2, 19):
        left, right, m = ends["L", i, 7], ends["R", i, 7], pos[ROWS[i] + "z"]
        if i in (2, 18):  # Fp1/Fp2, O1/O2 lie on the 10 % ring; N1/N2, I1/I2 on the 0 % ring
            pos[ROWS[i] + "1"], pos[ROWS[i] + "2"] = left, right
            low = "N" if i == 2 else "I"
            pos[low + "1"], pos[low + "2"] = ends["L", i, 9], ends["R", i, 9]
            continue
        row = head.arc(left, right, m)
        s_mid = row.length_at(m)
        ts = np.array([c[2] for c in _COLUMNS])
        lpts = row.at_fractions(ts, lo=0.0, hi=s_mid)
        rpts = row.at_fractions(1 - ts, lo=s_mid, hi=row.length)
        for (nl, nr, _), pl, pr in zip(_COLUMNS, lpts, rpts):
            pos[_name(i, nl)] = pl
            pos[_name(i, nr)] = pr
        pos[_name(i, "9")], pos[_name(i, "10")] = ends["L", i, 9], ends["R", i, 9]
        for side, col in (("L", "9h"), ("R", "10h")):
            half = head.arc(ends[side, i, 9], ends[side, i, 7], None).at_fractions(np.array([0.5]))[0]
            pos[_name(i, col)] = half
    return pos


def _select(labels: list[str], system: str) -> list[str]:
    if system == "10-5":
        return labels
    if system == "10-20":
        return [lab for lab in labels if lab in TEN_TWENTY]
    odd_rows = {ROWS[i] for i in range(1, 21, 2)} | {TEMPORAL[ROWS[i]] for i in range(1, 21, 2) if ROWS[i] in TEMPORAL}
    out = []
    for lab in labels:
        if lab.endswith("h"):
            continue
        stem = lab.rstrip("z0123456789")
        if stem in odd_rows:
            continue
        out.append(lab)
    return out


def place(scalp: Surface, fiducials: Mapping[str, np.ndarray], system: str = "10-10", samples: int = 361,
          **_: object) -> Sensors:
    """Place a standard system on ``scalp`` by the percentage rules.

    Parameters
    ----------
    scalp : Surface
        Closed scalp mesh, metres.
    fiducials : mapping
        ``nasion``, ``lpa``, ``rpa`` (and optionally ``inion``): (3,) metres in the scalp's frame.
    system : {'10-20', '10-10', '10-5'}
    samples : int
        Rays per traced arc.

    Returns
    -------
    Sensors
        In the scalp's frame; labels in midline-first order within each row;
        fiducials as given plus the inion (estimated if absent).
    """
    if system not in SYSTEMS:
        raise UsageError(f"unknown electrode system {system!r} (choose from {', '.join(SYSTEMS)})")
    head = _Head(scalp, fiducials, samples)
    pos = _layout(head)
    labels = _select(list(pos), system)
    fids = {"nasion": head.nas, "lpa": head.lpa, "rpa": head.rpa, "inion": head.ini}
    return Sensors(labels=tuple(labels), positions=np.array([pos[k] for k in labels]), frame=scalp.frame,
                   fiducials=fids, kinds=("eeg",) * len(labels), findings=tuple(head.findings),
                   provenance=Provenance(reader=f"montage_rules:{system}", unit="m", unit_source="declared",
                                         extra={"system": system, "inion_estimated": "inion" not in fiducials}))


@hookimpl
def headprep_register_montage_templates() -> list[MontageTemplate]:
    return [MontageTemplate(name="rules", place=place, systems=SYSTEMS,
                            description="10-20 / 10-10 / 10-5 placed by the percentage rules along scalp arcs",
                            defaults={"system": "10-10", "samples": 361})]
