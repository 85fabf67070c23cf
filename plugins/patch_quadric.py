"""Built-in plugin ``patch_quadric``: cortical source patches by quadric decimation.

Per hemisphere: decimate to the wanted number of centres (Garland & Heckbert
1997 quadric error, through fast-simplification), take the nearest original
vertices as seeds, give every vertex to its nearest seed along the surface
(multi-source Dijkstra on the edge graph), optionally recentre the seeds by
Lloyd steps, then measure each patch (area, area-weighted mean normal,
normal spread). Islands and patches outside / too close to the inner skull
are reported (and removed per option). Method notes: ``docs/source-patches.md``.
"""
from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from prep import hookimpl
from prep.descriptors import PatchMaker
from prep.errors import UsageError
from prep.geometry.clearance import DEFAULT_MIN_DISTANCE_MM, clearance_findings, surface_clearance
from prep.geometry.meshcheck import inspect_mesh, mesh_findings
from prep.geometry.meshstats import face_areas, referenced, vertex_adjacency, vertex_areas
from prep.geometry.patching import (assign_along_surface, count_for_spacing, decimation_seeds, patch_statistics,
                                    recentre_seeds)
from prep.model import Finding, Patches, Surface

ISLAND_POLICIES = ("keep-largest", "fail")
#: a piece of a surface is an "island" when its area is below this fraction of the largest piece's
#: (a file holding both hemispheres has two main pieces of similar area). Decision of ours.
MAIN_PIECE_FRACTION = 0.5

DEFAULTS = {"count": 8000, "spacing_mm": 0.0, "exclude": True, "min_distance_mm": DEFAULT_MIN_DISTANCE_MM,
            "islands": "keep-largest", "refine": 1}

SOURCE = "patch maker 'quadric'"


def _name(surface: Surface, index: int) -> str:
    if surface.role not in ("unknown", "cortex"):
        return surface.role
    return surface.provenance.file or f"surface {index}"


def _allocate(areas: np.ndarray, count: int) -> np.ndarray:
    """Split ``count`` over surfaces in proportion to ``areas`` (largest remainder, at least 1 each)."""
    share = count * areas / areas.sum()
    n = np.floor(share).astype(np.int64)
    rest = count - int(n.sum())
    if rest > 0:
        n[np.argsort(share - n)[::-1][:rest]] += 1
    return np.maximum(n, 1)


def _main_pieces(surface: Surface, labels: np.ndarray, name: str, policy: str) -> tuple[np.ndarray, list[Finding]]:
    """Faces to use (k,) bool, and the ``mesh.islands`` finding; ``labels`` (n,) component per vertex."""
    v, f = surface.vertices, surface.faces
    n_comp = int(labels.max()) + 1
    face_lab = labels[f[:, 0]]
    comp_area = np.bincount(face_lab, weights=face_areas(v, f), minlength=n_comp)
    pieces = np.unique(face_lab)
    if len(pieces) <= 1:
        return np.ones(len(f), bool), []
    main = comp_area >= MAIN_PIECE_FRACTION * comp_area.max()
    islands = np.setdiff1d(pieces, np.flatnonzero(main))
    if islands.size == 0:
        return np.ones(len(f), bool), []
    keep = main[face_lab]
    n_vert = int(np.isin(labels, islands).sum())
    removed = policy == "keep-largest"
    msg = (f"{name}: {islands.size} disconnected pieces smaller than {MAIN_PIECE_FRACTION:g} of the largest "
           f"({n_vert} vertices, {comp_area[islands].sum() * 1e6:.3g} mm^2 in all)")
    finding = Finding(code="mesh.islands", severity="warn" if removed else "fail",
                      message=msg + ("; left out of the patches" if removed else
                                     "; refused (islands = 'fail'): clean the mesh or use 'keep-largest'"),
                      subjects=(name,), source=SOURCE,
                      values={"islands": int(islands.size), "island_vertices": n_vert,
                              "island_area_m2": float(comp_area[islands].sum()), "removed": removed},
                      threshold={"main_piece_fraction": MAIN_PIECE_FRACTION})
    return (keep if removed else np.ones(len(f), bool)), [finding]


def _hemisphere(surface: Surface, centres: np.ndarray) -> np.ndarray:
    if surface.role == "cortex_left":
        return np.zeros(len(centres), np.int8)
    if surface.role == "cortex_right":
        return np.ones(len(centres), np.int8)
    return (centres[:, 0] >= 0).astype(np.int8)  # anatomy frame is RAS: +x to the right


