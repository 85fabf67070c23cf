"""The shipped demo subject (``prep_demo``): its geometric promises and its reproducibility.

Reference library for every geometric value: trimesh (watertightness, winding,
signed volume, ``contains``, ``proximity.closest_point``). Thresholds are the
scenario's own (invented demo numbers, stated in demo_heads/README.md).
"""
from __future__ import annotations

import json
import tomllib
from pathlib import Path

import numpy as np
import pytest
import trimesh

from prep_demo import HERE, make_demo

MESH_KEYS = ("scalp", "outer_skull", "inner_skull")


def _read_table(path: Path) -> tuple[list[str], np.ndarray, list[str], list[str]]:
    """(comment lines, xyz (n, 3) float, labels, last column) of one of our tab-separated files."""
    lines = path.read_text().splitlines()
    comments = [ln for ln in lines if ln.startswith("#")]
    rows = [ln.split("\t") for ln in lines if not ln.startswith("#")]
    header, body = rows[0], rows[1:]
    assert header[:4] in (["name", "x", "y", "z"], ["label", "x", "y", "z"]), header
    xyz = np.array([[float(v) for v in r[1:4]] for r in body])
    return comments, xyz, [r[0] for r in body], [r[4] for r in body]


def _device_to_anatomy_mm(points: np.ndarray) -> np.ndarray:
    truth = json.loads((HERE / "truth.json").read_text())
    m = np.array(truth["device_to_anatomy"]["matrix_m"])
    return (points * 1e-3 @ m[:3, :3].T + m[:3, 3]) * 1e3


@pytest.fixture(scope="module")
def recipe() -> dict:
    return tomllib.loads((HERE / "recipe.toml").read_text())


@pytest.fixture(scope="module")
def truth() -> dict:
    return json.loads((HERE / "truth.json").read_text())


@pytest.fixture(scope="module")
def meshes(recipe: dict) -> dict[str, trimesh.Trimesh]:
    inputs = recipe["inputs"]
    paths = {key: inputs[key] for key in MESH_KEYS}
    paths["cortex_left"], paths["cortex_right"] = inputs["cortex"]
    return {key: trimesh.load(HERE / name, process=False) for key, name in paths.items()}


def test_recipe_has_the_agreed_shape_and_its_files_exist(recipe: dict) -> None:
    assert set(recipe) == {"subject", "inputs", "align", "patches", "head_model", "forward", "output"}
    inputs = recipe["inputs"]
    assert set(inputs) == {"sensors", "headshape", "fiducials", *MESH_KEYS, "cortex", "mesh_units"}
    assert inputs["mesh_units"] == "mm"
    for name in [inputs[k] for k in ("sensors", "headshape", "fiducials", *MESH_KEYS)] + inputs["cortex"]:
        assert (HERE / name).is_file(), name
    assert recipe["patches"] == {"method": "quadric", "count": 3000}
    assert recipe["output"]["bundle"] == f"out/{recipe['subject']['id']}-forward"


def test_meshes_are_closed_and_outward(meshes: dict[str, trimesh.Trimesh]) -> None:
    for name, mesh in meshes.items():
        assert mesh.is_watertight, name            # trimesh
        assert mesh.is_winding_consistent, name
        assert mesh.volume > 0, name               # positive signed volume: normals point out


@pytest.mark.parametrize("name", ["scalp", "outer_skull", "inner_skull", "cortex_left", "cortex_right"])
def test_meshes_do_not_cross_themselves(meshes: dict[str, trimesh.Trimesh], name: str) -> None:
    pymeshfix = pytest.importorskip("pymeshfix")
    tin = pymeshfix.PyTMesh()
    tin.load_array(np.asarray(meshes[name].vertices, dtype=np.float64), np.asarray(meshes[name].faces, dtype=np.int32))
    assert np.size(tin.select_intersecting_triangles()) == 0  # pymeshfix


def test_vertex_counts_match_the_scenario(meshes: dict[str, trimesh.Trimesh]) -> None:
    counts = {name: len(m.vertices) for name, m in meshes.items()}
    assert 5_000 <= counts["scalp"] <= 10_000
    assert 2_000 <= counts["outer_skull"] <= 3_000 and 2_000 <= counts["inner_skull"] <= 3_000
    assert 20_000 <= counts["cortex_left"] <= 40_000 and 20_000 <= counts["cortex_right"] <= 40_000


