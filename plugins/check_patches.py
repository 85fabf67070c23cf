"""Built-in plugin ``check_patches``: source patches outside or too close to the inner skull."""
from __future__ import annotations

from prep import hookimpl
from prep.descriptors import Check, CheckReport
from prep.geometry.clearance import DEFAULT_MIN_DISTANCE_MM, clearance_findings, surface_clearance
from prep.errors import UsageError
from prep.model import Patches, Surface


def run(patches: Patches, inner_skull: Surface | None = None,
        min_distance_mm: float = DEFAULT_MIN_DISTANCE_MM) -> CheckReport:
    """Check patch centres against the inner skull.

    Parameters
    ----------
    patches : Patches
        Centres (n, 3) metres, in the frame of ``inner_skull``.
    inner_skull : Surface or None
        Closed surface; without it there is nothing to check.
    min_distance_mm : float
        Closer than this (mm) is ``patches.too-close`` (default 5 mm, common practice).

    Returns
    -------
    CheckReport
        ``patches.outside`` (fail), ``patches.too-close`` (warn); arrays
        ``inside`` (n,) bool and ``skull_distance_m`` (n,) float64.
    """
    if inner_skull is None or len(patches) == 0:
        return CheckReport(metrics={"checked": False})
    if inner_skull.frame != patches.frame:
        raise UsageError(f"inner skull is in frame {inner_skull.frame!r}, patches in {patches.frame!r}")
    inside, dist = surface_clearance(patches.centres, inner_skull.vertices, inner_skull.faces)
    findings = clearance_findings(inside, dist, min_distance_mm=min_distance_mm, excluded=False,
                                  source="check 'patches'")
    return CheckReport(findings=tuple(findings),
                       metrics={"checked": True, "outside": int((~inside).sum()),
                                "min_distance_mm": float(dist.min() * 1e3)},
                       arrays={"inside": inside, "skull_distance_m": dist})


@hookimpl
def headprep_register_checks() -> list[Check]:
    return [Check(name="patches", target="patches", run=run, requires=("trimesh",),
                  defaults={"min_distance_mm": DEFAULT_MIN_DISTANCE_MM},
                  description="source patches inside the inner skull and not too close to it")]
