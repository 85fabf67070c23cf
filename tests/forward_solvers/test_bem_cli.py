"""``headprep forward --model bem``: a lead field from three layer meshes; sources outside refused."""
from __future__ import annotations

import json

import numpy as np
import trimesh

from prep import cli
from prep.geometry.layers import icosphere


def _files(tmp_path):
    v, f = icosphere(2)
    for r, name in ((87.0, "inner"), (92.0, "outer"), (100.0, "scalp")):   # millimetres
        (tmp_path / f"{name}.ply").write_bytes(trimesh.Trimesh(v * r, f, process=False).export(file_type="ply"))
    e, _ = icosphere(2)
    e = e[e[:, 2] > 0] * 100.0
    rows = ["name\tx\ty\tz"] + [f"E{i}\t{p[0]:.3f}\t{p[1]:.3f}\t{p[2]:.3f}" for i, p in enumerate(e)]
    (tmp_path / "el.tsv").write_text("\n".join(rows) + "\n")
    return len(e)


def _args(tmp_path, sources: str, out: str) -> list[str]:
    return ["forward", "--model", "bem", "--sensors", str(tmp_path / "el.tsv"), "--units", "mm",
            "--scalp", str(tmp_path / "scalp.ply"), "--outer-skull", str(tmp_path / "outer.ply"),
            "--inner-skull", str(tmp_path / "inner.ply"), "--sources", str(tmp_path / sources),
            "--out", str(tmp_path / out), "--json"]


def test_forward_bem_writes_fixed_lead_field(tmp_path, capsys, monkeypatch) -> None:
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    n = _files(tmp_path)
    (tmp_path / "src.tsv").write_text("x y z nx ny nz\n0 0 0.05 0 0 1\n0.01 0.02 0.03 1 0 0\n")
    assert cli.main(_args(tmp_path, "src.tsv", "lf.npy")) == 0
    doc = json.loads(capsys.readouterr().out)
    lf = np.load(tmp_path / "lf.npy")
    assert lf.shape == (n, 2) and doc["solver"] == "bem" and np.all(np.isfinite(lf))
    np.testing.assert_allclose(lf.sum(axis=0), 0.0, atol=1e-9 * np.abs(lf).max())   # average reference
    assert list((tmp_path / "cache" / "headprep").glob("layers-*.npy"))             # layer solution cached


def test_forward_bem_refuses_source_outside_inner_skull(tmp_path, capsys, monkeypatch) -> None:
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    _files(tmp_path)
    (tmp_path / "bad.tsv").write_text("x y z nx ny nz\n0 0 0.05 0 0 1\n0 0 0.095 1 0 0\n")
    assert cli.main(_args(tmp_path, "bad.tsv", "lf.npy")) == 2
    err = capsys.readouterr().err
    assert "bad.tsv:3" in err and "outside the inner skull" in err
    assert not (tmp_path / "lf.npy").exists()
