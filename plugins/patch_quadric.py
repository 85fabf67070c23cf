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
from dataclasses import dataclass

import numpy as np

from prep import hookimpl
from prep.descriptors import PatchMaker
from prep.errors import UsageError
from prep.geometry.clearance import DEFAULT_MIN_DISTANCE_MM, clearance_findings, surface_clearance
from prep.geometry.meshcheck import inspect_mesh, mesh_findings
from prep.geometry.meshstats import (face_areas, face_cross, referenced, vertex_adjacency, vertex_areas,
                                     vertex_normals)
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


def _main_pieces(surface: Surface, labels: np.ndarray, face_area: np.ndarray, name: str,
                 policy: str) -> tuple[np.ndarray, list[Finding]]:
    """Faces to use (k,) bool, and the ``mesh.islands`` finding.

    ``labels`` (n,) is the component of each vertex, ``face_area`` (k,) m^2.
    """
    v, f = surface.vertices, surface.faces
    n_comp = int(labels.max()) + 1
    face_lab = labels[f[:, 0]]
    comp_area = np.bincount(face_lab, weights=face_area, minlength=n_comp)
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


@dataclass(frozen=True)
class _Prepared:
    """One surface, measured: faces kept, edge graph, area and findings."""

    keep: np.ndarray
    face_piece: np.ndarray
    graph: object
    cross: np.ndarray
    area: float
    n_unreferenced: int
    findings: tuple[Finding, ...]
    flip: bool


def _prepare(s: Surface, name: str, islands: str) -> _Prepared:
    cross = face_cross(s.vertices, s.faces)
    report = inspect_mesh(s.vertices, s.faces, self_intersection=False, cross=cross)
    found = [f for f in mesh_findings(report, name=name, must_be_closed=False, source=SOURCE)
             if f.code != "mesh.islands"]
    # a closed, consistently wound surface with negative volume is wound inward: use outward normals
    flip = report.closed and not len(report.winding_conflict_edges) and report.volume < 0
    fa = face_areas(s.vertices, s.faces, cross=cross)
    keep, fnd = _main_pieces(s, report.vertex_component, fa, name, islands)
    graph = vertex_adjacency(s.vertices, s.faces, unique_edges=report.edges.unique)
    area = float(fa[keep].sum())
    return _Prepared(keep=keep, face_piece=report.vertex_component[s.faces[keep][:, 0]], graph=graph, cross=cross[keep], area=area,
                     n_unreferenced=int((~referenced(len(s.vertices), s.faces)).sum()),
                     findings=tuple(found + fnd), flip=flip)


def _partition(s: Surface, prep: _Prepared, target: int, *, refine: int) -> dict:
    """Seeds, membership along the surface, Lloyd steps and statistics for one surface."""
    v, f = s.vertices, s.faces[prep.keep]
    weights = vertex_areas(v, f, cross=prep.cross)
    # each piece (e.g. both hemispheres in one file) is decimated to its share of the target on its own
    pieces, piece_of_face = np.unique(prep.face_piece, return_inverse=True)
    piece_area = np.bincount(piece_of_face.reshape(-1), weights=0.5 * np.linalg.norm(prep.cross, axis=1),
                             minlength=len(pieces))
    shares = _allocate(piece_area, int(target)) if len(pieces) > 1 else [int(target)]
    seeds = np.unique(np.concatenate([decimation_seeds(v, f[piece_of_face.reshape(-1) == i], int(n))
                                      for i, n in enumerate(shares)]))
    patch, _ = assign_along_surface(v, f, seeds, graph=prep.graph)
    for _ in range(refine):
        seeds = recentre_seeds(v, patch, len(seeds), weights)
        patch, _ = assign_along_surface(v, f, seeds, graph=prep.graph)
    # the centre: the member nearest the members' area-weighted centroid (the seed itself once converged)
    centres = v[recentre_seeds(v, patch, len(seeds), weights)]
    nrm, _ = vertex_normals(v, f, cross=prep.cross)
    if prep.flip:
        nrm = -nrm
    a, n, spr = patch_statistics(v, f, patch, len(seeds), vertex_area=weights, vertex_normal=nrm)
    return {"centres": centres, "normals": n, "areas": a, "spread": spr, "patch": patch,
            "unreached": int((patch[referenced(len(v), f)] < 0).sum())}


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
    names = [_name(s, i) for i, s in enumerate(surfaces)]
    for s, name in zip(surfaces, names):
        if len(s.faces) == 0:
            raise UsageError(f"patches: {name} has no triangles")
        if not np.all(np.isfinite(s.vertices)):
            raise UsageError(f"patches: {name} has non-finite vertex coordinates")
    # sequential on purpose: fast-simplification keeps its mesh in global state, so two decimations
    # in threads corrupt each other (measured: wrong vertex counts)
    prepared = [_prepare(s, name, islands) for s, name in zip(surfaces, names)]
    areas = np.array([p.area for p in prepared])
    if spacing_mm > 0:
        targets = [count_for_spacing(a, spacing_mm) for a in areas]
    else:
        targets = _allocate(areas, int(count)).tolist()
    parts = [_partition(s, p, t, refine=refine) for s, p, t in zip(surfaces, prepared, targets)]
    findings = [f for p in prepared for f in p.findings]
    offsets = np.cumsum([0] + [len(p["centres"]) for p in parts])
    cols = {k: [p[k] for p in parts] for k in ("centres", "normals", "areas", "spread")}
    cols["hemi"] = [_hemisphere(s, p["centres"]) for s, p in zip(surfaces, parts)]
    cols["vp"] = [np.where(p["patch"] >= 0, p["patch"] + o, -1) for p, o in zip(parts, offsets)]
    n_unref = sum(p.n_unreferenced for p in prepared)
    n_unreached = sum(p["unreached"] for p in parts)
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
