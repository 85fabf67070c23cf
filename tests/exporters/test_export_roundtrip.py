"""Exporters round-trip through independent readers (scipy.io.loadmat, h5py)."""
from __future__ import annotations

import json

import h5py
import numpy as np
import pytest
import scipy.io
from inverse_solvers.frank_sphere import write_sphere_bundle

from prep import make_registry
from prep.bundle import load_bundle
from prep.cli import main
from prep_plugins import export_hdf5, export_mat


@pytest.fixture
def bundle(tmp_path):
    return load_bundle(write_sphere_bundle(tmp_path / "subject.bundle", n_sensors=16, n_sources=40))


def test_mat_v5_roundtrip_through_scipy_loadmat(bundle, tmp_path):
    out = export_mat.export_mat(bundle, tmp_path / "s.mat")
    m = scipy.io.loadmat(out)  # reference reader: scipy.io
    for name in ("leadfield", "sensor_positions", "source_positions", "source_normals"):
        np.testing.assert_array_equal(m[name], bundle.arrays[name])
    np.testing.assert_array_equal(m["source_areas"].ravel(), bundle.arrays["source_areas"])
    assert [str(c[0]) for c in m["sensor_labels"].ravel()] == list(bundle.sensor_labels)
    assert json.loads(str(m["manifest_json"][0])) == bundle.manifest
    assert str(m["reference"][0]) == "average"


def test_mat_v73_is_hdf5_with_mat_header_and_column_major_shapes(bundle, tmp_path):
    out = export_mat.export_mat(bundle, tmp_path / "s73.mat", version="7.3")
    head = out.read_bytes()[:128]
    assert head.startswith(b"MATLAB 7.3 MAT-file") and head[126:128] == b"IM"  # MAT header layout, from memory
    with h5py.File(out, "r") as f:  # reference reader: h5py
        np.testing.assert_array_equal(f["leadfield"][()].T, bundle.arrays["leadfield"])
        assert f["leadfield"].attrs["MATLAB_class"] == b"double"
        labels = ["".join(map(chr, row)).rstrip() for row in f["sensor_labels"][()].T]
        assert labels == list(bundle.sensor_labels)
        text = "".join(map(chr, f["manifest_json"][()].ravel()))
        assert json.loads(text) == bundle.manifest
        assert f["source_areas"].shape == (1, 40)  # MATLAB sees 40 x 1, as scipy's oned_as="column"


def test_hdf5_roundtrip_through_h5py(bundle, tmp_path):
    out = export_hdf5.export_hdf5(bundle, tmp_path / "s.h5")
    with h5py.File(out, "r") as f:  # reference reader: h5py
        for name, arr in bundle.arrays.items():
            np.testing.assert_array_equal(f["arrays"][name][()], arr)
        assert [s.decode() for s in f["sensor_labels"][()]] == list(bundle.sensor_labels)
        assert json.loads(f.attrs["manifest"]) == bundle.manifest
        assert f.attrs["frame"] == "anatomy"


def test_registered_and_hdf5_needs_h5py():
    reg = make_registry(entry_points=False, plugins=[export_mat, export_hdf5])
    assert [d.name for d in reg.descriptors("exporter")] == ["hdf5", "mat"]
    assert reg.get("exporter", "hdf5").requires == ("h5py",)


def test_cli_export_is_atomic_and_refuses_to_overwrite(tmp_path, capsys):
    path = write_sphere_bundle(tmp_path / "b.bundle", n_sensors=8, n_sources=20)
    out = tmp_path / "b.mat"
    assert main(["export", str(path), "--to", "mat", "--out", str(out)]) == 0
    before = out.read_bytes()
    assert main(["export", str(path), "--to", "mat", "--out", str(out)]) == 2
    assert "already exists" in capsys.readouterr().err
    assert out.read_bytes() == before
    assert main(["export", str(path), "--to", "mat", "--option", "version=7.3", "--out", str(out), "--force",
                 "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["options"] == {"version": "7.3"}
    assert h5py.is_hdf5(out)
    assert main(["export", str(path), "--to", "mat", "--option", "version=4", "--out", str(tmp_path / "x.mat")]) == 2
    assert not (tmp_path / "x.mat").exists()
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []


def test_hdf5_exporter_is_listed_unavailable_without_h5py(monkeypatch, tmp_path, capsys):
    import importlib.util

    real = importlib.util.find_spec
    monkeypatch.setattr(importlib.util, "find_spec", lambda name, *a: None if name == "h5py" else real(name, *a))
    reg = make_registry(entry_points=False, plugins=[export_mat, export_hdf5])
    assert [(d.name, missing) for d, missing in reg.unavailable("exporter")] == [("hdf5", ["h5py"])]
    path = write_sphere_bundle(tmp_path / "b.bundle", n_sensors=8, n_sources=20)
    assert main(["export", str(path), "--to", "hdf5", "--out", str(tmp_path / "x.h5")]) == 2
    assert "unavailable" in capsys.readouterr().err and not (tmp_path / "x.h5").exists()
