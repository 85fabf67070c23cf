"""``headprep patches``: turn cortex surfaces into source patches.

Reads one or more cortex meshes (one per hemisphere, or one for both), applies
the safe mesh repairs, asks the patch-maker plugin for patches, and writes them
as an ``.npz`` of plain arrays (no pickles; format in docs/source-patches.md)
plus a PNG of the cortex coloured by patch.
"""
from __future__ import annotations

import argparse
import io
import json
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np

from ..atomic import check_writable, write_bytes_atomic
from ..checks import run_checks
from ..console import exit_status, format_findings
from ..errors import UsageError
from ..geometry.meshcheck import repair_surface
from ..model import Finding, Patches, Surface
from ..readers import read_surface

HELP = "turn cortex surfaces into source patches"
DESCRIPTION = """Turn cortex surfaces into source patches (one fixed-orientation dipole each).

Each CORTEX mesh is a hemisphere (given two, the one lying at negative x is
the left) or both hemispheres in one file. The patches are written to --out
(.npz of plain arrays: source_positions, source_normals, source_areas,
source_spread, source_hemisphere, source_vertex_patch, surface_vertex_counts,
meta_json) and a picture of the cortex coloured by patch next to it (.png).
"""

#: format tag stored in meta_json
FORMAT = "headprep-patches/1"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("cortex", nargs="+", metavar="CORTEX", help="cortex mesh(es): PLY, STL, OBJ, OFF, GIfTI")
    parser.add_argument("--count", type=int, default=None, help="total number of patches (default 8000)")
    parser.add_argument("--spacing", type=float, default=None, metavar="MM",
                        help="mean patch spacing in mm, instead of --count")
    parser.add_argument("--inner-skull", metavar="MESH", help="inner-skull mesh: report (and remove) patches "
                        "outside it or too close to it")
    parser.add_argument("--min-distance", type=float, default=None, metavar="MM",
                        help="closest allowed distance to the inner skull, mm (default 5)")
    parser.add_argument("--keep-excluded", action="store_true",
                        help="keep patches outside / too close to the inner skull (still reported)")
    parser.add_argument("--islands", choices=("keep-largest", "fail"), default=None,
                        help="disconnected small pieces: leave them out (default) or fail")
    parser.add_argument("--mesh-units", metavar="U", help="length unit of the mesh files (m, cm, mm)")
    parser.add_argument("--reader", metavar="NAME", help="surface reader to use instead of choosing by file name")
    parser.add_argument("--method", default="quadric", metavar="NAME", help="patch maker (default quadric)")
    parser.add_argument("--out", required=True, metavar="FILE", help="output .npz")
    parser.add_argument("--picture", metavar="PNG", help="picture path (default: --out with .png)")
    parser.add_argument("--no-picture", action="store_true", help="do not render the picture")
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def _roles(surfaces: list[Surface]) -> list[str]:
    if len(surfaces) == 1:
        return ["cortex"]
    if len(surfaces) == 2:
        xs = [float(np.nanmean(s.vertices[:, 0])) for s in surfaces]
        if (xs[0] < 0) != (xs[1] < 0):
            return ["cortex_left", "cortex_right"] if xs[0] < 0 else ["cortex_right", "cortex_left"]
    return ["cortex"] * len(surfaces)


def patches_arrays(patches: Patches, surfaces: list[Surface], meta: dict[str, Any]) -> dict[str, np.ndarray]:
    """The arrays written to the ``.npz`` (names shared with the bundle's source arrays)."""
    return {
        "source_positions": np.asarray(patches.centres), "source_normals": np.asarray(patches.normals),
        "source_areas": np.asarray(patches.areas), "source_spread": np.asarray(patches.spread),
        "source_hemisphere": np.asarray(patches.hemisphere),
        "source_vertex_patch": np.asarray(patches.vertex_patch if patches.vertex_patch is not None
                                          else np.zeros(0, np.int64)),
        "surface_vertex_counts": np.array([len(s.vertices) for s in surfaces], dtype=np.int64),
        "meta_json": np.array(json.dumps(meta, allow_nan=False)),
    }


def write_patches(path: str | Path, patches: Patches, surfaces: list[Surface], meta: dict[str, Any]) -> Path:
    """Write ``patches`` atomically as an ``.npz`` of plain arrays (loadable with ``allow_pickle=False``)."""
    buf = io.BytesIO()
    np.savez_compressed(buf, **patches_arrays(patches, surfaces, meta))
    write_bytes_atomic(path, buf.getvalue())
    return Path(path)


def read_patches(path: str | Path) -> tuple[Patches, dict[str, Any]]:
    """Load what :func:`write_patches` wrote: the Patches (no findings) and the metadata."""
    with np.load(path, allow_pickle=False) as z:
        meta = json.loads(str(z["meta_json"]))
        vp = z["source_vertex_patch"]
        return Patches(centres=z["source_positions"], normals=z["source_normals"], areas=z["source_areas"],
                       spread=z["source_spread"], hemisphere=z["source_hemisphere"],
                       vertex_patch=vp if vp.size else None, frame=meta.get("frame", "anatomy")), meta


