"""Head-model layers: run their checks, repair orientation, derive skull layers from the scalp.

The checks themselves are plugins (target ``"surface"`` for each mesh,
``"layers"`` for the nested set); this module asks the registry for them, so
the pipeline and ``headprep layers`` run the same checks before any solve.
"""
from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from .errors import UsageError
from .geometry.layers import (derive_inward, inside, interior_centre, is_closed, orient_outward,
                              remesh_radial, star_shaped)
from .model import Finding, Surface, VolumeConductor

__all__ = ["LAYER_ROLES", "DeriveSettings", "check_layers", "repair_orientation", "derive_layers", "derive_head",
           "sources_outside"]

#: roles of the three layers, inside -> out
LAYER_ROLES = ("inner_skull", "outer_skull", "scalp")


@dataclass(frozen=True, kw_only=True)
class DeriveSettings:
    """How skull layers are derived from a scalp (metres).

    Defaults are common practice for adult heads: about 6 mm of scalp and
    soft tissue over about 6 mm of skull (no single published source; typical
    of values used in template-based head models).

    Parameters
    ----------
    scalp_thickness : float
        Scalp to outer skull, metres.
    skull_thickness : float
        Outer skull to inner skull, metres.
    n_vertices : int
        Vertices per layer after radial remeshing (an icosphere count: 642, 2562...).
    min_gap : float
        Smallest allowed gap along a ray between derived layers, metres.
    smoothing : int
        Neighbour-averaging passes of the vertex normals before the offset.
    """

    scalp_thickness: float = 0.006
    skull_thickness: float = 0.006
    n_vertices: int = 2562
    min_gap: float = 0.002
    smoothing: int = 20


def _dedupe(findings: list[Finding]) -> list[Finding]:
    seen: set[tuple[str, tuple[str, ...]]] = set()
    out = []
    for f in findings:
        key = (f.code, f.subjects)
        if key not in seen:
            seen.add(key)
            out.append(f)
    return out


def check_layers(registry: Any, layers: tuple[Surface, ...] | list[Surface],
                 options: dict[str, dict[str, Any]] | None = None) -> list[Finding]:
    """Run every ``"surface"`` check on each layer and every ``"layers"`` check on the set.

    Parameters
    ----------
    registry : Registry
    layers : sequence of Surface, inside -> out
    options : mapping check name -> options (validated against the check's defaults)

    Returns
    -------
    list of Finding
        Each surface finding names the layer's role among its subjects;
        duplicates (same code and subjects) are reported once.
    """
    layers = tuple(layers)
    findings: list[Finding] = []
    for desc in registry.descriptors("check"):
        given = (options or {}).get(desc.name)
        if desc.target == "surface":
            opts = registry.options(desc, given, f"check '{desc.name}'")
            for s in layers:
                res = registry.call(desc, "run", step=f"check '{desc.name}' on layer '{s.role}'", surface=s, **opts)
                for f in getattr(res, "findings", res):
                    subjects = f.subjects if s.role in f.subjects else (s.role, *f.subjects)
                    findings.append(replace(f, subjects=subjects))
        elif desc.target == "layers":
            opts = registry.options(desc, given, f"check '{desc.name}'")
            res = registry.call(desc, "run", step=f"check '{desc.name}'", layers=layers, **opts)
            findings.extend(getattr(res, "findings", res))
    return _dedupe(findings)


def repair_orientation(surface: Surface) -> tuple[Surface, Finding | None]:
    """Turn a closed, inward-oriented layer outward; an ``info`` finding says so."""
    if not is_closed(surface.faces):
        return surface, None
    faces, flipped = orient_outward(surface.vertices, surface.faces)
    if not flipped:
        return surface, None
    note = Finding(code="mesh.inverted", severity="info", subjects=(surface.role,), source="layers",
                   message=f"layer '{surface.role}' was oriented inward; its faces were reversed")
    return replace(surface, faces=faces), note


