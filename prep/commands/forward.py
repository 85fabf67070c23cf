"""``headprep forward``: compute a lead field for given sources with a chosen head model."""
from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np

from ..atomic import atomic_file, check_writable
from ..errors import ReadError, UsageError
from ..forward import DEFAULT_SHELLS, build_forward, outside_innermost, sphere_conductor
from ..console import exit_status, format_findings
from ..model import Sensors, VolumeConductor
from ..readers import check_input_file, read_sensors, read_surface

HELP = "compute a lead field for given sources with a chosen head model"
DESCRIPTION = """\
Compute a lead field (V/(A*m)) at given dipole positions, e.g. to check the
kit's numbers against another computation.

Sources: a TSV with header 'x y z' (free orientation: output has x, y, z
components) or 'x y z nx ny nz' (fixed orientation along the normal, which is
scaled to unit length), in metres; or a .npy of shape (n, 3) or (n, 6).
Output: .npy of shape (n_sensors, n_sources) for fixed or
(n_sensors, n_sources, 3) for free orientation. Rows are the EEG channels of
the sensor file in file order (channels of other kinds, e.g. EOG, are left
out). Average reference unless --reference LABEL.

--model spheres: concentric spheres; --centre, --radii and --conductivities
(metres, S/m, inside -> out) default to a sphere fitted to the electrodes and
the published defaults of docs/sphere-model.md. Sources must lie inside the
innermost sphere.
--model bem: boundary elements on --inner-skull, --outer-skull and --scalp
meshes (same frame as the electrodes), conductivities inside -> out
(default 0.33, 0.0042, 0.33 S/m); --mesh-units states the meshes' length unit
(else it is inferred from their size, with an input.units-suspect warning).
Exit 0, or 1 if a reader reported a failed check; 2 when an input cannot be
used (nothing is written).
"""

#: default conductivities for three nested layers, inside -> out (brain, skull, scalp), S/m:
#: the same published values as the 3-shell sphere model (docs/sphere-model.md).
LAYER_CONDUCTIVITIES = DEFAULT_SHELLS[3][1]


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--model", choices=("spheres", "bem"), required=True, help="head model")
    parser.add_argument("--sensors", required=True, metavar="FILE", help="electrode file")
    parser.add_argument("--sources", required=True, metavar="FILE", help="dipole positions (.tsv or .npy), metres")
    parser.add_argument("--out", required=True, metavar="LF.npy", help="where to write the lead field")
    parser.add_argument("--reference", default="average", metavar="LABEL",
                        help="reference electrode label (default: average reference)")
    parser.add_argument("--reader", metavar="NAME", help="sensor reader to use (default: by file name)")
    parser.add_argument("--units", metavar="UNIT", help="length unit of the sensor file (m, cm, mm)")
    parser.add_argument("--centre", metavar="X,Y,Z", help="sphere centre, metres (default: fitted)")
    parser.add_argument("--radii", metavar="R1,R2,...", help="sphere radii inside -> out, metres")
    parser.add_argument("--conductivities", metavar="S1,S2,...", help="conductivities inside -> out, S/m")
    parser.add_argument("--scalp", metavar="MESH", help="scalp mesh (bem)")
    parser.add_argument("--outer-skull", metavar="MESH", help="outer skull mesh (bem)")
    parser.add_argument("--inner-skull", metavar="MESH", help="inner skull mesh (bem)")
    parser.add_argument("--mesh-units", metavar="UNIT", help="length unit of the meshes (m, cm, mm; bem)")
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def _floats(option: str, text: str | None, count: int | None = None) -> list[float] | None:
    if text is None:
        return None
    try:
        values = [float(v) for v in text.replace(" ", "").split(",") if v != ""]
    except ValueError:
        raise UsageError(f"{option} {text!r}: expected comma-separated numbers") from None
    if not values or not all(np.isfinite(values)):
        raise UsageError(f"{option} {text!r}: expected finite comma-separated numbers")
    if count is not None and len(values) != count:
        raise UsageError(f"{option} {text!r}: expected {count} numbers, got {len(values)}")
    return values