def render_patches(path: str | Path, surfaces: list[Surface], patches: Patches) -> Path:
    """A PNG of the surfaces coloured by patch (excluded vertices grey), viewed from above-left."""
    from .. import render

    import pyvista as pv

    p = render.plotter((900, 700))
    vp = patches.vertex_patch
    start = 0
    rng = np.random.default_rng(0)
    colours = rng.uniform(0.15, 0.95, size=(max(len(patches), 1), 3))  # neighbours rarely alike
    for s in surfaces:
        faces = np.hstack([np.full((len(s.faces), 1), 3), s.faces]).ravel()
        mesh = pv.PolyData(np.asarray(s.vertices), faces)
        rgb = np.full((len(s.vertices), 3), 0.6)
        if vp is not None:
            own = vp[start:start + len(s.vertices)]
            rgb[own >= 0] = colours[own[own >= 0]]
        start += len(s.vertices)
        mesh.point_data["rgb"] = (rgb * 255).astype(np.uint8)
        p.add_mesh(mesh, scalars="rgb", rgb=True, smooth_shading=True)
    p.view_vector((-1.0, -0.6, 0.8), viewup=(0, 0, 1))
    p.add_text(f"{len(patches)} patches", font_size=10, color="black")
    return render.save_plotter_png(p, path)


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    out = Path(args.out)
    if out.suffix.lower() != ".npz":
        raise UsageError(f"--out {out}: the patches file must end in .npz")
    check_writable(out)
    if args.count is not None and args.count < 1:
        raise UsageError(f"--count {args.count}: must be at least 1")
    if args.spacing is not None and args.spacing <= 0:
        raise UsageError(f"--spacing {args.spacing}: must be positive (mm)")
    reg = ctx.registry
    desc = reg.get("patch_maker", args.method)
    given: dict[str, Any] = {}
    if args.count is not None:
        given["count"] = args.count
    if args.spacing is not None:
        given["spacing_mm"] = float(args.spacing)
    if args.min_distance is not None:
        given["min_distance_mm"] = float(args.min_distance)
    if args.keep_excluded:
        given["exclude"] = False
    if args.islands is not None:
        given["islands"] = args.islands
    options = reg.options(desc, given, "command line")

    findings: list[Finding] = []
    surfaces: list[Surface] = []
    for path in args.cortex:
        s = read_surface(reg, path, "cortex", reader=args.reader, units=args.mesh_units)
        s, repaired = repair_surface(s)
        findings += list(s.findings) + repaired
        surfaces.append(s)
    surfaces = [replace(s, role=r) for s, r in zip(surfaces, _roles(surfaces))]
    skull = None
    if args.inner_skull:
        skull = read_surface(reg, args.inner_skull, "inner_skull", reader=args.reader, units=args.mesh_units)
        findings += list(skull.findings)
    with ctx.progress(1, "making patches") as advance:
        patches = reg.call(desc, "make", surfaces, inner_skull=skull,
                           step=f"patch maker '{desc.name}'", **options)
        advance()
    if not isinstance(patches, Patches):
        raise UsageError(f"patch maker '{desc.name}' returned {type(patches).__name__}, not Patches")
    findings += list(patches.findings)
    checked = run_checks(reg, "patches", patches=patches, inner_skull=skull,
                         options={"min_distance_mm": options.get("min_distance_mm")}
                         if "min_distance_mm" in options else None)
    findings += list(checked.findings)
    meta = {"format": FORMAT, "frame": patches.frame, "method": desc.name, "options": options,
            "units": {"positions": "m", "areas": "m^2", "spread": "rad"},
            "surfaces": [{"file": s.provenance.file, "sha256": s.provenance.sha256, "role": s.role,
                          "unit": s.provenance.unit, "n_vertices": len(s.vertices), "n_faces": len(s.faces)}
                         for s in surfaces],
            "inner_skull": None if skull is None else {"file": skull.provenance.file,
                                                       "sha256": skull.provenance.sha256},
            "findings": [f.to_dict() for f in findings]}
    write_patches(out, patches, surfaces, meta)
    picture = None
    if not args.no_picture:
        picture = Path(args.picture) if args.picture else out.with_suffix(".png")
        render_patches(picture, surfaces, patches)
    per_hemi = {str(h): int((patches.hemisphere == h).sum()) for h in np.unique(patches.hemisphere)}
    doc = {"command": "patches", "out": str(out), "picture": None if picture is None else str(picture),
           "n_patches": len(patches), "per_hemisphere": per_hemi,
           "total_area_m2": float(patches.areas.sum()),
           "mean_area_mm2": float(patches.areas.mean() * 1e6) if len(patches) else 0.0,
           "median_spread_deg": float(np.degrees(np.median(patches.spread))) if len(patches) else 0.0,
           "findings": [f.to_dict() for f in findings]}

    def human() -> str:
        side = {"0": "left", "1": "right", "-1": "hemisphere unknown"}  # docs/bundle-format.md: 0 left, 1 right
        lines = [f"{len(patches)} patches ({', '.join(f'{side.get(k, k)} {v}' for k, v in per_hemi.items())}), "
                 f"total area {doc['total_area_m2'] * 1e4:.1f} cm^2, mean {doc['mean_area_mm2']:.1f} mm^2, "
                 f"median normal spread {doc['median_spread_deg']:.1f} deg",
                 f"wrote {out}" + (f" and {picture}" if picture else "")]
        if findings:
            lines.append(format_findings(findings))
        return "\n".join(lines)

    ctx.emit(doc, human)
    return exit_status(findings)
