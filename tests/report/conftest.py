"""A small synthetic bundle for the report tests (no pipeline needed).

Ellipsoidal layers from a trimesh icosphere, 32 electrodes on the upper scalp
(one lifted 14 mm, one 4 mm inside), two spherical "hemispheres" cut into
patches, and a random average-referenced lead field. All numbers are invented
for the test.
"""
from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from prep.bundle import write_bundle
from prep.model import Finding

SCALP_AXES = np.array([0.075, 0.095, 0.088])
LAYER_SCALES = (("inner_skull", 0.82), ("outer_skull", 0.88), ("scalp", 1.0))
LIFTED, SUNK = "E05", "E09"


def _ellipsoid(scale: float, subdivisions: int = 3) -> tuple[np.ndarray, np.ndarray]:
    import trimesh

    ico = trimesh.creation.icosphere(subdivisions=subdivisions, radius=1.0)
    return np.asarray(ico.vertices) * SCALP_AXES * scale, np.asarray(ico.faces, dtype=np.int64)


def _cortex(rng: np.random.Generator, n_patches: int) -> dict[str, np.ndarray]:
    import trimesh

    ico = trimesh.creation.icosphere(subdivisions=3, radius=0.034)
    verts, faces, hemi_v = [], [], []
    for h, dx in enumerate((-0.032, 0.032)):
        verts.append(np.asarray(ico.vertices) + [dx, 0.0, 0.015])
        faces.append(np.asarray(ico.faces) + h * len(ico.vertices))
        hemi_v.append(np.full(len(ico.vertices), h))
    v, f, hv = np.vstack(verts), np.vstack(faces).astype(np.int64), np.concatenate(hemi_v)
    seeds = rng.choice(len(v), n_patches, replace=False)
    d2 = ((v[:, None, :] - v[seeds][None]) ** 2).sum(-1)
    vp = np.argmin(d2, axis=1).astype(np.int64)
    vp[v[:, 2] < -0.012] = -1  # the underside belongs to no patch
    tri = trimesh.Trimesh(v, f, process=False)
    vert_area = np.zeros(len(v))
    np.add.at(vert_area, f.ravel(), np.repeat(tri.area_faces / 3.0, 3))
    used = np.unique(vp[vp >= 0])
    remap = -np.ones(n_patches, dtype=np.int64)
    remap[used] = np.arange(len(used))
    vp = np.where(vp >= 0, remap[np.maximum(vp, 0)], -1)
    m = len(used)
    centres = np.array([v[vp == k].mean(axis=0) for k in range(m)])
    hemi = np.array([np.bincount(hv[vp == k]).argmax() for k in range(m)], dtype=np.int8)
    hc = np.where(hemi[:, None] == 0, [-0.032, 0.0, 0.015], [0.032, 0.0, 0.015])
    normals = (centres - hc) / np.linalg.norm(centres - hc, axis=1, keepdims=True)
    areas = np.bincount(vp[vp >= 0], weights=vert_area[vp >= 0], minlength=m)
    return {"cortex_vertices": v, "cortex_faces": f, "source_vertex_patch": vp, "source_positions": centres,
            "source_normals": normals, "source_areas": areas, "source_spread": rng.uniform(0.05, 0.6, m),
            "source_hemisphere": hemi}


