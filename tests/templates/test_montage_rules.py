"""Template placement by the percentage rules (Jasper 1958; Chatrian, Lettich & Nelson 1985;
Oostenveld & Praamstra 2001), checked on an ideal sphere and on an ellipsoidal head."""
from __future__ import annotations

import numpy as np
import pytest
import trimesh

from prep import Surface, UsageError, make_registry
from prep.geometry.arcs import plane_arc
from prep_plugins import montage_rules

R = 0.09  # sphere radius, m (an adult-sized head, common practice)


def _surface(mesh: trimesh.Trimesh) -> Surface:
    return Surface(vertices=mesh.vertices, faces=mesh.faces, role="scalp", frame="anatomy")


@pytest.fixture(scope="module")
def sphere():
    mesh = trimesh.creation.icosphere(subdivisions=5, radius=R)
    fids = {"nasion": np.array([0, R, 0]), "lpa": np.array([-R, 0, 0]), "rpa": np.array([R, 0, 0])}
    return _surface(mesh), fids


@pytest.fixture(scope="module")
def sphere_1010(sphere):
    s = montage_rules.place(*sphere, system="10-10")
    return dict(zip(s.labels, s.positions))


def _elevation_deg(p: np.ndarray) -> float:
    """Angle above the plane of nasion, inion and preauricular points (z = 0 here)."""
    return float(np.degrees(np.arcsin(p[2] / np.linalg.norm(p))))


def test_cz_at_vertex(sphere_1010):
    assert np.degrees(np.arccos(sphere_1010["Cz"][2] / np.linalg.norm(sphere_1010["Cz"]))) < 0.5


@pytest.mark.parametrize("label", ["Fpz", "Oz", "T7", "T8"])
def test_ten_percent_positions_18_degrees_up(sphere_1010, label):
    # 10 % of a 180 degree arc (Jasper 1958; Oostenveld & Praamstra 2001)
    assert abs(_elevation_deg(sphere_1010[label]) - 18.0) < 0.5


def test_fz_36_degrees_from_vertex(sphere_1010):
    fz = sphere_1010["Fz"]
    assert abs(np.degrees(np.arccos(fz[2] / np.linalg.norm(fz))) - 36.0) < 0.5
    assert fz[1] > 0 and abs(fz[0]) < 1e-4


@pytest.mark.parametrize("label", ["Fp1", "F7", "T7", "P7", "O1", "F8", "PO8"])
def test_ten_percent_ring_is_a_circle_of_latitude(sphere_1010, label):
    assert abs(_elevation_deg(sphere_1010[label]) - 18.0) < 0.5


def test_ring_steps_are_18_degrees(sphere_1010):
    # Fpz, Fp1, AF7, F7 ... are 10 % (of the half ring, 180 degrees of longitude) apart
    names = ["Fpz", "Fp1", "AF7", "F7", "FT7", "T7", "TP7", "P7", "PO7", "O1", "Oz"]
    lon = [np.degrees(np.arctan2(sphere_1010[n][1], -sphere_1010[n][0])) for n in names]
    np.testing.assert_allclose(np.diff(lon), -18.0, atol=0.5)


def test_systems_nest_and_have_their_labels(sphere):
    s20 = montage_rules.place(*sphere, system="10-20")
    s10 = montage_rules.place(*sphere, system="10-10")
    s5 = montage_rules.place(*sphere, system="10-5")
    assert set(s20.labels) == set(montage_rules.TEN_TWENTY)
    assert set(s20.labels) < set(s10.labels) < set(s5.labels)
    assert {"AF3", "FC5", "TP9", "PO10", "Nz", "Iz", "I1", "N2"} <= set(s10.labels)
    assert not any(lab.endswith("h") for lab in s10.labels)
    assert {"FFC1h", "AFp3", "CCP5h", "T9h", "OIz", "NFpz"} <= set(s5.labels)
    assert len(set(s5.labels)) == len(s5.labels)
    d10, d5 = dict(zip(s10.labels, s10.positions)), dict(zip(s5.labels, s5.positions))
    for lab in s10.labels:
        np.testing.assert_allclose(d10[lab], d5[lab], atol=1e-9)


def test_left_right_mirror(sphere_1010):
    for lab, p in sphere_1010.items():
        num = lab.rstrip("h").lstrip("ABCDEFGHIJKLMNOPQRSTUVWXYZp")
        if num.isdigit() and int(num) % 2 == 1:
            twin = lab.replace(num, str(int(num) + 1))
            np.testing.assert_allclose(sphere_1010[twin], p * [-1, 1, 1], atol=2e-4)