def read_sources(path: Path) -> tuple[np.ndarray, np.ndarray | None, list[int]]:
    """Dipole positions (m, 3) metres, unit normals (m, 3) or None, and each row's line (record) number."""
    if path.suffix.lower() == ".npy":
        try:
            arr = np.load(path, allow_pickle=False)
        except (ValueError, OSError) as exc:
            raise ReadError(path, None, f"not a readable .npy array ({exc})") from None
        if arr.ndim != 2 or arr.shape[1] not in (3, 6) or arr.dtype.kind not in "fiu":
            raise ReadError(path, None, f"expected a numeric array of shape (n, 3) or (n, 6), got {arr.shape} "
                                        f"{arr.dtype}")
        arr = arr.astype(np.float64)
        lines = list(range(1, len(arr) + 1))
    else:
        rows, lines = [], []
        header: list[str] | None = None
        with open(path, encoding="utf-8-sig", errors="replace") as fh:
            for lineno, raw in enumerate(fh, 1):
                text = raw.strip()
                if not text or text.startswith("#"):
                    continue
                cells = text.replace(",", " ").split()
                if header is None:
                    header = [c.lower() for c in cells]
                    if header not in (["x", "y", "z"], ["x", "y", "z", "nx", "ny", "nz"]):
                        raise ReadError(path, lineno, f"expected the header 'x y z' or 'x y z nx ny nz', "
                                                      f"got {text!r}")
                    continue
                if len(cells) != len(header):
                    raise ReadError(path, lineno, f"expected {len(header)} numbers, got {len(cells)}: {text!r}")
                try:
                    rows.append([float(c) for c in cells])
                except ValueError:
                    raise ReadError(path, lineno, f"not a number in {text!r}") from None
                lines.append(lineno)
        if header is None:
            raise ReadError(path, None, "empty file: expected the header 'x y z' or 'x y z nx ny nz'")
        arr = np.asarray(rows, dtype=np.float64).reshape(-1, len(header))
    if len(arr) == 0:
        raise ReadError(path, None, "no sources")
    bad = ~np.all(np.isfinite(arr), axis=1)
    if bad.any():
        raise ReadError(path, lines[int(np.flatnonzero(bad)[0])], "non-finite value")
    if arr.shape[1] == 3:
        return arr, None, lines
    norms = np.linalg.norm(arr[:, 3:], axis=1)
    if np.any(norms == 0):
        raise ReadError(path, lines[int(np.flatnonzero(norms == 0)[0])], "zero-length normal")
    return arr[:, :3], arr[:, 3:] / norms[:, None], lines


def _conductor(args: argparse.Namespace, ctx, positions: np.ndarray, frame: str) -> VolumeConductor:  # noqa: ANN001
    if args.model == "spheres":
        for opt in ("scalp", "outer_skull", "inner_skull", "mesh_units"):
            if getattr(args, opt):
                raise UsageError(f"--{opt.replace('_', '-')} belongs to --model bem")
        return sphere_conductor(positions, centre=_floats("--centre", args.centre, 3),
                                radii=_floats("--radii", args.radii),
                                conductivities=_floats("--conductivities", args.conductivities), frame=frame)
    for opt in ("centre", "radii"):
        if getattr(args, opt):
            raise UsageError(f"--{opt} belongs to --model spheres")
    missing = [f"--{o.replace('_', '-')}" for o in ("inner_skull", "outer_skull", "scalp") if not getattr(args, o)]
    if missing:
        raise UsageError(f"--model bem needs {', '.join(missing)}")
    sig = _floats("--conductivities", args.conductivities, 3) or list(LAYER_CONDUCTIVITIES)
    layers = tuple(read_surface(ctx.registry, getattr(args, o), o, frame=frame, units=args.mesh_units)
                   for o in ("inner_skull", "outer_skull", "scalp"))
    try:
        return VolumeConductor(kind="layers", conductivities=sig, layers=layers, frame=frame)
    except ValueError as exc:
        raise UsageError(f"--conductivities: {exc}") from exc


