"""Built-in plugin ``check_mesh``: closedness, manifoldness, winding, degeneracy, self-crossing, topology.

The measuring is done by :mod:`prep.geometry.meshcheck` (shared with the
patch maker and the head-model layer steps); this plugin exposes it as a check
of target ``"surface"``. Safe repairs are a core function
(:func:`prep.geometry.meshcheck.repair_surface`) that the pipeline calls.
"""
from __future__ import annotations

from prep import hookimpl
from prep.descriptors import Check, CheckReport
from prep.geometry.meshcheck import inspect_mesh, mesh_findings
from prep.model import Surface

DEFAULTS = {"must_be_closed": True, "self_intersection": True}


def run(surface: Surface, must_be_closed: bool = True, self_intersection: bool = True) -> CheckReport:
    """Inspect one surface.

    Parameters
    ----------
    surface : Surface
    must_be_closed : bool
        True: open/non-manifold/inverted/self-crossing are ``fail`` (head-model
        layers need closed surfaces). Cortex surfaces (role ``cortex*``) are
        always checked as if False (``warn``): patches do not need a closed sheet.
    self_intersection : bool
        Search for self-crossing triangles (pymeshfix; ~0.2 s per 20k faces).

    Returns
    -------
    CheckReport
        Findings (``mesh.*``), the figures of :meth:`MeshReport.figures` as metrics,
        and the masks ``degenerate`` / ``self_intersecting`` (k,) as arrays.
    """
    name = surface.role if surface.role != "unknown" else (surface.provenance.file or "surface")
    closed = must_be_closed and not surface.role.startswith("cortex")
    report = inspect_mesh(surface.vertices, surface.faces, self_intersection=self_intersection)
    arrays = {"degenerate": report.degenerate}
    if report.self_intersecting is not None:
        arrays["self_intersecting"] = report.self_intersecting
    return CheckReport(findings=tuple(mesh_findings(report, name=name, must_be_closed=closed,
                                                    source="check 'mesh'")),
                       metrics=report.figures(), arrays=arrays)


@hookimpl
def headprep_register_checks() -> list[Check]:
    return [Check(name="mesh", target="surface", run=run, defaults=DEFAULTS, requires=("pymeshfix", "trimesh"),
                  description="closed, manifold, consistently wound, no degenerate or self-crossing triangles")]
