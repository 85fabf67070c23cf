"""``headprep patches``: files in, an .npz and a picture out, the CLI contract."""
from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import pytest
import trimesh

from prep import cli
from prep.commands.patches import read_patches


@pytest.fixture(scope="module")
def head(tmp_path_factory) -> Path:
    """Two invented hemispheres (mm, PLY) and an inner skull (mm, OFF)."""
    d = tmp_path_factory.mktemp("head")
    lh = trimesh.creation.icosphere(subdivisions=4, radius=1.0)
    lh.vertices = lh.vertices * [30.0, 60.0, 45.0] + [-33.0, 0.0, 10.0]
    lh.export(d / "lh.ply")
    rh = lh.copy()
    rh.vertices = rh.vertices + [66.0, 0.0, 0.0]
    rh.export(d / "rh.ply")
    skull = trimesh.creation.icosphere(subdivisions=3, radius=1.0)
    skull.vertices = skull.vertices * [72.0, 68.0, 62.0] + [0.0, 0.0, 8.0]  # the hemispheres poke out front/back
    skull.export(d / "skull.off")
    return d


def _main(capsys, *args: str) -> tuple[int, str, str]:
    rc = cli.main(list(args))
    out = capsys.readouterr()
    return rc, out.out, out.err


def test_writes_npz_and_picture(head: Path, tmp_path: Path, capsys) -> None:
    out = tmp_path / "sub" / "patches.npz"
    rc, stdout, _ = _main(capsys, "patches", str(head / "lh.ply"), str(head / "rh.ply"), "--count", "300",
                          "--inner-skull", str(head / "skull.off"), "--mesh-units", "mm", "--out", str(out), "--json")
    doc = json.loads(stdout)
    assert rc == 0, doc["findings"]  # excluded patches are warn/info, not fail
    assert out.is_file() and (tmp_path / "sub" / "patches.png").stat().st_size > 1000
    patches, meta = read_patches(out)
    assert len(patches) == doc["n_patches"] < 300
    assert meta["format"] == "headprep-patches/1" and meta["surfaces"][0]["role"] == "cortex_left"
    assert {f["code"] for f in doc["findings"]} >= {"patches.outside"}
    assert set(np.unique(patches.hemisphere)) == {0, 1}
    with np.load(out, allow_pickle=False) as z:  # plain arrays only
        assert z["surface_vertex_counts"].tolist() == [2562, 2562]
        assert z["source_vertex_patch"].shape == (2 * 2562,)


def test_keep_excluded_fails(head: Path, tmp_path: Path, capsys) -> None:
    out = tmp_path / "p.npz"
    rc, stdout, _ = _main(capsys, "patches", str(head / "lh.ply"), str(head / "rh.ply"), "--count", "200",
                          "--inner-skull", str(head / "skull.off"), "--mesh-units", "mm", "--keep-excluded",
                          "--no-picture", "--out", str(out), "--json")
    doc = json.loads(stdout)
    assert rc == 1 and doc["n_patches"] >= 190
    assert "patches.outside" in {f["code"] for f in doc["findings"] if f["severity"] == "fail"}


def test_human_summary_names_hemispheres_left_and_right(head: Path, tmp_path: Path, capsys) -> None:
    rc, stdout, _ = _main(capsys, "patches", str(head / "lh.ply"), str(head / "rh.ply"), "--count", "200",
                          "--mesh-units", "mm", "--no-picture", "--out", str(tmp_path / "p.npz"))
    assert rc == 0
    assert re.match(r"\d+ patches \(left \d+, right \d+\), total area", stdout)  # not 'hemisphere 0/1'


def test_units_suspect_reported_without_mesh_units(head: Path, tmp_path: Path, capsys) -> None:
    rc, stdout, _ = _main(capsys, "patches", str(head / "lh.ply"), "--spacing", "10", "--no-picture",
                          "--out", str(tmp_path / "p.npz"), "--json")
    doc = json.loads(stdout)
    assert rc == 0
    assert [f["severity"] for f in doc["findings"] if f["code"] == "input.units-suspect"] == ["warn"]
    assert 0.005 < doc["total_area_m2"] < 0.05  # read as mm: a 6-12 cm ellipsoid


@pytest.mark.parametrize("bad", [["--count", "0"], ["--spacing", "-1"], ["--islands", "merge"]])
def test_bad_invocation_is_exit_2_and_writes_nothing(head: Path, tmp_path: Path, capsys, bad) -> None:
    out = tmp_path / "p.npz"
    try:
        rc, _, err = _main(capsys, "patches", str(head / "lh.ply"), *bad, "--out", str(out))
    except SystemExit as exc:  # argparse rejects choices itself (also exit 2)
        rc = exc.code
    assert rc == 2 and not out.exists()


def test_unreadable_mesh_names_file(tmp_path: Path, capsys) -> None:
    bad = tmp_path / "cortex.obj"
    bad.write_text("v 0 0 0\nv 1 0 zero\n")
    out = tmp_path / "p.npz"
    rc, _, err = _main(capsys, "patches", str(bad), "--out", str(out))
    assert rc == 2 and f"{bad}:2:" in err and not out.exists()


def test_wrong_out_suffix(head: Path, tmp_path: Path, capsys) -> None:
    rc, _, err = _main(capsys, "patches", str(head / "lh.ply"), "--out", str(tmp_path / "p.txt"))
    assert rc == 2 and ".npz" in err
