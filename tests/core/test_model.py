"""Data model: structural validation and Transform algebra against scipy (reference library)."""
from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.spatial.transform import Rotation

from prep import Finding, LeadField, Patches, Sensors, Surface, Transform, VolumeConductor


def _random_transform(seed: int, frm: str = "head", to: str = "anatomy") -> tuple[Transform, Rotation, np.ndarray]:
    rng = np.random.default_rng(seed)
    rot = Rotation.random(random_state=seed)
    t = rng.normal(scale=0.05, size=3)
    return Transform.from_rotation(rot.as_matrix(), t, from_frame=frm, to_frame=to), rot, t


@settings(max_examples=40, deadline=None)
@given(st.integers(0, 2**31 - 1))
def test_transform_apply_matches_scipy_rotation(seed: int) -> None:
    tr, rot, t = _random_transform(seed)
    pts = np.random.default_rng(seed + 1).normal(scale=0.1, size=(20, 3))
    # reference: scipy.spatial.transform.Rotation.apply (reference library)
    np.testing.assert_allclose(tr.apply(pts), rot.apply(pts) + t, atol=1e-12)


@settings(max_examples=40, deadline=None)
@given(st.integers(0, 2**31 - 1), st.integers(0, 2**31 - 1))
def test_composition_and_inverse_match_scipy(s1: int, s2: int) -> None:
    a, ra, ta = _random_transform(s1, "device", "head")
    b, rb, tb = _random_transform(s2, "head", "anatomy")
    ab = a.then(b)
    assert (ab.from_frame, ab.to_frame) == ("device", "anatomy")
    # scipy: composition of rotations is rb * ra (reference library)
    np.testing.assert_allclose(ab.rotation, (rb * ra).as_matrix(), atol=1e-12)
    np.testing.assert_allclose(ab.translation, rb.apply(ta) + tb, atol=1e-12)
    assert (b @ a).matrix.tolist() == ab.matrix.tolist()
    inv = ab.inverse()
    pts = np.random.default_rng(s1).normal(size=(5, 3))
    np.testing.assert_allclose(inv.apply(ab.apply(pts)), pts, atol=1e-10)
    assert (inv.from_frame, inv.to_frame) == ("anatomy", "device")


def test_composition_checks_frames() -> None:
    a = Transform.identity("device", "head")
    with pytest.raises(ValueError, match="cannot compose"):
        a.then(Transform.identity("anatomy", "device"))


def test_arrays_are_read_only_float64() -> None:
    s = Sensors(labels=("Cz",), positions=[[0, 0, 0.1]], frame="device")
    assert s.positions.dtype == np.float64 and not s.positions.flags.writeable
    with pytest.raises(ValueError):
        s.positions[0, 0] = 1.0


@pytest.mark.parametrize("bad", [np.zeros((2, 2)), np.zeros(3), np.zeros((1, 3, 1))])
def test_sensors_reject_bad_shapes(bad: np.ndarray) -> None:
    with pytest.raises(ValueError, match=r"\(n, 3\)|labels"):
        Sensors(labels=("A", "B"), positions=bad, frame="device")


def test_surface_faces_must_index_vertices() -> None:
    with pytest.raises(ValueError, match="outside"):
        Surface(vertices=np.zeros((3, 3)), faces=[[0, 1, 3]], role="scalp")


def test_patches_need_unit_normals() -> None:
    with pytest.raises(ValueError, match="unit"):
        Patches(centres=np.zeros((1, 3)), normals=[[0, 0, 2.0]], areas=[1e-6], spread=[0.0], hemisphere=[0])


def test_sphere_conductor_validates_radii_and_conductivities() -> None:
    with pytest.raises(ValueError, match="increase"):
        VolumeConductor(kind="spheres", conductivities=[0.33, 0.33], radii=[0.09, 0.08], centre=[0, 0, 0])
    with pytest.raises(ValueError, match="positive"):
        VolumeConductor(kind="spheres", conductivities=[0.33, -1], radii=[0.08, 0.09], centre=[0, 0, 0])


def test_leadfield_shapes() -> None:
    with pytest.raises(ValueError, match="normals"):
        LeadField(matrix=np.zeros((2, 3)), sensor_labels=("a", "b"), source_positions=np.zeros((3, 3)))
    lf = LeadField(matrix=np.zeros((2, 3, 3)), sensor_labels=("a", "b"), source_positions=np.zeros((3, 3)))
    assert lf.orientation == "free" and lf.as_2d().shape == (2, 9)


def test_finding_codes_and_round_trip() -> None:
    f = Finding(code="placement.off-scalp", severity="fail", message="Cz is 14 mm off the skin",
                subjects=("Cz",), values={"distance_m": np.float64(0.014)}, threshold=0.01)
    assert Finding.from_dict(f.to_dict()) == Finding.from_dict(f.to_dict())
    assert f.to_dict()["values"]["distance_m"] == pytest.approx(0.014)
    with pytest.raises(ValueError):
        Finding(code="Bad Code", severity="fail", message="x")
    with pytest.raises(ValueError):
        Finding(code="a.b", severity="fatal", message="x")
