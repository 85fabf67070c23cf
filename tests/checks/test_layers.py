"""Layer checks (nesting, crossing, gap, order) and skull layers derived from a scalp."""
from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from prep import Surface, UsageError, make_registry
from prep.geometry.layers import icosphere, inside, interior_centre, is_closed, nesting, remesh_radial, star_shaped
from prep.layers import DeriveSettings, check_layers, derive_head, derive_layers, repair_orientation
from prep_plugins import check_layers as plugin

RADII = (0.087, 0.092, 0.100)  # three-shell head, Meijs et al. 1989 style, metres


def _sphere(r: float, role: str, sub: int = 3, shift=(0.0, 0.0, 0.0), scale=(1.0, 1.0, 1.0)) -> Surface:
    v, f = icosphere(sub)
    return Surface(vertices=v * r * np.asarray(scale) + np.asarray(shift), faces=f, role=role)


def _head(**over) -> list[Surface]:
    layers = [_sphere(r, role) for r, role in zip(RADII, ("inner_skull", "outer_skull", "scalp"))]
    for i, s in over.items():
        layers[int(i[1:])] = s
    return layers


def _codes(findings) -> list[str]:
    return sorted(f.code for f in findings)


def test_nested_spheres_have_no_findings() -> None:
    assert plugin.run(layers=tuple(_head())) == []


def test_crossing_names_the_vertices_outside() -> None:
    moved = _sphere(0.087, "inner_skull", shift=(0.0, 0.0, 0.01))   # 10 mm up: pokes through the 5 mm skull
    found = plugin.run(layers=tuple(_head(l0=moved)))
    assert _codes(found) == ["layers.intersect"]
    f = found[0]
    assert f.subjects == ("inner_skull", "outer_skull") and f.values["inner_outside"]
    top = moved.vertices[f.values["inner_outside"]]
    assert np.all(top[:, 2] > 0.045)   # only the cap above z = 0.05 m can leave the 92 mm sphere
    assert "vertex" in f.message and "mm" in f.message


def test_swapped_order_is_reported_as_order() -> None:
    layers = _head()
    found = plugin.run(layers=(layers[1], layers[0], layers[2]))
    assert "layers.order" in _codes(found)


def test_too_close_uses_the_2_mm_default() -> None:
    near = _sphere(0.0905, "inner_skull")           # 1.5 mm below the outer skull (vertex to flat faces: a bit less)
    found = plugin.run(layers=tuple(_head(l0=near)))
    assert _codes(found) == ["layers.too-close"]
    assert found[0].values["min_gap_m"] < 0.002 and found[0].threshold == 0.002
    assert plugin.run(layers=tuple(_head(l0=near)), min_gap=0.001) == []


def test_open_and_inverted_layers() -> None:
    layers = _head()
    s = layers[1]
    opened = Surface(vertices=s.vertices, faces=s.faces[1:], role="outer_skull")
    inverted = Surface(vertices=s.vertices, faces=s.faces[:, ::-1], role="outer_skull")
    assert "mesh.open" in _codes(plugin.run(layers=(layers[0], opened, layers[2])))
    assert "mesh.inverted" in _codes(plugin.run(layers=(layers[0], inverted, layers[2])))
    fixed, note = repair_orientation(inverted)
    assert note.code == "mesh.inverted" and note.severity == "info"
    assert plugin.run(layers=(layers[0], fixed, layers[2])) == []


def test_core_runs_registry_checks_and_dedupes() -> None:
    reg = make_registry(entry_points=False, plugins=[plugin])
    moved = _sphere(0.087, "inner_skull", shift=(0.0, 0.0, 0.01))
    found = check_layers(reg, _head(l0=moved), {"layers": {"min_gap": 0.002}})
    assert _codes(found) == ["layers.intersect"]
    with pytest.raises(UsageError):
        check_layers(reg, _head(), {"layers": {"no_such_option": 1}})


def test_remesh_radial_of_ellipsoid_is_star_shaped_and_on_surface() -> None:
    src = _sphere(0.09, "scalp", sub=4, scale=(1.0, 1.2, 0.9))
    v, f = remesh_radial(src.vertices, src.faces, 642)
    assert len(v) == 642 and is_closed(f)
    # vertices on the ellipsoid x^2/a^2 + y^2/b^2 + z^2/c^2 = 1 up to the source mesh's facets
    q = (v[:, 0] / 0.09) ** 2 + (v[:, 1] / 0.108) ** 2 + (v[:, 2] / 0.081) ** 2
    assert np.all(np.abs(q - 1) < 0.02)


