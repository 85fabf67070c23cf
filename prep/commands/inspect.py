"""``headprep inspect``: read an electrode file and report what is in it."""
from __future__ import annotations

import argparse
from collections import Counter
from typing import Any

import numpy as np

from ..console import exit_status, format_findings
from ..model import Finding, Sensors
from ..checks import run_checks
from ..readers import read_sensors

HELP = "read an electrode file and report what is in it"
DESCRIPTION = """Read an electrode file and report: the reader used, the length unit (declared,
given or assumed), counts by kind, the fiducials, the size of the head in mm, and
the findings of every sensor check. Exit 1 if a finding is a failure, 2 if the
file cannot be read."""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", metavar="FILE", help="electrode file")
    parser.add_argument("--reader", metavar="NAME", help="use this sensor reader instead of choosing by file name")
    parser.add_argument("--units", metavar="UNIT", help="the file's length unit (m, cm, mm), overriding the file")
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def head_size_mm(sensors: Sensors) -> dict[str, float | None]:
    """Inter-preauricular distance, nasion-to-ear-midpoint distance and electrode extent, mm."""
    f = sensors.fiducials
    ipa = float(np.linalg.norm(f["rpa"] - f["lpa"])) * 1e3 if "lpa" in f and "rpa" in f else None
    nas = (float(np.linalg.norm(f["nasion"] - (f["rpa"] + f["lpa"]) / 2)) * 1e3
           if ipa is not None and "nasion" in f else None)
    pts = sensors.positions[sensors.eeg_mask]
    pts = pts[np.all(np.isfinite(pts), axis=1)]
    extent = (pts.max(axis=0) - pts.min(axis=0)) * 1e3 if len(pts) else None
    return {"inter_preauricular_mm": ipa, "nasion_to_ear_axis_mm": nas,
            "extent_mm": None if extent is None else [float(v) for v in extent]}


def describe(sensors: Sensors, findings: list[Finding]) -> dict[str, Any]:
    """The JSON document of ``inspect``."""
    kinds = Counter(sensors.kinds)
    prov = sensors.provenance
    return {
        "file": prov.file, "reader": prov.reader, "sha256": prov.sha256, "frame": sensors.frame,
        "units": {"unit": prov.unit, "source": prov.unit_source},
        "counts": {**{k: kinds[k] for k in sorted(kinds)}, "fiducials": len(sensors.fiducials),
                   "headshape": int(len(sensors.headshape)), "channels": len(sensors)},
        "fiducials_mm": {k: [float(x) * 1e3 for x in v] for k, v in sensors.fiducials.items()},
        "head_size": head_size_mm(sensors),
        "labels": list(sensors.labels),
        "renamed": {o: n for o, n in zip(sensors.original_labels, sensors.labels) if o != n},
        "provenance": prov.to_dict(),
        "findings": [f.to_dict() for f in findings],
    }


def _human(doc: dict[str, Any], findings: list[Finding]) -> str:
    u = doc["units"]
    lines = [f"{doc['file']}  (reader '{doc['reader']}', frame {doc['frame']})",
             f"  units: {u['unit']} ({u['source']})",
             "  counts: " + ", ".join(f"{k} {v}" for k, v in doc["counts"].items())]
    for name, pos in doc["fiducials_mm"].items():
        lines.append(f"  {name:7} " + "  ".join(f"{v:8.1f}" for v in pos) + "  mm")
    hs = doc["head_size"]
    if hs["inter_preauricular_mm"] is not None:
        lines.append(f"  inter-preauricular distance: {hs['inter_preauricular_mm']:.1f} mm")
    if hs["extent_mm"] is not None:
        lines.append("  electrode extent: " + " x ".join(f"{v:.0f}" for v in hs["extent_mm"]) + " mm")
    if doc["renamed"]:
        lines.append("  renamed: " + ", ".join(f"{o} -> {n}" for o, n in doc["renamed"].items()))
    lines.append(format_findings(findings) if findings else "  no findings")
    return "\n".join(lines)


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    sensors = read_sensors(ctx.registry, args.file, reader=args.reader, units=args.units)
    findings = list(sensors.findings) + list(run_checks(ctx.registry, "sensors", sensors=sensors).findings)
    doc = describe(sensors, findings)
    ctx.emit(doc, lambda: _human(doc, findings))
    return exit_status(findings)
