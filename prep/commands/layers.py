"""``headprep layers``: check (and derive) the head-model layer meshes.

Reads the scalp and optional skull meshes, repairs inward orientation, with
``--derive`` builds the missing skull layers by inward offsets, runs every
mesh and layer check, and draws cross-sections through the layers.
"""
from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

import numpy as np

from ..console import exit_status, format_findings
from ..errors import UsageError

HELP = "check (and derive) the head-model layer meshes"

FIGURE = "layers-sections.png"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--scalp", required=True, metavar="MESH", help="scalp mesh (closed)")
    parser.add_argument("--outer-skull", metavar="MESH", help="outer skull mesh")
    parser.add_argument("--inner-skull", metavar="MESH", help="inner skull mesh")
    parser.add_argument("--derive", action="store_true",
                        help="build missing skull layers from the scalp by inward offsets")
    parser.add_argument("--scalp-thickness", type=float, default=6.0, metavar="MM",
                        help="scalp to outer skull when deriving, mm (default 6, common practice)")
    parser.add_argument("--skull-thickness", type=float, default=6.0, metavar="MM",
                        help="outer to inner skull when deriving, mm (default 6, common practice)")
    parser.add_argument("--vertices", type=int, default=2562, metavar="N",
                        help="vertices per derived layer (642, 2562, 10242; default 2562)")
    parser.add_argument("--min-gap", type=float, default=2.0, metavar="MM",
                        help="minimum gap between layers, mm (default 2, common practice)")
    parser.add_argument("--mesh-units", metavar="U", help="length unit of the mesh files (mm, cm, m)")
    parser.add_argument("--out", metavar="DIR", help="write the figure (and derived meshes) here")
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def _read(ctx, args: argparse.Namespace) -> dict[str, Any]:  # noqa: ANN001
    from ..readers import read_surface

    given = {"scalp": args.scalp, "outer_skull": args.outer_skull, "inner_skull": args.inner_skull}
    return {role: read_surface(ctx.registry, path, role, units=args.mesh_units) if path else None
            for role, path in given.items()}


def _sections(layers, path: Path) -> Path:  # noqa: ANN001
    """Three orthogonal cross-sections through the centre of the scalp."""
    import trimesh

    from ..render import figure, save_figure_png

    centre = layers[-1].vertices.mean(axis=0)
    fig = figure(figsize=(12.5, 4.2))
    fig.subplots_adjust(wspace=0.4)
    colours = {"inner_skull": "#b0413e", "outer_skull": "#3e6fb0", "scalp": "#3a8f4b"}
    planes = (("sagittal (x = c)", 0, (1, 2)), ("coronal (y = c)", 1, (0, 2)), ("axial (z = c)", 2, (0, 1)))
    for i, (title, axis, (u, w)) in enumerate(planes):
        ax = fig.add_subplot(1, 3, i + 1)
        normal = np.eye(3)[axis]
        for s in layers:
            mesh = trimesh.Trimesh(s.vertices, s.faces, process=False)
            segs = trimesh.intersections.mesh_plane(mesh, normal, centre)
            for seg in segs * 1000.0:
                ax.plot(seg[:, u], seg[:, w], color=colours.get(s.role, "k"), lw=1.0)
            ax.plot([], [], color=colours.get(s.role, "k"), label=s.role.replace("_", " "))
        ax.set_aspect("equal")
        ax.set_title(title)
        ax.set_xlabel("xyz"[u] + " (mm)")
        ax.set_ylabel("xyz"[w] + " (mm)")
        if i == 0:
            ax.legend(loc="lower left", fontsize=8)
    return save_figure_png(fig, path)


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    from ..layers import DeriveSettings, check_layers, derive_head, repair_orientation

    meshes = _read(ctx, args)
    missing = [r for r in ("outer_skull", "inner_skull") if meshes[r] is None]
    if missing and not args.derive:
        raise UsageError(f"missing {' and '.join('--' + r.replace('_', '-') for r in missing)}; "
                         f"give the meshes or use --derive")
    if args.min_gap < 0 or args.scalp_thickness <= 0 or args.skull_thickness <= 0:
        raise UsageError("--min-gap must be >= 0 and thicknesses > 0 (mm)")
    findings = []
    for role, surf in list(meshes.items()):
        if surf is not None:
            meshes[role], note = repair_orientation(surf)
            if note:
                findings.append(note)
    derived: list[str] = []
    if missing:
        settings = DeriveSettings(scalp_thickness=args.scalp_thickness / 1000, skull_thickness=args.skull_thickness / 1000,
                                  n_vertices=args.vertices, min_gap=args.min_gap / 1000)
        (inner, outer, scalp), notes = derive_head(meshes["scalp"], settings, outer_skull=meshes["outer_skull"])
        findings += notes
        derived = missing
        meshes = {"inner_skull": meshes["inner_skull"] or inner, "outer_skull": meshes["outer_skull"] or outer,
                  "scalp": scalp}  # the remeshed scalp shares the rays of the derived layers
    layers = (meshes["inner_skull"], meshes["outer_skull"], meshes["scalp"])
    findings += check_layers(ctx.registry, layers, {"layers": {"min_gap": args.min_gap / 1000}})
    written: list[str] = []
    if args.out:
        out = Path(args.out)
        written.append(str(_sections(layers, out / FIGURE)))
        for role in derived + (["scalp"] if derived else []):
            written.append(str(_write_ply(meshes[role], out / f"{role}-derived.ply")))
    doc = {"command": "layers",
           "layers": [{"role": s.role, "n_vertices": len(s.vertices), "n_faces": len(s.faces),
                       "file": s.provenance.file} for s in layers],
           "derived": derived, "files": written, "findings": [f.to_dict() for f in findings]}

    def human() -> str:
        lines = [f"{s.role:12} {len(s.vertices):7d} vertices  {len(s.faces):7d} faces" for s in layers]
        if derived:
            lines.append("derived: " + ", ".join(derived))
        lines += [f"wrote {w}" for w in written]
        lines.append(format_findings(findings) if findings else "no findings")
        return "\n".join(lines)

    ctx.emit(doc, human)
    return exit_status(findings)


def _write_ply(surface, path: Path) -> Path:  # noqa: ANN001
    """A derived layer as binary PLY in metres (trimesh export, written atomically)."""
    import trimesh

    from ..atomic import write_bytes_atomic

    data = trimesh.Trimesh(surface.vertices, surface.faces, process=False).export(file_type="ply")
    write_bytes_atomic(path, data)
    return path