def derive_layers(scalp: Surface, settings: DeriveSettings | None = None) -> tuple[Surface, Surface]:
    """Outer and inner skull derived from a scalp: ``(outer_skull, inner_skull)``.

    See :func:`derive_head`; the scalp itself is left as given (its radially
    remeshed copy coincides with it at its own vertices).
    """
    (inner, outer, _), _ = derive_head(scalp, settings)
    return outer, inner


def derive_head(scalp: Surface, settings: DeriveSettings | None = None, *,
                outer_skull: Surface | None = None) -> tuple[tuple[Surface, Surface, Surface], list[Finding]]:
    """Inner skull, outer skull and remeshed scalp from a scalp (and optionally an outer skull).

    The scalp (and a given outer skull) is remeshed on a subdivided icosahedron
    along rays from its volume centroid; the missing layers are inward offsets
    along smoothed normals, sampled back on the same rays and capped so that
    every layer stays strictly inside the next (see
    :func:`prep.geometry.layers.derive_inward`).

    Raises UsageError when the scalp is open or not star-shaped about its centroid.
    """
    st = settings or DeriveSettings()
    if not is_closed(scalp.faces):
        raise UsageError(f"scalp '{scalp.provenance.file or scalp.role}': not closed; cannot derive skull layers")
    faces0, _ = orient_outward(scalp.vertices, scalp.faces)
    centre = interior_centre(scalp.vertices, faces0)
    ok, bad = star_shaped(scalp.vertices, faces0, centre)
    if not ok:
        raise UsageError(f"scalp: not star-shaped about its centroid ({bad.size} faces seen from behind, "
                         f"e.g. face {int(bad[0])}); give the skull meshes instead of --derive")
    sv, sf = remesh_radial(scalp.vertices, faces0, st.n_vertices, centre)
    findings = [Finding(code="layers.derived", severity="info", subjects=("outer_skull", "inner_skull"),
                        source="layers",
                        message=f"skull layers derived from the scalp: {st.scalp_thickness * 1000:.1f} mm scalp, "
                                f"{st.skull_thickness * 1000:.1f} mm skull, {len(sv)} vertices per layer",
                        values={"scalp_thickness_m": st.scalp_thickness, "skull_thickness_m": st.skull_thickness,
                                "n_vertices": len(sv)})]
    if outer_skull is not None:
        of, _ = orient_outward(outer_skull.vertices, outer_skull.faces)
        ov, _ = remesh_radial(outer_skull.vertices, of, st.n_vertices, centre)
        cap = np.linalg.norm(sv - centre, axis=1) - st.min_gap
        r = np.minimum(np.linalg.norm(ov - centre, axis=1), cap)
        ov = centre + (ov - centre) / np.linalg.norm(ov - centre, axis=1)[:, None] * r[:, None]
    else:
        ov = derive_inward(sv, sf, centre, st.scalp_thickness, st.min_gap, st.smoothing)
    iv = derive_inward(ov, sf, centre, st.skull_thickness, st.min_gap, st.smoothing)
    frame = scalp.frame
    out = (Surface(vertices=iv, faces=sf, role="inner_skull", frame=frame),
           Surface(vertices=ov, faces=sf, role="outer_skull", frame=frame),
           Surface(vertices=sv, faces=sf, role="scalp", frame=frame, provenance=scalp.provenance))
    return out, findings


def sources_outside(conductor: VolumeConductor, positions: np.ndarray) -> list[Finding]:
    """``patches.outside`` (fail) naming the sources outside the brain compartment.

    A layered model gives such sources zero lead-field columns; this says which.
    ``positions`` (m, 3) metres in the conductor's frame.
    """
    p = np.asarray(positions, dtype=float)
    if conductor.kind != "layers" or not len(p):
        return []
    inner = conductor.layers[0]
    out = np.flatnonzero(~inside(p, inner.vertices, inner.faces))
    if not out.size:
        return []
    shown = ", ".join(str(int(i)) for i in out[:10]) + (" ..." if out.size > 10 else "")
    return [Finding(code="patches.outside", severity="fail", subjects=tuple(f"source {int(i)}" for i in out),
                    source="forward bem",
                    message=f"{out.size} sources lie outside '{inner.role}' (rows {shown}); "
                            f"their lead-field columns are zero",
                    values={"rows": out.tolist()})]
