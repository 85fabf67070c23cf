"""Length unit of a mesh file: the one place where it is decided.

Mesh formats such as PLY, STL, OBJ and OFF carry no unit; GIfTI has no
standard unit field either (millimetres by convention). Every surface reader
calls :func:`resolve_mesh_units` with what it knows (the user's ``units=``
option, a unit the file declares, a format convention) and gets back the
scale to metres, the unit, where it came from and the ``input.units-suspect``
finding that explains any assumption.

Plausible sizes (common practice): a whole head is about 0.1-0.3 m across, a
cortical hemisphere about 0.05-0.2 m. Readers do not know the role of a mesh,
so the union 0.04-0.35 m is used (:data:`PLAUSIBLE_EXTENT_M`); m, cm and mm
give disjoint ranges over it, so a guess is never ambiguous.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import ReadError
from ..model import Finding, Provenance, Surface
from ..units import canonical_unit, guess_length_unit, unit_scale

__all__ = ["MeshUnits", "PLAUSIBLE_EXTENT_M", "mesh_extent", "nonfinite_vertices", "resolve_mesh_units",
           "surface_from_file_arrays"]

#: (low, high) plausible largest bounding-box side of a head or cortex mesh, metres (common practice).
PLAUSIBLE_EXTENT_M = (0.04, 0.35)


@dataclass(frozen=True)
class MeshUnits:
    """The decision: ``scale`` (metres per file unit), ``unit``, ``source`` and findings."""

    scale: float
    unit: str
    source: str
    findings: tuple[Finding, ...] = ()


def mesh_extent(vertices: np.ndarray) -> float:
    """Largest side of the axis-aligned bounding box of finite ``vertices`` (n, 3), file units."""
    v = np.asarray(vertices, dtype=np.float64)
    v = v[np.all(np.isfinite(v), axis=1)] if v.size else v
    if v.shape[0] == 0:
        return 0.0
    return float(np.max(v.max(axis=0) - v.min(axis=0)))


def _finding(severity: str, message: str, file: str, extent: float, unit: str) -> Finding:
    return Finding(code="input.units-suspect", severity=severity, message=message, subjects=(file,),
                   values={"extent_in_file_units": extent, "unit_assumed": unit},
                   threshold={"plausible_extent_m": list(PLAUSIBLE_EXTENT_M)}, source="surface reader")


def resolve_mesh_units(vertices: np.ndarray, *, file: str, option: str | None = None,
                       declared: str | None = None, convention: str | None = None) -> MeshUnits:
    """Decide the length unit of a mesh's coordinates.

    Parameters
    ----------
    vertices : (n, 3) float64
        Coordinates as read, in the file's unit.
    file : str
        File name for messages.
    option : str, optional
        The user's ``units=`` statement: always wins (source ``"option"``); a
        ``warn`` finding if the mesh would then be implausibly sized.
    declared : str, optional
        A unit the file states (source ``"declared"``); same size check.
    convention : str, optional
        The format's customary unit (GIfTI: ``"mm"``), used when nothing is
        stated and the size agrees (``info`` finding); otherwise the size decides.

    Returns
    -------
    MeshUnits
        With no statement and no convention the unit is inferred from the
        extent: ``warn`` when converting (cm, mm), ``info`` when taken as
        metres, ``warn`` when no unit makes the size plausible (metres kept).

    Raises
    ------
    KeyError
        ``option``/``declared`` is not a length unit (readers turn it into a ReadError).
    """
    extent = mesh_extent(vertices)
    lo, hi = PLAUSIBLE_EXTENT_M
    for given, source in ((option, "option"), (declared, "declared")):
        if given is None:
            continue
        scale = unit_scale(given)
        unit = canonical_unit(given)
        found: tuple[Finding, ...] = ()
        if extent > 0 and not lo <= extent * scale <= hi:
            guess = guess_length_unit(extent, PLAUSIBLE_EXTENT_M)
            hint = f"; it would be plausible in {guess}" if guess else ""
            found = (_finding("warn", f"{file}: mesh is {extent * scale:.4g} m across in the {source} unit "
                              f"'{unit}', outside the plausible {lo}-{hi} m{hint}", file, extent, unit),)
        return MeshUnits(scale, unit, source, found)
    guess = guess_length_unit(extent, PLAUSIBLE_EXTENT_M) if extent > 0 else None
    if convention is not None and (guess is None or guess == canonical_unit(convention)):
        unit = canonical_unit(convention)
        msg = f"{file}: no length unit stated; assumed {unit} (the format's convention)"
        if guess is None and extent > 0:
            return MeshUnits(unit_scale(unit), unit, "assumed", (_finding(
                "warn", msg + f", though the mesh is then {extent * unit_scale(unit):.4g} m across", file, extent,
                unit),))
        return MeshUnits(unit_scale(unit), unit, "assumed", (_finding("info", msg, file, extent, unit),))
    if guess is None:
        return MeshUnits(1.0, "m", "assumed", (_finding(
            "warn", f"{file}: no length unit stated and the mesh is {extent:.4g} units across, implausible in m, "
            f"cm or mm; taken as metres (state it with --mesh-units)", file, extent, "m"),))
    if guess == "m":
        return MeshUnits(1.0, "m", "assumed", (_finding(
            "info", f"{file}: no length unit stated; the size ({extent:.3g} across) says metres", file, extent,
            "m"),))
    return MeshUnits(unit_scale(guess), guess, "assumed", (_finding(
        "warn", f"{file}: no length unit stated; the mesh is {extent:.4g} units across, so it was read as "
        f"{guess} and converted to metres (state it with --mesh-units)", file, extent, guess),))


def nonfinite_vertices(vertices: np.ndarray, *, file: str, source: str) -> tuple[Finding, ...]:
    """An ``input.nonfinite`` finding if any vertex (n, 3) has a NaN or infinite coordinate, else ()."""
    ok = np.all(np.isfinite(np.asarray(vertices, dtype=np.float64)), axis=1)
    if ok.all():
        return ()
    bad = np.flatnonzero(~ok)
    return (Finding(code="input.nonfinite", severity="fail", subjects=(file,),
                    message=f"{file}: {bad.size} vertices have NaN or infinite coordinates "
                            f"(first: vertex {int(bad[0])})",
                    values={"n_vertices": int(bad.size), "first": int(bad[0])}, source=source),)


def surface_from_file_arrays(vertices: np.ndarray, faces: np.ndarray, *, file: str, reader: str,
                             option: str | None = None, declared: str | None = None,
                             convention: str | None = None) -> Surface:
    """What every surface reader returns: a Surface in metres with its unit findings.

    Parameters
    ----------
    vertices : (n, 3) float64, file units
    faces : (k, 3) int64
    file, reader : str
        For provenance and messages.
    option, declared, convention : str, optional
        See :func:`resolve_mesh_units`.

    Raises
    ------
    ReadError
        ``option`` or ``declared`` is not a length unit.
    """
    findings = nonfinite_vertices(vertices, file=file, source=f"surface reader '{reader}'")
    try:
        mu = resolve_mesh_units(vertices, file=file, option=option, declared=declared, convention=convention)
    except KeyError as exc:
        raise ReadError(file, None, f"unknown length unit {exc.args[0]!r} (use m, cm or mm)") from None
    return Surface(vertices=np.asarray(vertices, dtype=np.float64) * mu.scale, faces=faces, role="unknown",
                   provenance=Provenance(file=file, reader=reader, unit=mu.unit, unit_source=mu.source),
                   findings=findings + mu.findings)