@pytest.mark.parametrize(("inner", "outer", "lo", "hi"), [
    ("outer_skull", "scalp", 5.0, 7.0),          # scenario: outer skull 5-7 mm below the scalp
    ("inner_skull", "scalp", 10.0, 13.0),        # scenario: inner skull 10-13 mm below the scalp
    ("inner_skull", "outer_skull", 3.0, 10.0),   # scenario: at least 3 mm between the layers
])
def test_layers_are_nested_with_their_gaps(meshes: dict[str, trimesh.Trimesh], inner: str, outer: str,
                                           lo: float, hi: float) -> None:
    pts = meshes[inner].vertices
    assert meshes[outer].contains(pts).all()
    _, dist, _ = trimesh.proximity.closest_point(meshes[outer], pts)
    assert lo <= dist.min() and dist.max() <= hi, (dist.min(), dist.max())


@pytest.mark.parametrize("side", ["cortex_left", "cortex_right"])
def test_cortex_is_at_least_3_mm_inside_the_inner_skull(meshes: dict[str, trimesh.Trimesh], side: str) -> None:
    skull, pts = meshes["inner_skull"], meshes[side].vertices
    assert skull.contains(pts).all()
    # Any point of a face lies within the face's circumradius of one of its corners, so a
    # point farther than 3 mm + the largest circumradius from every skull vertex is more
    # than 3 mm from the skull: measure only the others exactly (scenario: >= 3 mm of CSF).
    tri = skull.triangles
    sides = np.linalg.norm(tri - np.roll(tri, 1, axis=1), axis=2)
    circumradius = (sides.prod(axis=1) / (4.0 * skull.area_faces)).max()
    vertex_dist, _ = skull.kdtree.query(pts)
    near = vertex_dist < 3.0 + circumradius
    _, dist, _ = trimesh.proximity.closest_point(skull, pts[near])
    assert dist.size == 0 or dist.min() >= 3.0


def test_hemispheres_are_apart_at_the_midline(meshes: dict[str, trimesh.Trimesh]) -> None:
    gap = meshes["cortex_right"].vertices[:, 0].min() - meshes["cortex_left"].vertices[:, 0].max()
    assert gap >= 3.0


def test_cortex_is_folded(meshes: dict[str, trimesh.Trimesh]) -> None:
    # gyri and sulci: the folded area is far above that of the convex hull (trimesh)
    for side in ("cortex_left", "cortex_right"):
        mesh = meshes[side]
        assert mesh.area > 1.5 * mesh.convex_hull.area


def test_electrodes_lie_on_the_scalp_after_the_true_transform(recipe: dict, meshes: dict, truth: dict) -> None:
    _, xyz, labels, kinds = _read_table(HERE / recipe["inputs"]["sensors"])
    assert len(labels) == 64 and len(set(labels)) == 64
    assert set(kinds) == {"EEG"}
    anat = _device_to_anatomy_mm(xyz)
    _, dist, _ = trimesh.proximity.closest_point(meshes["scalp"], anat)
    outside = ~meshes["scalp"].contains(anat)
    signed = np.where(outside, dist, -dist)
    # 1-2 mm cap lift plus 2 mm RMS digitizer noise (scenario)
    assert np.abs(signed).max() < 6.0
    assert 0.5 < np.median(signed) < 3.0
    clean = np.array([truth["electrodes_on_scalp_anatomy_mm"][lab] for lab in labels])
    err = np.linalg.norm(anat - clean, axis=1)
    assert np.sqrt(np.mean(err ** 2)) < 4.0


def test_ten_ten_layout_is_left_right_and_front_back(truth: dict) -> None:
    pos = truth["electrodes_on_scalp_anatomy_mm"]
    centre = np.array(truth["head_centre_anatomy_mm"])
    assert pos["T7"][0] < centre[0] < pos["T8"][0]          # +x is right (anatomy frame is RAS)
    assert pos["Oz"][1] < centre[1] < pos["Fpz"][1]         # +y is front
    assert pos["Cz"][2] == max(p[2] for p in pos.values())  # Cz on top


