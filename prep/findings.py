"""Finding codes: part of the interface (tests and scripts match on them).

Every code is documented in ``docs/findings.md``; a test keeps the two in step.
New codes may be added; existing ones keep their meaning.
"""
from __future__ import annotations

import re
from collections.abc import Iterable
from typing import Any

#: code -> one-line meaning.  Plugins may emit codes not listed here as long as
#: they match CODE_PATTERN and are documented in docs/findings.md.
CODES: dict[str, str] = {
    # input
    "input.unreadable": "a file could not be read (file and line named)",
    "input.nonfinite": "a coordinate is NaN or infinite",
    "input.duplicate-label": "two channels carry the same label",
    "input.units-suspect": "units were missing or implausible; what was assumed is said",
    "input.fiducial-missing": "a fiducial (nasion, LPA, RPA) is missing",
    "input.too-few-points": "too few points to do what was asked",
    "input.landmark-estimated": "a landmark that was not given (the inion) was estimated from the others",
    # placement
    "placement.off-scalp": "an electrode lies off the skin (lifted)",
    "placement.inside-scalp": "an electrode lies below the skin surface",
    "placement.swapped": "labels of two or more electrodes appear exchanged",
    "placement.mirrored": "the montage appears left-right mirrored",
    "placement.misfit": "the co-registration residual is too large",
    "placement.headshape-outliers": "head-shape points were excluded as outliers",
    "placement.unchecked": "a placement check could not run (e.g. no reference layout); the message says why",
    # meshes
    "mesh.open": "a surface that must be closed has holes",
    "mesh.non-manifold": "an edge is shared by more than two triangles",
    "mesh.inverted": "a closed surface is oriented inward",
    "mesh.self-intersecting": "a surface crosses itself",
    "mesh.degenerate": "triangles of (near) zero area",
    "mesh.winding": "neighbouring triangles disagree on orientation",
    "mesh.islands": "a surface has disconnected pieces",
    "mesh.topology": "a closed surface is not sphere-like (Euler characteristic)",
    "mesh.unreferenced": "vertices belong to no triangle (or to no patch)",
    "mesh.repaired": "a safe repair was applied (merged vertices, dropped or re-wound triangles)",
    "layers.intersect": "two head-model layers cross",
    "layers.too-close": "two head-model layers are closer than the minimum gap",
    "layers.order": "head-model layers are not nested in the stated order",
    "layers.derived": "skull layers were derived from the scalp (no skull meshes given)",
    # patches
    "patches.outside": "source patches lie outside the inner skull",
    "patches.too-close": "source patches lie too close to the inner skull",
    # lead field
    "leadfield.nonfinite": "the lead field has NaN or infinite entries",
    "leadfield.rank-deficient": "the lead field has lower rank than expected",
    "leadfield.ill-conditioned": "the lead field's condition number is very large",
    "leadfield.duplicate-sensors": "two sensors are (nearly) the same",
    "leadfield.reference": "columns do not sum to zero under average reference",
    "leadfield.depth-bias": "deep sources are much weaker than superficial ones",
    "leadfield.resolution": "point-spread functions are poorly localised",
    # bundle
    "bundle.checksum": "an array's bytes do not match the manifest's checksum",
    "bundle.schema": "the manifest is not a valid bundle manifest",
}

CODE_PATTERN = re.compile(r"^[a-z][a-z0-9]*\.[a-z0-9][a-z0-9-]*$")

SEVERITIES = ("fail", "warn", "info")


def verdict(findings: Iterable[Any]) -> str:
    """A subject's verdict: ``fail`` if any finding is a fail, ``review`` if any is a warn, else ``pass``."""
    sev = {f.severity for f in findings}
    return "fail" if "fail" in sev else "review" if "warn" in sev else "pass"