def _refuse_nonfinite(sensors: Sensors) -> None:
    """A lead field needs every EEG electrode's position: a missing one is unusable input (exit 2)."""
    bad = np.flatnonzero(sensors.eeg_mask & ~np.all(np.isfinite(sensors.positions), axis=1))
    if bad.size:
        i = int(bad[0])
        lines = sensors.provenance.extra.get("channel_lines")
        line = lines[i] if lines is not None and len(lines) == len(sensors) else None
        raise ReadError(sensors.provenance.file or "sensors", line,
                        f"electrode {sensors.labels[i]} has a missing or non-finite coordinate "
                        f"({bad.size} electrode(s) in all); a lead field needs every electrode's position")


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    src_path = check_input_file(args.sources, "sources")
    out = Path(args.out)
    if out.is_dir():
        raise UsageError(f"{out}: is a directory; give a file name for the lead field")
    check_writable(out)  # refuse before a (possibly long) computation
    sensors = read_sensors(ctx.registry, args.sensors, reader=args.reader, units=args.units)
    eeg = sensors.select(sensors.eeg_mask)
    if len(eeg) == 0:
        raise UsageError(f"{args.sensors}: no EEG channels")
    _refuse_nonfinite(sensors)
    positions, normals, lines = read_sources(src_path)
    conductor = _conductor(args, ctx, eeg.positions, eeg.frame)
    if conductor.kind == "layers":  # a boundary-element model would give zero columns: refuse instead
        from ..layers import sources_outside

        found = sources_outside(conductor, positions)
        if found:
            i = int(found[0].values["rows"][0])
            raise ReadError(src_path, lines[i], f"source {i} lies outside the inner skull mesh "
                                                f"({len(found[0].values['rows'])} such sources)")
    # what the readers noticed (units assumed from the size...) is shown, as in the other commands
    findings = [*sensors.findings, *(f for layer in conductor.layers or () for f in layer.findings)]
    outside = outside_innermost(conductor, positions)
    if outside.any():
        i = int(np.flatnonzero(outside)[0])
        dist = float(np.linalg.norm(positions[i] - conductor.centre))
        raise ReadError(src_path, lines[i], f"source at {dist * 1e3:.1f} mm from the sphere centre is not inside "
                                            f"the innermost sphere (radius {conductor.radii[0] * 1e3:.1f} mm; "
                                            "source files are in metres)")
    fm = build_forward(ctx.registry, conductor, eeg.labels, eeg.positions, reference=args.reference)
    step = 4096
    parts = []
    with ctx.progress((len(positions) + step - 1) // step, "lead field") as advance:
        for i in range(0, len(positions), step):
            parts.append(fm.evaluate(positions[i:i + step], None if normals is None else normals[i:i + step]))
            advance()
    matrix = np.concatenate(parts, axis=1)
    if not np.all(np.isfinite(matrix)):
        raise UsageError("the lead field has non-finite values; nothing written")
    with atomic_file(out, "wb") as fh:
        np.save(fh, matrix, allow_pickle=False)
    orientation = "fixed" if normals is not None else "free"
    doc = {"output": str(out), "shape": list(matrix.shape), "orientation": orientation,
           "reference": args.reference, "units": "V/(A*m)", "model": args.model, "solver": fm.solver,
           "conductor": conductor.describe(), "sensor_labels": list(eeg.labels),
           "n_sensors": matrix.shape[0], "n_sources": matrix.shape[1],
           "findings": [f.to_dict() for f in findings]}

    def human() -> str:
        lines_out = [f"wrote {out}: {matrix.shape[0]} EEG channels x {matrix.shape[1]} sources"
                     f"{' x 3 (x, y, z)' if orientation == 'free' else ''}, V/(A*m), "
                     f"{'average' if args.reference == 'average' else args.reference} reference"]
        d = conductor.describe()
        if conductor.kind == "spheres":
            lines_out.append("  spheres: centre " + ", ".join(f"{v * 1e3:.1f}" for v in d["centre_m"]) + " mm; radii "
                             + ", ".join(f"{v * 1e3:.1f}" for v in d["radii_m"]) + " mm; conductivities "
                             + ", ".join(f"{v:g}" for v in d["conductivities_S_per_m"]) + " S/m")
        else:
            lines_out.append("  layers: conductivities "
                             + ", ".join(f"{v:g}" for v in d["conductivities_S_per_m"]) + " S/m")
        if findings:
            lines_out.append(format_findings(findings))
        return "\n".join(lines_out)

    ctx.emit(doc, human)
    return exit_status(findings)