def test_fiducials_marked_and_digitized(recipe: dict, meshes: dict, truth: dict) -> None:
    comments, anat, labels, kinds = _read_table(HERE / recipe["inputs"]["fiducials"])
    assert comments == ["# units: mm"] and labels == ["nasion", "lpa", "rpa"] and set(kinds) == {"fiducial"}
    _, dist, _ = trimesh.proximity.closest_point(meshes["scalp"], anat)
    assert dist.max() < 0.1                                  # marked on the scalp
    coords = json.loads((HERE / recipe["inputs"]["sensors"].replace("_electrodes.tsv", "_coordsystem.json"))
                        .read_text())["AnatomicalLandmarkCoordinates"]
    digitized = _device_to_anatomy_mm(np.array([coords[k] for k in ("NAS", "LPA", "RPA")]))
    assert np.linalg.norm(digitized - anat, axis=1).max() < 6.0  # 2 mm RMS digitizer noise


def test_headshape_points(recipe: dict, meshes: dict, truth: dict) -> None:
    path = HERE / recipe["inputs"]["headshape"]
    assert path.read_text().splitlines()[:2] == ["# units: mm", "label\tx\ty\tz\tkind"]
    _, xyz, labels, kinds = _read_table(path)
    assert 150 <= len(labels) <= 300 and set(kinds) == {"headshape"}
    anat = _device_to_anatomy_mm(xyz)
    _, dist, _ = trimesh.proximity.closest_point(meshes["scalp"], anat)
    outliers = set(truth["noise"]["headshape_outliers"])
    is_out = np.array([lab in outliers for lab in labels])
    assert dist[~is_out].max() < 4.0 and np.median(dist[~is_out]) < 1.0  # 1 mm RMS noise
    assert dist[is_out].min() > 4.0


def test_coordsystem_json_has_the_bids_fields(recipe: dict) -> None:
    path = HERE / recipe["inputs"]["sensors"].replace("_electrodes.tsv", "_coordsystem.json")
    doc = json.loads(path.read_text())
    assert doc["EEGCoordinateSystem"] == "Other" and doc["EEGCoordinateUnits"] == "mm"
    assert doc["EEGCoordinateSystemDescription"]
    assert doc["AnatomicalLandmarkCoordinateSystem"] and doc["AnatomicalLandmarkCoordinateUnits"] == "mm"
    landmarks = doc["AnatomicalLandmarkCoordinates"]
    assert set(landmarks) == {"NAS", "LPA", "RPA"}
    assert all(len(v) == 3 and all(isinstance(c, float) for c in v) for v in landmarks.values())


def test_demo_folder_stays_small() -> None:
    total = sum(p.stat().st_size for p in HERE.iterdir() if p.is_file())
    assert total < 5_000_000


def _same_file(a: Path, b: Path) -> None:
    """Byte-identical, or (last-bit differences of libm across CPUs) numerically identical."""
    if a.read_bytes() == b.read_bytes():
        return
    if a.suffix == ".ply":
        ma, mb = (trimesh.load(p, process=False) for p in (a, b))
        np.testing.assert_array_equal(ma.faces, mb.faces)
        np.testing.assert_allclose(ma.vertices, mb.vertices, rtol=0, atol=1e-4)
    elif a.suffix == ".json":
        np.testing.assert_allclose(*(np.array(_numbers(json.loads(p.read_text()))) for p in (a, b)),
                                   rtol=0, atol=2e-2)
    else:
        ta, tb = (p.read_text().split() for p in (a, b))
        assert len(ta) == len(tb)
        for x, y in zip(ta, tb):
            assert x == y or abs(float(x) - float(y)) <= 0.011, (a.name, x, y)


def _numbers(doc: object) -> list[float]:
    if isinstance(doc, dict):
        return [v for key in sorted(doc) for v in _numbers(doc[key])]
    if isinstance(doc, list):
        return [v for item in doc for v in _numbers(item)]
    return [float(doc)] if isinstance(doc, int | float) else []


def test_generator_reproduces_the_shipped_files(tmp_path: Path) -> None:
    assert make_demo.main(["--out", str(tmp_path)]) == 0
    written = sorted(p.name for p in tmp_path.iterdir())
    assert written == sorted(make_demo.FILES.values())
    for name in written:
        _same_file(tmp_path / name, HERE / name)
