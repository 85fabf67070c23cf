"""Built-in plugin ``surface_trimesh``: PLY, STL, OBJ and OFF meshes through trimesh.

None of these formats carries a length unit: the user's ``units=`` wins,
otherwise the unit is inferred from the mesh's size by
:func:`prep.geometry.meshunits.resolve_mesh_units` (with an
``input.units-suspect`` finding saying what was assumed).

Vertex order is preserved (``process=False``; OBJ with ``maintain_order``), so
per-vertex data computed elsewhere stays aligned with the file. STL stores
every triangle with its own three corners; its exactly coincident corners are
merged here (first occurrence order), because the format has no shared
vertices to preserve.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from prep import hookimpl
from prep.descriptors import SurfaceReader
from prep.errors import ReadError
from prep.geometry.meshunits import surface_from_file_arrays
from prep.model import Surface

SUFFIXES = (".ply", ".stl", ".obj", ".off")


def _obj_line_error(path: Path, text: str) -> None:
    """Raise a ReadError at the first malformed ``v`` or ``f`` record of an OBJ text."""
    for lineno, line in enumerate(text.splitlines(), start=1):
        parts = line.split()
        if not parts or parts[0] not in ("v", "f"):
            continue
        try:
            if parts[0] == "v":
                if len(parts) < 4:
                    raise ValueError
                [float(p) for p in parts[1:4]]
            else:
                if len(parts) < 4:
                    raise ValueError
                [int(p.split("/")[0]) for p in parts[1:]]
        except ValueError:
            want = "'v x y z'" if parts[0] == "v" else "'f i j k' with integer vertex indices"
            raise ReadError(path, lineno, f"expected {want}, got {line.strip()[:60]!r}") from None


def _off_line_error(path: Path, text: str) -> None:
    """Raise a ReadError at the first malformed header, vertex or face record of an OFF text."""
    lines = [(i, ln.split("#")[0].split()) for i, ln in enumerate(text.splitlines(), start=1)]
    lines = [(i, p) for i, p in lines if p]
    if not lines or not lines[0][1][0].upper().endswith("OFF"):
        raise ReadError(path, lines[0][0] if lines else 1, "expected the 'OFF' header")
    head = lines[0][1][1:] or (lines[1][1] if len(lines) > 1 else [])
    start = 1 if lines[0][1][1:] else 2
    try:
        nv, nf = int(head[0]), int(head[1])
    except (ValueError, IndexError):
        raise ReadError(path, lines[min(start - 1, len(lines) - 1)][0],
                        "expected 'n_vertices n_faces n_edges'") from None
    body = lines[start:]
    if len(body) < nv + nf:
        raise ReadError(path, None, f"header promises {nv} vertices and {nf} faces, file has {len(body)} records")
    for k, (lineno, parts) in enumerate(body[:nv + nf]):
        try:
            if k < nv:
                [float(p) for p in parts[:3]]
                ok = len(parts) >= 3
            else:
                n = int(parts[0])
                idx = [int(p) for p in parts[1:1 + n]]
                ok = n >= 3 and len(idx) == n and all(0 <= i < nv for i in idx)
        except ValueError:
            ok = False
        if not ok:
            what = "'x y z'" if k < nv else f"'n i j k' with indices below {nv}"
            raise ReadError(path, lineno, f"expected {what}, got {' '.join(parts)[:60]!r}")


def _merge_exact(vertices: np.ndarray, faces: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Merge bit-identical vertices, keeping first-occurrence order."""
    _, first, inverse = np.unique(vertices, axis=0, return_index=True, return_inverse=True)
    order = np.argsort(first)
    rank = np.empty_like(order)
    rank[order] = np.arange(order.size)
    return vertices[np.sort(first)], rank[inverse.reshape(-1)][faces]


def read_mesh(path: str | Path, units: str | None = None) -> Surface:
    """Read a PLY, STL, OBJ or OFF triangle mesh.

    Parameters
    ----------
    path : path
    units : str, optional
        ``m``, ``cm`` or ``mm``: the unit of the file's coordinates. Without it the
        unit is inferred from the size (``input.units-suspect`` finding).

    Returns
    -------
    Surface
        Vertices (n, 3) float64 metres in the file's vertex order; faces (k, 3)
        int64; role ``"unknown"`` (the caller sets role, frame and provenance).

    Raises
    ------
    ReadError
        Not a triangle mesh, empty, malformed (record number when known), or an
        unknown ``units``.
    """
    import trimesh

    p = Path(path)
    suffix = p.suffix.lower()
    raw = p.read_bytes()
    if not raw.strip():
        raise ReadError(p, None, "file is empty")
    if suffix in (".obj", ".off"):
        try:
            text = raw.decode("utf-8")
        except UnicodeDecodeError:
            raise ReadError(p, None, f"{suffix} file is not text") from None
        (_obj_line_error if suffix == ".obj" else _off_line_error)(p, text)
    kwargs = {"maintain_order": True, "group_material": False, "skip_materials": True} if suffix == ".obj" else {}
    try:
        mesh = trimesh.load(str(p), file_type=suffix.lstrip("."), process=False, force="mesh", **kwargs)
    except (ValueError, TypeError, KeyError, IndexError, AttributeError, EOFError, OSError) as exc:
        raise ReadError(p, None, f"not a readable {suffix} mesh ({type(exc).__name__}: {exc})") from exc
    vertices = np.asarray(getattr(mesh, "vertices", np.zeros((0, 3))), dtype=np.float64)
    faces = np.asarray(getattr(mesh, "faces", np.zeros((0, 3))), dtype=np.int64)
    if vertices.ndim != 2 or vertices.shape[0] == 0 or faces.ndim != 2 or faces.shape[0] == 0:
        raise ReadError(p, None, f"no triangles found: not a {suffix} triangle mesh, or an empty one")
    if faces.shape[1] != 3 or faces.min() < 0 or faces.max() >= len(vertices):
        raise ReadError(p, None, "faces are not triangles indexing the file's vertices")
    if suffix == ".stl":
        vertices, faces = _merge_exact(vertices, faces)
    return surface_from_file_arrays(vertices, faces, file=str(p), reader="trimesh", option=units)


@hookimpl
def headprep_register_surface_readers() -> list[SurfaceReader]:
    return [SurfaceReader(name="trimesh", suffixes=SUFFIXES, read=read_mesh, requires=("trimesh",),
                          description="PLY, STL, OBJ and OFF triangle meshes (unit from --mesh-units or size)")]