def test_not_star_shaped_is_refused() -> None:
    v, f = icosphere(3)
    dent = v.copy()
    dent[:, 2] += 2.0 * (dent[:, 0] ** 2 + dent[:, 1] ** 2)   # bend the sphere into a deep bowl
    ok, bad = star_shaped(dent * 0.09, f, interior_centre(dent * 0.09, f))
    assert not ok and bad.size
    with pytest.raises(UsageError):
        derive_head(Surface(vertices=dent * 0.09, faces=f, role="scalp"))


def test_derived_layers_nest_with_gaps() -> None:
    scalp = _sphere(0.095, "scalp", sub=4, scale=(0.95, 1.15, 1.0))
    (inner, outer, sc), notes = derive_head(scalp, DeriveSettings(n_vertices=642))
    assert notes[0].code == "layers.derived"
    assert plugin.run(layers=(inner, outer, sc)) == []
    # the thickness is about as asked (common practice 6 mm), measured along the rays
    r_out = np.linalg.norm(outer.vertices - outer.vertices.mean(0), axis=1)
    r_sc = np.linalg.norm(sc.vertices - sc.vertices.mean(0), axis=1)
    assert 0.004 < np.median(r_sc - r_out) < 0.008
    o2, i2 = derive_layers(scalp, DeriveSettings(n_vertices=642))
    assert o2.role == "outer_skull" and i2.role == "inner_skull"


@settings(max_examples=6, deadline=None)
@given(st.floats(0.8, 1.25), st.floats(0.8, 1.25), st.floats(0.003, 0.009))
def test_derived_layers_always_strictly_nested(sy: float, sz: float, thick: float) -> None:
    scalp = _sphere(0.09, "scalp", sub=3, scale=(1.0, sy, sz))
    (inner, outer, sc), _ = derive_head(scalp, DeriveSettings(n_vertices=162, scalp_thickness=thick,
                                                              skull_thickness=thick))
    assert inside(inner.vertices, outer.vertices, outer.faces).all()
    assert inside(outer.vertices, sc.vertices, sc.faces).all()
    assert nesting(inner.vertices, inner.faces, outer.vertices, outer.faces)["min_gap"] > 0


def test_layers_command_derives_and_draws(tmp_path, capsys) -> None:
    import trimesh

    from prep import cli

    scalp = _sphere(95.0, "scalp", sub=4, scale=(0.95, 1.15, 1.0))   # millimetres in the file
    path = tmp_path / "scalp.ply"
    path.write_bytes(trimesh.Trimesh(scalp.vertices, scalp.faces, process=False).export(file_type="ply"))
    out = tmp_path / "out"
    code = cli.main(["layers", "--scalp", str(path), "--derive", "--vertices", "642", "--mesh-units", "mm",
                     "--out", str(out), "--json"])
    doc = json.loads(capsys.readouterr().out)
    assert code == 0, doc["findings"]
    assert doc["derived"] == ["outer_skull", "inner_skull"]
    assert (out / "layers-sections.png").stat().st_size > 1000
    assert (out / "inner_skull-derived.ply").is_file()
    assert [x["n_vertices"] for x in doc["layers"]] == [642, 642, 642]


def test_layers_command_without_skull_needs_derive(tmp_path, capsys) -> None:
    import trimesh

    from prep import cli

    s = _sphere(0.1, "scalp")
    path = tmp_path / "scalp.ply"
    path.write_bytes(trimesh.Trimesh(s.vertices, s.faces, process=False).export(file_type="ply"))
    assert cli.main(["layers", "--scalp", str(path), "--mesh-units", "m"]) == 2
    assert "--derive" in capsys.readouterr().err


def test_sources_outside_the_brain_are_named() -> None:
    from prep import VolumeConductor
    from prep.layers import sources_outside

    cond = VolumeConductor(kind="layers", conductivities=[0.33, 0.0042, 0.33], layers=tuple(_head()))
    found = sources_outside(cond, np.array([[0.0, 0.0, 0.05], [0.0, 0.0, 0.09], [0.2, 0.0, 0.0]]))
    assert len(found) == 1 and found[0].code == "patches.outside"
    assert found[0].values["rows"] == [1, 2] and "rows 1, 2" in found[0].message
    assert sources_outside(cond, np.zeros((1, 3))) == []
