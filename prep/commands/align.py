"""``headprep align``: co-register electrodes to the scalp and check their placement."""
from __future__ import annotations

import argparse
import json
import shutil
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np

from ..atomic import check_writable, staging_dir, write_text_atomic
from ..checks import run_checks
from ..console import Context, exit_status, format_findings
from ..model import FIDUCIALS, Finding, Sensors

HELP = "co-register electrodes to the scalp and check their placement"
DESCRIPTION = """Co-register digitized electrodes to a scalp mesh and check every electrode.

The surface fit (default) matches head-shape points and electrodes to the scalp
with a robust ICP started from the fiducials; --method fiducial uses nasion,
LPA and RPA alone. Each electrode gets its signed distance to the scalp
(outside positive) and is checked for being lifted, below the skin, swapped
with another label, or part of a mirrored montage.

With --out DIR it writes alignment.json (transform, residuals, uncertainty, per
electrode table, findings), placed_electrodes.tsv (electrodes in the scalp's
frame) and placement.png. Exit 0 when no check failed, 1 when one did, 2 when an
input cannot be used (nothing is written), 3 on an internal error."""

PLACED_NAME = "placed_electrodes.tsv"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--sensors", required=True, metavar="FILE", help="digitized electrode file")
    parser.add_argument("--scalp", required=True, metavar="MESH", help="scalp mesh (anatomy frame)")
    parser.add_argument("--headshape", metavar="FILE",
                        help="head-shape points (any electrode format); default: head-shape rows of --sensors")
    parser.add_argument("--fiducials", metavar="FILE",
                        help="nasion, LPA and RPA marked in the scalp's frame (any electrode format)")
    parser.add_argument("--method", default="surface", metavar="NAME",
                        help="aligner: surface (robust ICP, default) or fiducial")
    parser.add_argument("--sensor-units", metavar="UNIT", help="length unit of the electrode files (m, cm, mm)")
    parser.add_argument("--mesh-units", metavar="UNIT", help="length unit of the mesh (m, cm, mm)")
    parser.add_argument("--set", action="append", default=[], metavar="KEY=VALUE", dest="settings",
                        help="an option of the aligner or of a placement check, e.g. off_scalp_fail_m=0.012 "
                             "(repeatable; see `headprep plugins --json` for the defaults)")
    parser.add_argument("--out", type=Path, metavar="DIR", help="write the transform, placed electrodes and picture")
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def _anatomy_fiducials(sensors: Sensors) -> dict[str, np.ndarray]:
    """Fiducials of a file, including rows whose label names one (``nasion``, ``lpa``...)."""
    fids = dict(sensors.fiducials)
    for label, pos in zip(sensors.labels, sensors.positions):
        key = label.lower()
        if key in FIDUCIALS and key not in fids:
            fids[key] = pos
    return fids


def _read(ctx: Context, args: argparse.Namespace) -> tuple[Sensors, Any, dict | None, list[Finding]]:
    from ..readers import read_sensors, read_surface

    reg = ctx.registry
    sensors = read_sensors(reg, args.sensors, units=args.sensor_units)
    # the same sensor checks as `inspect` and `run` (a NaN electrode or a doubled label is a fail here too)
    findings = list(sensors.findings) + list(run_checks(reg, "sensors", sensors=sensors).findings)
    if args.headshape:
        hs = read_sensors(reg, args.headshape, units=args.sensor_units)
        findings += hs.findings
        parts = [p for p in (sensors.headshape, hs.headshape, hs.positions) if len(p)]
        sensors = replace(sensors, headshape=np.vstack(parts) if parts else None)
    fids = None
    if args.fiducials:
        fs = read_sensors(reg, args.fiducials, units=args.sensor_units)
        findings += fs.findings
        fids = _anatomy_fiducials(fs)
        missing = [k for k in FIDUCIALS if k not in fids]
        if missing:
            findings.append(Finding(
                code="input.fiducial-missing", severity="warn", subjects=tuple(missing), source="align",
                message=f"{args.fiducials}: anatomy-frame fiducial(s) {', '.join(missing)} not found; "
                        "the surface fit searches its start instead"))
            fids = None
    scalp = read_surface(reg, args.scalp, "scalp", units=args.mesh_units)
    findings += scalp.findings
    return sensors, scalp, fids, findings


def _document(res: Any, findings: list[Finding]) -> dict[str, Any]:  # res: PlacementResult
    arrays = res.report.arrays
    dist = arrays.get("placement_signed_distance_m")
    eeg_labels = [lab for lab, k in zip(res.placed.labels, res.placed.kinds) if k == "eeg"]
    by_label: dict[str, list[str]] = {}
    for f in findings:
        for s in f.subjects:
            by_label.setdefault(s, []).append(f.code)
    index = {lab: i for i, lab in enumerate(eeg_labels)}
    electrodes = []
    for lab, kind, pos, proj in zip(res.placed.labels, res.placed.kinds, res.placed.positions,
                                    res.projected.positions):
        i = index.get(lab) if kind == "eeg" else None
        d = float(dist[i]) if dist is not None and i is not None and np.isfinite(dist[i]) else None
        electrodes.append({"label": lab, "kind": kind, "signed_distance_m": d,
                           "placed_m": pos.tolist() if np.isfinite(pos).all() else None,
                           "projected_m": proj.tolist() if np.isfinite(proj).all() else None,
                           "findings": sorted(set(by_label.get(lab, [])))})
    t = res.alignment.transform
    return {"transform": {"matrix": t.matrix.tolist(), "from": t.from_frame, "to": t.to_frame, "method": t.method},
            "residuals": {k: res.alignment.metrics.get(k) for k in ("rms_m", "fre_m")},
            "uncertainty": res.alignment.metrics.get("uncertainty"),
            "alignment": dict(res.alignment.metrics),
            "electrodes": electrodes,
            "findings": [f.to_dict() for f in findings]}


