"""Built-in check ``layers``: nested head-model layers (inner skull, outer skull, scalp).

Target ``"layers"``: ``run(layers=tuple[Surface, ...], min_gap=0.002)`` with
the layers inside -> out. Per layer: closed (``mesh.open``) and outward
(``mesh.inverted``), since nesting is measured with winding numbers that
need both; the full mesh checks (target ``"surface"``) run separately and the
core merges duplicates. Per adjacent pair: order (``layers.order``: the outer
one sits inside the inner one), crossing (``layers.intersect``, naming the
inner vertices outside the outer layer and where they are) and the minimum
gap (``layers.too-close``, default 2 mm, common practice).
"""
from __future__ import annotations

import numpy as np

from prep import Check, Finding, Surface, hookimpl
from prep.geometry.layers import is_closed, nesting, signed_volume

SOURCE = "check layers"
SHOWN = 5  # vertices named in a message


def _where(surface: Surface, idx: np.ndarray) -> tuple[list[int], list[list[float]]]:
    pick = idx[:SHOWN]
    return pick.tolist(), np.round(surface.vertices[pick] * 1000, 1).tolist()


def _pair(inner: Surface, outer: Surface, min_gap: float) -> list[Finding]:
    nest = nesting(inner.vertices, inner.faces, outer.vertices, outer.faces)
    outside, outer_in = nest["outside"], nest["outer_inside"]
    names = (inner.role, outer.role)
    if len(outside) == len(inner.vertices) and len(outer_in) == len(outer.vertices):
        return [Finding(code="layers.order", severity="fail", subjects=names, source=SOURCE,
                        message=f"'{outer.role}' lies inside '{inner.role}': the layers are given in the "
                                f"wrong order (expected inside -> out)",
                        values={"inner_vertices_outside": int(len(outside))})]
    if len(outside) or len(outer_in):
        idx, pos = _where(inner, outside) if len(outside) else _where(outer, outer_in)
        which = f"{len(outside)} vertices of '{inner.role}' lie outside '{outer.role}'" if len(outside) else \
            f"{len(outer_in)} vertices of '{outer.role}' lie inside '{inner.role}'"
        return [Finding(code="layers.intersect", severity="fail", subjects=names, source=SOURCE,
                        message=f"'{inner.role}' and '{outer.role}' cross: {which}, e.g. vertex "
                                f"{idx[0]} at {pos[0]} mm",
                        values={"inner_outside": outside.tolist(), "outer_inside": outer_in.tolist(),
                                "first_vertices": idx, "first_positions_mm": pos})]
    if nest["min_gap"] < min_gap:
        gap = nest["gap"]
        close = np.flatnonzero(gap < min_gap)
        close = close[np.argsort(gap[close])]
        idx, pos = _where(inner, close)
        return [Finding(code="layers.too-close", severity="warn", subjects=names, source=SOURCE,
                        message=f"'{inner.role}' comes within {nest['min_gap'] * 1000:.2f} mm of "
                                f"'{outer.role}' at {len(close)} vertices (closest: vertex {idx[0]} at "
                                f"{pos[0]} mm); minimum gap {min_gap * 1000:.1f} mm",
                        values={"min_gap_m": nest["min_gap"], "vertices": close.tolist(),
                                "first_positions_mm": pos}, threshold=min_gap)]
    return []


def run(*, layers: tuple[Surface, ...], min_gap: float = 0.002) -> list[Finding]:
    """Findings for nested layers (inside -> out); see the module docstring."""
    findings: list[Finding] = []
    usable = []
    for s in layers:
        if not is_closed(s.faces):
            findings.append(Finding(code="mesh.open", severity="fail", subjects=(s.role,), source=SOURCE,
                                    message=f"layer '{s.role}' is not closed; nesting was not measured"))
            usable.append(False)
            continue
        vol = signed_volume(s.vertices, s.faces)
        if vol < 0:
            findings.append(Finding(code="mesh.inverted", severity="fail", subjects=(s.role,), source=SOURCE,
                                    message=f"layer '{s.role}' is oriented inward (volume {vol * 1e6:.1f} cm^3); "
                                            f"reverse its faces (headprep layers repairs this)",
                                    values={"signed_volume_m3": vol}))
        usable.append(True)
    for k in range(len(layers) - 1):
        if usable[k] and usable[k + 1]:
            findings.extend(_pair(layers[k], layers[k + 1], float(min_gap)))
    return findings


@hookimpl
def headprep_register_checks() -> list[Check]:
    return [Check(name="layers", target="layers", run=run, defaults={"min_gap": 0.002},
                  description="head-model layers closed, outward, nested in order, without crossing, "
                              "with a minimum gap")]
