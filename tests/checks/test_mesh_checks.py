"""Mesh checks (plugin ``check_mesh``, prep.geometry.meshcheck) and the safe repairs."""
from __future__ import annotations

import numpy as np
import pytest
import trimesh

from prep import make_registry
from prep.geometry.meshcheck import inspect_mesh, repair_surface, self_intersecting_faces
from prep.model import Surface
from prep_plugins import check_mesh


def _sphere(sub: int = 3, r: float = 0.08) -> trimesh.Trimesh:
    return trimesh.creation.icosphere(subdivisions=sub, radius=r)


def _codes(surface: Surface, **options) -> dict[str, str]:
    reg = make_registry(entry_points=False, plugins=[check_mesh])
    desc = reg.get("check", "mesh")
    report = reg.call(desc, "run", surface=surface, **reg.options(desc, options, "test"))
    return {f.code: f.severity for f in report.findings}


def _surf(v, f, role: str = "inner_skull") -> Surface:
    return Surface(vertices=v, faces=f, role=role)


def test_clean_sphere_has_no_findings() -> None:
    m = _sphere()
    assert _codes(_surf(m.vertices, m.faces)) == {}
    rep = inspect_mesh(m.vertices, m.faces)
    assert rep.closed and rep.euler == 2 and rep.volume > 0
    assert np.isclose(rep.area, m.area, rtol=1e-12)  # reference: trimesh


def test_open() -> None:
    m = _sphere()
    codes = _codes(_surf(m.vertices, m.faces[5:]))
    assert codes["mesh.open"] == "fail"
    assert _codes(_surf(m.vertices, m.faces[5:], "cortex"), must_be_closed=False)["mesh.open"] == "warn"


def test_non_manifold_fin() -> None:
    m = _sphere()
    a, b = m.faces[0, :2]
    v = np.vstack([m.vertices, [[0.2, 0.2, 0.2]]])
    f = np.vstack([m.faces, [[b, a, len(m.vertices)]]])  # a third triangle on edge (a, b)
    assert _codes(_surf(v, f))["mesh.non-manifold"] == "fail"


def test_inverted() -> None:
    m = _sphere()
    assert _codes(_surf(m.vertices, m.faces[:, ::-1]))["mesh.inverted"] == "fail"


def test_inconsistent_winding() -> None:
    m = _sphere()
    f = m.faces.copy()
    f[:10] = f[:10, ::-1]
    assert "mesh.winding" in _codes(_surf(m.vertices, f))


def test_degenerate_faces() -> None:
    m = _sphere()
    f = np.vstack([m.faces, [[0, 0, 1]]])
    assert _codes(_surf(m.vertices, f))["mesh.degenerate"] == "warn"


def test_self_intersecting_two_overlapping_balls() -> None:
    a, b = _sphere(3), _sphere(3)
    b.apply_translation([0.05, 0, 0])
    v = np.vstack([a.vertices, b.vertices])
    f = np.vstack([a.faces, b.faces + len(a.vertices)])
    mask = self_intersecting_faces(v, f)
    assert mask.sum() > 0
    # only faces near the intersection circle x = 0.025 (|x - 0.025| small relative to the 0.08 m balls)
    cx = v[f[mask]].mean(axis=1)[:, 0]
    assert np.all(np.abs(cx - 0.025) < 0.02)
    codes = _codes(_surf(v, f))
    assert codes["mesh.self-intersecting"] == "fail" and "mesh.islands" in codes
    assert not self_intersecting_faces(a.vertices, a.faces).any()


def test_torus_topology() -> None:
    t = trimesh.creation.torus(0.06, 0.02)
    assert "mesh.topology" in _codes(_surf(t.vertices, t.faces), self_intersection=False)


def test_repair_merges_stl_like_duplicates_and_rewinds() -> None:
    m = _sphere()
    # every face with its own three corners (as STL stores them) and a quarter of them flipped
    v = m.vertices[m.faces.ravel()]
    f = np.arange(len(v)).reshape(-1, 3)
    f[::4] = f[::4, ::-1]
    s = _surf(v, f)
    assert "mesh.open" in _codes(s, self_intersection=False)
    fixed, notes = repair_surface(s)
    assert len(fixed.vertices) == len(m.vertices)
    assert {n.code for n in notes} == {"mesh.repaired"} and len(notes) == 2
    rep = inspect_mesh(fixed.vertices, fixed.faces, self_intersection=False)
    assert rep.closed and len(rep.winding_conflict_edges) == 0 and rep.volume > 0
    assert np.isclose(rep.volume, m.volume, rtol=1e-9)  # reference: trimesh
    assert fixed.role == s.role


def test_repair_turns_inverted_outward_and_leaves_clean_alone() -> None:
    m = _sphere()
    fixed, notes = repair_surface(_surf(m.vertices, m.faces[:, ::-1]))
    assert notes and inspect_mesh(fixed.vertices, fixed.faces, self_intersection=False).volume > 0
    clean = _surf(m.vertices, m.faces)
    same, none = repair_surface(clean)
    assert same is clean and none == []


def test_repair_drops_zero_area_repeats() -> None:
    m = _sphere()
    f = np.vstack([m.faces, [[0, 0, 1]], m.faces[:1]])
    fixed, notes = repair_surface(_surf(m.vertices, f))
    assert len(fixed.faces) == len(m.faces)
    assert notes[0].values["dropped_faces"] == 2


@pytest.mark.parametrize("sub", [2, 4])
def test_metrics_figures_are_json_ready(sub: int) -> None:
    import json
    m = _sphere(sub)
    reg = make_registry(entry_points=False, plugins=[check_mesh])
    report = reg.get("check", "mesh").run(surface=_surf(m.vertices, m.faces))
    json.dumps(report.metrics)
    assert report.metrics["n_faces"] == len(m.faces)
