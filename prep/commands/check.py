"""``headprep check``: measure a lead field's conditioning (the passport)."""
from __future__ import annotations

import argparse
import json
from pathlib import Path

import numpy as np

from ..atomic import atomic_dir, check_writable
from ..bundle import load_bundle
from ..console import exit_status, format_findings
from ..errors import ReadError, UsageError
from ..model import LeadField
from ..passport import Passport, passport_pngs, run_passport
from ..readers import check_input_file

HELP = "measure a lead field's conditioning (the passport)"
DESCRIPTION = """\
Measure whether a lead field can resolve anything before it goes to an inverse
solver: non-finite entries, singular spectrum, rank and condition number,
effective rank at an SNR, reference consistency, near-duplicate sensors, depth
bias, and the point-spread functions of a minimum-norm inverse (peak
localisation error and spatial dispersion of every source).

Give a bundle, or a lead field as .npy files (metres, V/(A*m)):
  headprep check subject.bundle
  headprep check --leadfield L.npy --sensor-positions S.npy --source-positions P.npy

The passport (passport.json, arrays/*.npy and five PNGs) is written atomically
to --out (default: <input>-passport next to the input). Exit 1 when a check
fails, 2 when an input cannot be used."""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("bundle", nargs="?", help="bundle directory or .zip")
    parser.add_argument("--leadfield", metavar="FILE.npy",
                        help="(n_sensors, n_sources) or (n_sensors, n_sources, 3) lead field, V/(A*m)")
    parser.add_argument("--sensor-positions", metavar="FILE.npy", help="(n_sensors, 3) electrodes, metres")
    parser.add_argument("--source-positions", metavar="FILE.npy", help="(n_sources, 3) sources, metres")
    parser.add_argument("--normals", metavar="FILE.npy", help="(n_sources, 3) unit source orientations")
    parser.add_argument("--reference", default="average",
                        help="reference of a .npy lead field: 'average' (default) or a sensor label E1..En")
    parser.add_argument("--snr", type=float, default=None, help="amplitude SNR for the effective rank and "
                        "the minimum-norm resolution (default 3)")
    parser.add_argument("--out", metavar="DIR", help="passport directory (default <input>-passport)")
    parser.add_argument("--force", action="store_true", help="replace an existing passport directory")
    parser.add_argument("--no-png", action="store_true", help="skip the pictures (faster in batch runs)")
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def _npy(path: str | None, option: str) -> np.ndarray:
    if path is None:
        raise UsageError(f"{option} is required with --leadfield")
    p = check_input_file(path, option)
    try:
        arr = np.load(p, allow_pickle=False)
    except (ValueError, OSError) as exc:
        raise ReadError(p, None, f"not a numeric .npy array ({exc})") from exc
    if not isinstance(arr, np.ndarray) or arr.dtype.kind not in "fiu":
        raise ReadError(p, None, "not a numeric .npy array")
    return arr.astype(np.float64)


def _points(path: str | None, option: str, n: int, what: str) -> np.ndarray:
    arr = _npy(path, option)
    if arr.shape != (n, 3):
        raise ReadError(path, None, f"{what} must be ({n}, 3) to match the lead field, got {arr.shape}")
    return arr


def _from_files(args: argparse.Namespace) -> tuple[LeadField, np.ndarray, Path]:
    mat = _npy(args.leadfield, "--leadfield")
    if mat.ndim not in (2, 3) or (mat.ndim == 3 and mat.shape[2] != 3):
        raise ReadError(args.leadfield, None, f"lead field must be (n, m) or (n, m, 3), got {mat.shape}")
    n, m = mat.shape[:2]
    sensors = _points(args.sensor_positions, "--sensor-positions", n, "sensor positions")
    sources = _points(args.source_positions, "--source-positions", m, "source positions")
    normals = None
    if args.normals is not None:
        normals = _points(args.normals, "--normals", m, "normals")
    elif mat.ndim == 2:
        normals = np.zeros((m, 3))  # orientation unknown; no check needs it
    labels = tuple(f"E{i + 1}" for i in range(n))
    if args.reference != "average" and args.reference not in labels:
        raise UsageError(f"--reference {args.reference}: expected 'average' or a label E1..E{n}")
    lf = LeadField(matrix=mat, sensor_labels=labels,
                   source_positions=sources, source_normals=normals if mat.ndim == 2 else None,
                   reference=args.reference)
    return lf, sensors, Path(args.leadfield)


def _human(passport: Passport, out: Path) -> str:
    m = passport.metrics
    spec, res, dep = m.get("leadfield-spectrum", {}), m.get("leadfield-resolution", {}), m.get("leadfield-depth", {})
    lines = [f"passport written to {out}"]
    if "condition_number" in spec:
        lines.append(f"  spectrum: rank {spec['numerical_rank']}/{spec['expected_rank']}, condition number "
                     f"{float(spec['condition_number']):.3g}, effective rank {spec['effective_rank']} "
                     f"at SNR {spec['snr']:g}")
    if "ratio" in dep:
        lines.append(f"  depth: superficial/deep column-norm ratio {float(dep['ratio']):.3g}")
    if "peak_localisation_error" in res:
        ple, sd = res["peak_localisation_error"], res["spatial_dispersion"]
        lines.append(f"  resolution (minimum norm, SNR {res['snr']:g}): peak localisation error median "
                     f"{float(ple['p50_mm']):.1f} mm, 90th pct {float(ple['p90_mm']):.1f} mm; dispersion median "
                     f"{float(sd['p50_mm']):.1f} mm")
    lines.append(format_findings(passport.findings) if passport.findings else "  no problems found")
    return "\n".join(lines)


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    if (args.bundle is None) == (args.leadfield is None):
        raise UsageError("give either a BUNDLE or --leadfield FILE.npy (with --sensor-positions and "
                         "--source-positions)")
    if args.snr is not None and not args.snr > 0:
        raise UsageError(f"--snr must be positive, got {args.snr}")
    if args.bundle is not None:
        bundle = load_bundle(args.bundle)
        lf = bundle.leadfield("fixed" if "leadfield" in bundle.arrays else "free")
        sensors, origin = np.asarray(bundle.arrays["sensor_positions"]), Path(args.bundle)
    else:
        lf, sensors, origin = _from_files(args)
    out = Path(args.out) if args.out else origin.with_name(f"{origin.stem}-passport")
    if out.exists() and not args.force:
        raise UsageError(f"{out}: already exists; use --force to replace it")
    check_writable(out)  # refuse before the (long) computation
    options = {"snr": args.snr} if args.snr is not None else None
    passport = run_passport(ctx.registry, lf, sensors, options=options)
    doc = {"input": str(origin), "out": str(out), **passport.to_dict()}
    with atomic_dir(out, force=args.force) as tmp:
        (tmp / "arrays").mkdir()
        for name, arr in passport.arrays.items():
            np.save(tmp / "arrays" / f"{name}.npy", np.ascontiguousarray(arr), allow_pickle=False)
        pngs = [] if args.no_png else passport_pngs(passport, tmp, lf.source_positions)
        doc["files"] = ["passport.json", *(f"arrays/{k}.npy" for k in passport.arrays), *(p.name for p in pngs)]
        (tmp / "passport.json").write_text(json.dumps(doc, indent=2, allow_nan=False) + "\n", encoding="utf-8")
    ctx.emit(doc, lambda: _human(passport, out))
    return exit_status(passport.findings)
