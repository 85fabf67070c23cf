"""``headprep template``: place a standard electrode system on a scalp mesh by rule."""
from __future__ import annotations

import argparse

import numpy as np

from ..atomic import check_writable
from ..console import exit_status, format_findings
from ..errors import UsageError
from ..readers import read_sensors, read_surface

HELP = "place a standard electrode system on a scalp mesh by rule"
DESCRIPTION = """Place the 10-20, 10-10 or 10-5 positions on a subject's scalp by the standards'
percentage rules along arcs over the scalp, from the nasion and preauricular points
(the inion is estimated when the fiducial file has none). The mesh and the fiducials
must be in the same frame (the anatomy frame); the result is written in that frame."""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--system", default="10-10", help="10-20, 10-10 or 10-5 (default 10-10)")
    parser.add_argument("--scalp", required=True, metavar="MESH", help="scalp mesh (PLY, STL, OBJ, OFF, GIfTI...)")
    parser.add_argument("--fiducials", required=True, metavar="FILE",
                        help="electrode-style file holding nasion, LPA, RPA (and optionally inion)")
    parser.add_argument("--out", required=True, metavar="FILE",
                        help="output ending in electrodes.tsv, e.g. sub-01_electrodes.tsv "
                        "(its coordsystem.json is written beside it)")
    parser.add_argument("--template", default=None, metavar="NAME",
                        help="montage template plugin (default: the one offering the system)")
    parser.add_argument("--units", metavar="UNIT", help="length unit of the fiducial file, overriding it")
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def _template(registry, name: str | None, system: str):  # noqa: ANN001, ANN202
    if name:
        return registry.get("montage_template", name)
    offering = [d for d in registry.descriptors("montage_template") if system in d.systems]
    if not offering:
        known = sorted({s for d in registry.descriptors("montage_template") for s in d.systems})
        raise UsageError(f"no montage template offers the system {system!r} (available: {', '.join(known) or 'none'})")
    if len(offering) > 1:
        raise UsageError(f"several montage templates offer {system!r}: "
                         f"{', '.join(d.name for d in offering)}; choose one with --template NAME")
    return offering[0]


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    reg = ctx.registry
    template = _template(reg, args.template, args.system)
    if args.system not in template.systems:
        raise UsageError(f"montage template '{template.name}' does not offer {args.system!r} "
                         f"(it offers {', '.join(template.systems)})")
    writer = next((w for w in reg.descriptors("sensor_writer")
                   if any(args.out.lower().endswith(s.lower()) for s in w.suffixes)), None)
    if writer is None:  # another name would be written, but not read back with its sidecar (units, frame)
        endings = sorted({s for w in reg.descriptors("sensor_writer") for s in w.suffixes})
        raise UsageError(f"--out {args.out}: the name must end in {' or '.join(map(repr, endings))}, so that "
                         "the file is read back with its sidecar (e.g. sub-01_electrodes.tsv)")
    check_writable(args.out)
    fids = read_sensors(reg, args.fiducials, units=args.units)
    missing = [k for k in ("nasion", "lpa", "rpa") if k not in fids.fiducials]
    if missing:
        raise UsageError(f"{args.fiducials}: no {', '.join(missing)} fiducial found "
                         "(label rows NAS/LPA/RPA or give a kind column)")
    scalp = read_surface(reg, args.scalp, "scalp")
    placed = reg.call(template, "place", scalp, dict(fids.fiducials), system=args.system,
                      step=f"montage template '{template.name}'")
    written = reg.call(writer, "write", placed, args.out, step=f"sensor writer '{writer.name}'")
    findings = list(placed.findings)
    centre = (placed.fiducials["lpa"] + placed.fiducials["rpa"]) / 2
    dist_mm = np.linalg.norm(placed.positions - centre, axis=1) * 1e3
    doc = {"system": args.system, "template": template.name, "n_positions": len(placed),
           "written": [str(p) for p in written], "frame": placed.frame,
           "distance_from_ear_midpoint_mm": {"min": float(dist_mm.min()), "max": float(dist_mm.max())},
           "fiducials_m": {k: v.tolist() for k, v in placed.fiducials.items()},
           "findings": [f.to_dict() for f in findings]}

    def human() -> str:
        lines = [f"placed {len(placed)} positions of the {args.system} system ({template.name})",
                 *(f"  wrote {p}" for p in written)]
        if findings:
            lines.append(format_findings(findings))
        return "\n".join(lines)

    ctx.emit(doc, human)
    return exit_status(findings)