def make_synthetic_bundle(path: Path, *, seed: int = 7, n_sensors: int = 32, n_patches: int = 60,
                          layers: bool = True, cortex: bool = True, passport: bool = True,
                          placement: bool = True, spheres: bool = False, scalp: bool = True,
                          findings: list[Finding] | None = None) -> Path:
    """Write a synthetic bundle at ``path`` and return it; switches drop optional parts."""
    rng = np.random.default_rng(seed)
    arrays: dict[str, Any] = {}
    sv, sf = _ellipsoid(1.0)
    top = np.flatnonzero(sv[:, 2] > 0.01)
    pick = top[np.linspace(0, len(top) - 1, n_sensors).astype(int)]
    labels = [f"E{i + 1:02d}" for i in range(n_sensors)]
    pos = sv[pick]
    normal = pos / SCALP_AXES**2
    normal /= np.linalg.norm(normal, axis=1, keepdims=True)
    dist = rng.normal(0.0, 0.0012, n_sensors)
    dist[labels.index(LIFTED)] = 0.014
    dist[labels.index(SUNK)] = -0.004
    arrays["sensor_positions"] = pos
    if scalp:
        arrays["scalp_vertices"], arrays["scalp_faces"] = sv, sf
    if placement:
        arrays["headshape_points"] = sv[sv[:, 2] > -0.02][::9] * 1.002
        arrays["sensor_digitized"] = pos + normal * dist[:, None]
        arrays["placement_signed_distance"] = dist
    cx = _cortex(rng, n_patches)
    keys = ("source_positions", "source_normals", "source_areas", "source_spread", "source_hemisphere")
    arrays.update({k: cx[k] for k in keys})
    if cortex:
        arrays.update({k: cx[k] for k in ("cortex_vertices", "cortex_faces", "source_vertex_patch")})
    m = len(cx["source_positions"])
    lf = rng.normal(size=(n_sensors, m)) * 1e-6
    lf -= lf.mean(axis=0)
    arrays["leadfield"] = lf
    s = np.linalg.svd(lf, compute_uv=False)
    cond = float(s[0] / s[n_sensors - 2])
    if passport:
        depth = 0.09 - np.linalg.norm(cx["source_positions"], axis=1)
        arrays.update(passport_singular_values=s, passport_column_norm=np.linalg.norm(lf, axis=0),
                      passport_source_depth=depth, passport_peak_localisation_error=rng.uniform(0.0, 0.03, m),
                      passport_spatial_dispersion=rng.uniform(0.005, 0.04, m))
    if spheres:
        head_model = {"kind": "spheres", "conductivities_S_per_m": [0.33, 0.0042, 0.33],
                      "centre_m": [0.0, 0.0, 0.0], "radii_m": [0.068, 0.075, 0.085], "frame": "anatomy"}
    elif layers:
        head_model = {"kind": "layers", "conductivities_S_per_m": [0.33, 0.0042, 0.33], "frame": "anatomy",
                      "layers": []}
        for i, (role, scale) in enumerate(LAYER_SCALES):
            v, f = _ellipsoid(scale, subdivisions=2)
            arrays[f"layer{i}_vertices"], arrays[f"layer{i}_faces"] = v, f
            head_model["layers"].append({"role": role, "n_vertices": len(v), "n_faces": len(f)})
    else:
        head_model = None
    if findings is None:
        findings = [
            Finding(code="placement.off-scalp", severity="fail", subjects=(LIFTED,), source="check_placement",
                    message=f"electrode {LIFTED} lies 14.0 mm off the skin (limit 10 mm)",
                    values={"signed_distance_m": 0.014}, threshold=0.010),
            Finding(code="placement.inside-scalp", severity="warn", subjects=(SUNK,), source="check_placement",
                    message=f"electrode {SUNK} lies 4.0 mm below the skin (limit 3 mm)"),
            Finding(code="leadfield.depth-bias", severity="info", subjects=(), source="check_leadfield",
                    message="the shallowest sources are 12 times stronger than the deepest"),
        ]
    codes = {lab: [f.code for f in findings if lab in f.subjects] for lab in labels}
    manifest: dict[str, Any] = {
        "kit": {"name": "headprep", "version": "0.1.0"}, "subject": {"id": "sub-test01"}, "frame": "anatomy",
        "sensors": {"labels": labels, "kinds": ["eeg"] * n_sensors, "original_labels": labels, "fiducials": {}},
        "forward": {"solver": "spheres" if spheres else "bem", "reference": "average", "params": {"order": 40}},
        "inputs": [{"role": "sensors", "file": "sub-test01_electrodes.tsv", "sha256": "ab" * 32,
                    "reader": "sensor_bids"},
                   {"role": "scalp", "file": "scalp.ply", "sha256": "cd" * 32, "reader": "surface_trimesh"}],
        "plugins": [{"name": "report_sections", "distribution": "headprep", "version": "0.1.0"}],
        "parameters": {"patches": {"target": n_patches}, "placement": {"off_scalp_mm": 10.0}},
        "findings": [f.to_dict() for f in findings],
        "transform": {"matrix": np.eye(4).tolist(), "from": "head", "to": "anatomy", "method": "surface-fit",
                      "residuals": {"rms_m": 0.0011}},
        "alignment": {"method": "surface-fit", "metrics": {"rms_m": 0.0011}},
        "passport": {"leadfield-spectrum": {"condition_number": cond, "numerical_rank": n_sensors - 1}}
        if passport else {},
    }
    if head_model is not None:
        manifest["head_model"] = head_model
    if placement:
        manifest["placement"] = {"per_electrode": [
            {"label": lab, "signed_distance_m": float(dist[i]), "shift_m": float(abs(dist[i])),
             "codes": codes[lab]} for i, lab in enumerate(labels)]}
    return write_bundle(path, manifest, arrays)


@pytest.fixture
def synthetic_bundle(tmp_path: Path) -> Callable[..., Path]:
    """Factory: ``synthetic_bundle(name="b", **switches) -> Path`` under the test's tmp_path."""
    def make(name: str = "bundle", **kw: Any) -> Path:
        return make_synthetic_bundle(tmp_path / name, **kw)
    return make


#: the sparse bundle: only what every bundle must have (and patch figures)
SPARSE = {"layers": False, "cortex": False, "passport": False, "placement": False, "scalp": False}


def _page(bundle: Path) -> Path:
    from prep.bundle import load_bundle
    from prep.registry import make_registry
    from prep.report import write_report

    return write_report(load_bundle(bundle), make_registry(), bundle.parent / f"{bundle.name}.html")


@pytest.fixture(scope="session")
def report_bundle(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The full synthetic bundle (one fail, one warn, one info finding), built once per session."""
    return make_synthetic_bundle(tmp_path_factory.mktemp("report") / "full")


@pytest.fixture(scope="session")
def report_page(report_bundle: Path) -> Path:
    """The report of :func:`report_bundle`, written once per session."""
    return _page(report_bundle)


@pytest.fixture(scope="session")
def sparse_bundle(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A bundle with none of the optional parts but the patch figures."""
    return make_synthetic_bundle(tmp_path_factory.mktemp("report") / "sparse", **SPARSE)


@pytest.fixture(scope="session")
def sparse_page(sparse_bundle: Path) -> Path:
    return _page(sparse_bundle)