def _write_placed(ctx: Context, placed: Sensors, path: Path) -> list[Path]:
    for writer in ctx.registry.descriptors("sensor_writer"):
        if any(path.name.lower().endswith(s.lower()) for s in writer.suffixes):
            return list(ctx.registry.call(writer, "write", placed, path,
                                          step=f"sensor writer '{writer.name}' writing {path}"))
    lines = ["label\tx\ty\tz"] + [f"{lab}\t" + "\t".join(repr(float(v)) for v in p)
                                  for lab, p in zip(placed.labels, placed.positions)]
    write_text_atomic(path, "\n".join(lines) + "\n")
    return [path]


def _write(ctx: Context, out: Path, doc: dict[str, Any], res: Any, scalp: Any) -> list[Path]:
    from ..placement import placement_figure

    stage = staging_dir(out / "align")
    try:
        staged = [stage / "alignment.json"]
        write_text_atomic(staged[0], json.dumps(doc, indent=2, allow_nan=False) + "\n")
        staged += _write_placed(ctx, res.placed, stage / PLACED_NAME)
        staged.append(placement_figure(res, scalp, stage / "placement.png"))
        final = []
        for p in staged:
            target = out / Path(p).name
            Path(p).replace(target)
            final.append(target)
        return final
    finally:
        shutil.rmtree(stage, ignore_errors=True)


def _human(doc: dict[str, Any], findings: list[Finding], written: list[Path]) -> str:
    res = doc["residuals"]
    unc = doc["uncertainty"] or {}
    rms = f"{res['rms_m'] * 1e3:.2f} mm" if res.get("rms_m") is not None else "n/a"
    fre = f"{res['fre_m'] * 1e3:.2f} mm" if res.get("fre_m") is not None else "n/a"
    lines = [f"alignment {doc['transform']['from']} -> {doc['transform']['to']} ({doc['transform']['method']})",
             f"  surface residual (RMS)   {rms}",
             f"  fiducial residual (RMS)  {fre}",
             f"  uncertainty              {unc.get('translation_mm', float('nan')):.2f} mm, "
             f"{unc.get('rotation_deg', float('nan')):.2f} deg",
             f"  electrodes               {sum(e['kind'] == 'eeg' for e in doc['electrodes'])}"]
    flagged = [e for e in doc["electrodes"] if e["findings"]]
    if flagged:
        lines += ["", "  label      distance  findings"]
        for e in flagged:
            d = f"{e['signed_distance_m'] * 1e3:+6.1f} mm" if e["signed_distance_m"] is not None else "     n/a"
            lines.append(f"  {e['label']:<10} {d}  {', '.join(e['findings'])}")
    shown = [f for f in findings if f.severity != "info"]
    if shown:
        lines += ["", format_findings(shown)]
    if written:
        lines += ["", "written: " + ", ".join(str(p) for p in written)]
    return "\n".join(lines)


def _settings(ctx: Context, args: argparse.Namespace) -> tuple[dict[str, Any], dict[str, Any]]:
    """Split ``--set KEY=VALUE`` into aligner options and placement-check options (values parsed as JSON)."""
    from ..checks import validate_check_options
    from ..errors import UsageError

    aligner = ctx.registry.get("aligner", args.method)
    mine: dict[str, Any] = {}
    checks: dict[str, Any] = {}
    for item in args.settings:
        key, sep, raw = item.partition("=")
        if not sep or not key.strip():
            raise UsageError(f"--set {item!r}: expected KEY=VALUE")
        try:
            value = json.loads(raw)
        except json.JSONDecodeError:
            value = raw
        (mine if key.strip() in aligner.defaults else checks)[key.strip()] = value
    validate_check_options(ctx.registry, checks, "--set")
    return mine, checks


def run(args: argparse.Namespace, ctx: Context) -> int:
    from ..placement import place_sensors

    options, check_options = _settings(ctx, args)
    if args.out:
        check_writable(Path(args.out) / "alignment.json")
    sensors, scalp, fids, findings = _read(ctx, args)
    res = place_sensors(ctx.registry, sensors, scalp, fids, method=args.method, options=options,
                        check_options=check_options)
    findings += list(res.findings)
    doc = _document(res, findings)
    written = _write(ctx, args.out, doc, res, scalp) if args.out else []
    doc["written"] = [str(p) for p in written]
    ctx.emit(doc, lambda: _human(doc, findings, written))
    return exit_status(findings)
