"""The GIfTI reader (plugin ``surface_gifti``); files written with nibabel (reference library)."""
from __future__ import annotations

from pathlib import Path

import nibabel as nib
import numpy as np
import pytest
import trimesh
from hypothesis import given, settings
from hypothesis import strategies as st

from prep import make_registry
from prep.errors import ReadError
from prep.readers import read_surface
from prep_plugins import surface_gifti


@pytest.fixture
def reg():
    return make_registry(entry_points=False, plugins=[surface_gifti])


def _write(path: Path, vertices: np.ndarray, faces: np.ndarray, meta: dict | None = None) -> Path:
    pts = nib.gifti.GiftiDataArray(vertices.astype(np.float32), intent="NIFTI_INTENT_POINTSET",
                                   datatype="NIFTI_TYPE_FLOAT32", meta=nib.gifti.GiftiMetaData(meta or {}))
    tri = nib.gifti.GiftiDataArray(faces.astype(np.int32), intent="NIFTI_INTENT_TRIANGLE",
                                   datatype="NIFTI_TYPE_INT32")
    nib.save(nib.gifti.GiftiImage(darrays=[pts, tri]), str(path))
    return path


def test_mm_by_convention(reg, tmp_path: Path) -> None:
    m = trimesh.creation.icosphere(subdivisions=2, radius=70.0)  # a 14 cm hemisphere-sized ball, mm
    surf = read_surface(reg, _write(tmp_path / "lh.surf.gii", m.vertices, m.faces), "cortex_left")
    np.testing.assert_allclose(surf.vertices, m.vertices * 1e-3, rtol=1e-6)  # float32 storage
    np.testing.assert_array_equal(surf.faces, m.faces)
    assert surf.provenance.unit == "mm" and surf.provenance.unit_source == "assumed"
    (f,) = [f for f in surf.findings if f.code == "input.units-suspect"]
    assert f.severity == "info"


def test_unit_from_metadata(reg, tmp_path: Path) -> None:
    m = trimesh.creation.icosphere(subdivisions=1, radius=0.07)
    surf = read_surface(reg, _write(tmp_path / "lh.gii", m.vertices, m.faces, {"Units": "m"}), "cortex")
    assert surf.provenance.unit == "m" and surf.provenance.unit_source == "declared"
    assert not [f for f in surf.findings if f.code == "input.units-suspect"]


def test_metres_without_metadata_warns(reg, tmp_path: Path) -> None:
    m = trimesh.creation.icosphere(subdivisions=1, radius=0.07)  # metres, but GIfTI convention is mm
    surf = read_surface(reg, _write(tmp_path / "lh.gii", m.vertices, m.faces), "cortex")
    assert surf.provenance.unit == "m"
    (f,) = [f for f in surf.findings if f.code == "input.units-suspect"]
    assert f.severity == "info"  # taken as metres because the size says so


def test_option_overrides(reg, tmp_path: Path) -> None:
    m = trimesh.creation.icosphere(subdivisions=1, radius=7.0)
    surf = read_surface(reg, _write(tmp_path / "lh.gii", m.vertices, m.faces, {"Units": "mm"}), "cortex",
                        units="cm")
    assert surf.provenance.unit == "cm" and surf.provenance.unit_source == "option"
    np.testing.assert_allclose(np.linalg.norm(surf.vertices, axis=1), 0.07, rtol=1e-5)


@pytest.mark.parametrize("content", [b"", b"<not gifti>", b"\x00garbage"])
def test_garbage(reg, tmp_path: Path, content: bytes) -> None:
    path = tmp_path / "bad.surf.gii"
    path.write_bytes(content)
    with pytest.raises(ReadError) as err:
        read_surface(reg, path, "cortex")
    assert str(path) in str(err.value)


def test_missing_triangles(reg, tmp_path: Path) -> None:
    pts = nib.gifti.GiftiDataArray(np.zeros((4, 3), np.float32), intent="NIFTI_INTENT_POINTSET",
                                   datatype="NIFTI_TYPE_FLOAT32")
    path = tmp_path / "pts.gii"
    nib.save(nib.gifti.GiftiImage(darrays=[pts]), str(path))
    with pytest.raises(ReadError, match="TRIANGLE"):
        read_surface(reg, path, "cortex")


@settings(max_examples=20, deadline=None)
@given(st.integers(4, 60), st.sampled_from(["mm", "cm", "m"]), st.integers(0, 2**32 - 1))
def test_roundtrip_property(tmp_path_factory, n: int, unit: str, seed: int) -> None:
    """Any float32 pointset and triangle list written by nibabel reads back with the declared unit applied."""
    rng = np.random.default_rng(seed)
    v = rng.uniform(-100, 100, size=(n, 3)).astype(np.float32)
    f = rng.integers(0, n, size=(2 * n, 3))
    path = _write(tmp_path_factory.mktemp("g") / "s.surf.gii", v, f, {"LengthUnit": unit})
    surf = surface_gifti.read_gifti(path)
    scale = {"mm": 1e-3, "cm": 1e-2, "m": 1.0}[unit]
    np.testing.assert_allclose(surf.vertices, v.astype(np.float64) * scale, rtol=1e-12)
    np.testing.assert_array_equal(surf.faces, f)
    assert surf.provenance.unit_source == "declared"