def make(surfaces: Sequence[Surface], *, inner_skull: Surface | None = None, count: int = 8000,
         spacing_mm: float = 0.0, exclude: bool = True, min_distance_mm: float = DEFAULT_MIN_DISTANCE_MM,
         islands: str = "keep-largest", refine: int = 1) -> Patches:
    """Turn cortex surfaces into patches.

    Parameters
    ----------
    surfaces : sequence of Surface
        One per hemisphere (role ``cortex_left`` / ``cortex_right``) or a single
        ``cortex``; metres, one frame.
    inner_skull : Surface or None
        Closed surface in the same frame, for ``patches.outside`` / ``too-close``.
    count : int
        Total number of patches over all surfaces, split in proportion to area.
    spacing_mm : float
        If > 0, the mean centre spacing (mm) instead of ``count``.
    exclude : bool
        Remove patches outside or too close to the inner skull and report them
        here (``warn`` / ``info``). When false, nothing is removed and the
        ``patches`` check reports them (``fail`` / ``warn``), as the pipeline and
        the ``patches`` command run it after the maker.
    min_distance_mm : float
        Closer to the inner skull than this is too close (default 5 mm, common practice).
    islands : {'keep-largest', 'fail'}
        Disconnected small pieces: leave them out (``warn``) or refuse with a ``fail`` finding.
    refine : int
        Lloyd recentring steps (each one more Dijkstra pass).

    Returns
    -------
    Patches
        Centres (n, 3) m (a surface vertex each), unit normals, areas m^2, spread
        rad, hemisphere, ``vertex_patch`` over the surfaces' vertices
        concatenated in order (-1: excluded or island), findings.
    """
    surfaces = list(surfaces)
    if not surfaces:
        raise UsageError("patches: no cortex surface given")
    if islands not in ISLAND_POLICIES:
        raise UsageError(f"patches: islands must be one of {', '.join(ISLAND_POLICIES)}, got {islands!r}")
    if spacing_mm < 0 or (spacing_mm == 0 and count < 1):
        raise UsageError(f"patches: count must be >= 1 (got {count}) and spacing_mm >= 0 (got {spacing_mm})")
    if refine < 0:
        raise UsageError(f"patches: refine must be >= 0, got {refine}")
    frames = {s.frame for s in surfaces} | ({inner_skull.frame} if inner_skull is not None else set())
    if len(frames) > 1:
        raise UsageError(f"patches: surfaces are in different frames: {', '.join(sorted(frames))}")
    findings: list[Finding] = []
    kept: list[np.ndarray] = []
    graphs = []
    names = [_name(s, i) for i, s in enumerate(surfaces)]
    for s, name in zip(surfaces, names):
        if len(s.faces) == 0:
            raise UsageError(f"patches: {name} has no triangles")
        if not np.all(np.isfinite(s.vertices)):
            raise UsageError(f"patches: {name} has non-finite vertex coordinates")
        report = inspect_mesh(s.vertices, s.faces, self_intersection=False)
        findings += [f for f in mesh_findings(report, name=name, must_be_closed=False, source=SOURCE)
                     if f.code != "mesh.islands"]
        keep, fnd = _main_pieces(s, report.vertex_component, name, islands)
        kept.append(keep)
        graphs.append(vertex_adjacency(s.vertices, s.faces, unique_edges=report.edges.unique))
        findings += fnd
    areas = np.array([face_areas(s.vertices, s.faces[k]).sum() for s, k in zip(surfaces, kept)])
    if spacing_mm > 0:
        targets = np.array([count_for_spacing(a, spacing_mm) for a in areas])
    else:
        targets = _allocate(areas, int(count))

    cols: dict[str, list[np.ndarray]] = {k: [] for k in ("centres", "normals", "areas", "spread", "hemi", "vp")}
    offset = n_unref = n_unreached = 0
    for s, keep, target, graph in zip(surfaces, kept, targets, graphs):
        v, f = s.vertices, s.faces[keep]
        used = referenced(len(v), f)
        n_unref += int((~referenced(len(v), s.faces)).sum())
        seeds = decimation_seeds(v, f, int(target))
        weights = vertex_areas(v, f)
        patch, _ = assign_along_surface(v, f, seeds, graph=graph)
        for _ in range(refine):
            seeds = recentre_seeds(v, patch, len(seeds), weights)
            patch, _ = assign_along_surface(v, f, seeds, graph=graph)
        # the centre: the member nearest the members' area-weighted centroid (the seed itself once converged)
        centres = v[recentre_seeds(v, patch, len(seeds), weights)]
        a, nrm, spr = patch_statistics(v, f, patch, len(seeds))
        n_unreached += int((patch[used] < 0).sum())
        cols["centres"].append(centres)
        cols["normals"].append(nrm)
        cols["areas"].append(a)
        cols["spread"].append(spr)
        cols["hemi"].append(_hemisphere(s, centres))
        cols["vp"].append(np.where(patch >= 0, patch + offset, -1))
        offset += len(seeds)
    centres = np.concatenate(cols["centres"])
    vertex_patch = np.concatenate(cols["vp"])
    if n_unref or n_unreached:
        findings.append(Finding(code="mesh.unreferenced", severity="info", source=SOURCE,
                                message=f"{n_unref} vertices belong to no triangle and {n_unreached} to a piece "
                                        "without a patch centre; they were given to no patch",
                                values={"unreferenced": n_unref, "unreached": n_unreached}))
    remove = np.zeros(len(centres), bool)
    if inner_skull is not None and exclude:
        # removed patches are reported here; kept ones are left to the 'patches' check (no double report)
        inside, dist = surface_clearance(centres, inner_skull.vertices, inner_skull.faces)
        remove = ~inside | (dist * 1e3 < min_distance_mm)
        findings += clearance_findings(inside, dist, min_distance_mm=min_distance_mm, excluded=True, source=SOURCE)
    keep_p = ~remove
    newid = np.where(keep_p, np.cumsum(keep_p) - 1, -1)
    vertex_patch = np.where(vertex_patch >= 0, newid[np.maximum(vertex_patch, 0)], -1)
    return Patches(centres=centres[keep_p], normals=np.concatenate(cols["normals"])[keep_p],
                   areas=np.concatenate(cols["areas"])[keep_p], spread=np.concatenate(cols["spread"])[keep_p],
                   hemisphere=np.concatenate(cols["hemi"])[keep_p], vertex_patch=vertex_patch,
                   frame=surfaces[0].frame, findings=tuple(findings))


@hookimpl
def headprep_register_patch_makers() -> list[PatchMaker]:
    return [PatchMaker(name="quadric", make=make, defaults=DEFAULTS,
                       requires=("fast_simplification", "scipy", "trimesh"),
                       description="quadric decimation, membership along the surface, area/normal/spread per patch")]
