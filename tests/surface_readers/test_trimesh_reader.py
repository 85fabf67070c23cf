"""The PLY/STL/OBJ/OFF reader (plugin ``surface_trimesh``)."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import trimesh
from hypothesis import given, settings
from hypothesis import strategies as st

from prep import make_registry
from prep.errors import ReadError
from prep.readers import read_surface
from prep_plugins import surface_trimesh


@pytest.fixture
def reg():
    return make_registry(entry_points=False, plugins=[surface_trimesh])


def _shuffled_sphere(radius: float, seed: int = 0) -> trimesh.Trimesh:
    """An icosphere with its vertices in a random order (to see that order is kept)."""
    m = trimesh.creation.icosphere(subdivisions=2, radius=radius)
    perm = np.random.default_rng(seed).permutation(len(m.vertices))
    inv = np.argsort(perm)
    return trimesh.Trimesh(m.vertices[perm], inv[m.faces], process=False)


@pytest.mark.parametrize("ext", ["ply", "obj", "off"])
def test_vertex_order_and_faces_preserved(reg, tmp_path: Path, ext: str) -> None:
    mesh = _shuffled_sphere(0.09)
    path = tmp_path / f"cortex.{ext}"
    mesh.export(path)
    surf = read_surface(reg, path, "cortex", units="m")
    np.testing.assert_allclose(surf.vertices, mesh.vertices, rtol=0, atol=1e-6)  # ASCII round-trip precision
    np.testing.assert_array_equal(surf.faces, mesh.faces)
    assert surf.role == "cortex" and surf.provenance.reader == "trimesh"
    assert surf.provenance.unit == "m" and surf.provenance.unit_source == "option"


def test_stl_corners_are_merged(reg, tmp_path: Path) -> None:
    mesh = _shuffled_sphere(0.09)
    path = tmp_path / "cortex.stl"
    mesh.export(path)
    surf = read_surface(reg, path, "cortex", units="m")
    assert len(surf.vertices) == len(mesh.vertices)  # STL stores 3 corners per face; merged back
    assert len(surf.faces) == len(mesh.faces)
    # same triangles, geometrically (reference library: trimesh area)
    assert np.isclose(trimesh.Trimesh(surf.vertices, surf.faces, process=False).area, mesh.area, rtol=1e-6)


@pytest.mark.parametrize(("scale", "unit", "severity"), [(1.0, "m", "info"), (100.0, "cm", "warn"),
                                                          (1000.0, "mm", "warn")])
def test_unit_inferred_from_size(reg, tmp_path: Path, scale: float, unit: str, severity: str) -> None:
    # a 0.18 m head-sized sphere (common practice: a head is 0.1-0.3 m across)
    mesh = trimesh.creation.icosphere(subdivisions=1, radius=0.09 * scale)
    path = tmp_path / "scalp.ply"
    mesh.export(path)
    surf = read_surface(reg, path, "scalp")
    assert surf.provenance.unit == unit and surf.provenance.unit_source == "assumed"
    np.testing.assert_allclose(np.linalg.norm(surf.vertices, axis=1), 0.09, rtol=1e-6)  # trimesh writes float32 PLY
    (f,) = [f for f in surf.findings if f.code == "input.units-suspect"]
    assert f.severity == severity


def test_mm_mesh_declared_as_m_is_flagged(reg, tmp_path: Path) -> None:
    mesh = trimesh.creation.icosphere(subdivisions=1, radius=90.0)  # mm, read as m by the user's mistake
    path = tmp_path / "scalp.ply"
    mesh.export(path)
    surf = read_surface(reg, path, "scalp", units="m")
    (f,) = [f for f in surf.findings if f.code == "input.units-suspect"]
    assert f.severity == "warn" and "mm" in f.message


@pytest.mark.parametrize("ext", ["ply", "stl", "obj", "off"])
@pytest.mark.parametrize("content", [b"", b"hello world garbage\nxx yy\n", b"\x00\x01\x02binary junk"])
def test_garbage_raises_read_error_naming_file(reg, tmp_path: Path, ext: str, content: bytes) -> None:
    path = tmp_path / f"bad.{ext}"
    path.write_bytes(content)
    with pytest.raises(ReadError) as err:
        read_surface(reg, path, "cortex")
    assert str(path) in str(err.value)


@pytest.mark.parametrize("name, text, line", [
    ("bad.obj", "# made up\nv 0 0 0\nv 1 0 0\nv 0 1 zero\nf 1 2 3\n", 4),   # non-numeric vertex
    ("bad.off", "OFF\n3 1 0\n0 0 0\n1 0 0\n0 1 0\n3 0 1 7\n", 6),           # face index out of range
])
def test_bad_record_names_line(reg, tmp_path: Path, name: str, text: str, line: int) -> None:
    path = tmp_path / name
    path.write_text(text)
    with pytest.raises(ReadError) as err:
        read_surface(reg, path, "cortex")
    assert err.value.line == line


def test_unknown_unit_is_read_error(reg, tmp_path: Path) -> None:
    path = tmp_path / "s.ply"
    trimesh.creation.icosphere(subdivisions=1, radius=0.09).export(path)
    with pytest.raises(ReadError):
        read_surface(reg, path, "scalp", units="furlong")


def test_nonfinite_vertex_is_a_finding(reg, tmp_path: Path) -> None:
    path = tmp_path / "s.off"
    path.write_text("OFF\n3 1 0\n0 0 0\n0.1 0 0\nnan 0.1 0\n3 0 1 2\n")
    surf = read_surface(reg, path, "scalp", units="m")
    assert any(f.code == "input.nonfinite" for f in surf.findings)


@settings(max_examples=25, deadline=None)
@given(st.lists(st.tuples(*(st.floats(-150, 150, allow_nan=False),) * 3), min_size=3, max_size=30, unique=True),
       st.sampled_from(["mm", "cm", "m"]))
def test_roundtrip_property(tmp_path_factory, pts, unit) -> None:
    """Any triangle fan written as OFF reads back with the stated unit applied exactly."""
    v = np.asarray(pts, dtype=float)
    faces = np.array([[0, i, i + 1] for i in range(1, len(v) - 1)])
    path = tmp_path_factory.mktemp("prop") / "fan.off"
    lines = ["OFF", f"{len(v)} {len(faces)} 0"] + [" ".join(repr(float(x)) for x in row) for row in v]
    lines += [f"3 {a} {b} {c}" for a, b, c in faces]
    path.write_text("\n".join(lines) + "\n")
    surf = surface_trimesh.read_mesh(path, units=unit)
    scale = {"mm": 1e-3, "cm": 1e-2, "m": 1.0}[unit]
    np.testing.assert_allclose(surf.vertices, v * scale, rtol=1e-12, atol=0)
    np.testing.assert_array_equal(surf.faces, faces)