def test_inion_estimated_with_info_finding(sphere):
    s = montage_rules.place(*sphere, system="10-20")
    np.testing.assert_allclose(s.fiducials["inion"], [0, -R, 0], atol=1e-4)
    assert [f.code for f in s.findings] == ["input.landmark-estimated"] and s.findings[0].severity == "info"


def test_missing_fiducial_and_unknown_system(sphere):
    scalp, fids = sphere
    with pytest.raises(UsageError, match="rpa"):
        montage_rules.place(scalp, {"nasion": fids["nasion"], "lpa": fids["lpa"]})
    with pytest.raises(UsageError, match="10-15"):
        montage_rules.place(scalp, fids, system="10-15")


def test_registered_as_montage_template():
    reg = make_registry(entry_points=False, plugins=[montage_rules])
    (d,) = reg.descriptors("montage_template")
    assert d.name == "rules" and d.systems == ("10-20", "10-10", "10-5")


# ------------------------------------------------------------------ a non-spherical head
@pytest.fixture(scope="module")
def egg():
    """An ellipsoid head 190 x 150 x 230 mm (length, width, height: common practice), shifted and tilted."""
    mesh = trimesh.creation.icosphere(subdivisions=5, radius=1.0)
    mesh.vertices *= [0.075, 0.095, 0.115]
    rot = trimesh.transformations.rotation_matrix(np.radians(7), [1, 0, 0])
    mesh.apply_transform(rot)
    mesh.apply_translation([0.003, 0.01, 0.04])
    a = lambda p: (rot[:3, :3] @ np.asarray(p)) + [0.003, 0.01, 0.04]  # noqa: E731
    fids = {"nasion": a([0, 0.095, 0]), "lpa": a([-0.075, 0, 0]), "rpa": a([0.075, 0, 0])}
    return _surface(mesh), fids, mesh


def test_midline_steps_on_an_ellipsoid_are_10_percent(egg):
    scalp, fids, mesh = egg
    s = montage_rules.place(scalp, fids, system="10-10")
    d = dict(zip(s.labels, s.positions))
    names = ["Nz", "Fpz", "AFz", "Fz", "FCz", "Cz", "CPz", "Pz", "POz", "Oz", "Iz"]
    # arc lengths between successive midline electrodes along the surface, re-traced independently
    centre = (fids["lpa"] + fids["rpa"]) / 2
    arc = plane_arc(mesh, d["Nz"], d["Iz"], d["Cz"], centre, samples=2001)
    s_at = np.array([arc.length_at(d[n]) for n in names])
    steps = np.diff(s_at) / arc.length
    np.testing.assert_allclose(steps, 0.1, rtol=0.01)  # within 1 % of a 10 % step (the check)


def test_cz_halves_both_arcs_on_an_ellipsoid(egg):
    scalp, fids, mesh = egg
    s = montage_rules.place(scalp, fids, system="10-20")
    d = dict(zip(s.labels, s.positions))
    centre = (fids["lpa"] + fids["rpa"]) / 2
    cor = plane_arc(mesh, fids["lpa"], fids["rpa"], d["Cz"], centre, samples=2001)
    assert abs(cor.length_at(d["Cz"]) / cor.length - 0.5) < 0.005


def test_open_bottom_mesh_and_lifted_fiducials():
    """A scalp cut below the ears (open) and fiducials digitized 4 mm off the skin still place on the skin."""
    mesh = trimesh.creation.icosphere(subdivisions=4, radius=R)
    keep = mesh.vertices[mesh.faces].mean(axis=1)[:, 2] > -0.04
    mesh = trimesh.Trimesh(mesh.vertices, mesh.faces[keep], process=True)
    assert not mesh.is_watertight
    lift = (R + 0.004) / R
    fids = {"nasion": np.array([0, R, 0]) * lift, "lpa": np.array([-R, 0, 0]) * lift,
            "rpa": np.array([R, 0, 0]) * lift}
    s = montage_rules.place(_surface(mesh), fids, system="10-5")
    assert np.all(np.isfinite(s.positions))
    _, dist, _ = trimesh.proximity.closest_point(mesh, s.positions)
    assert dist.max() < 1e-6  # on the mesh (trimesh closest point)
