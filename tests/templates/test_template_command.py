"""``headprep template`` end to end on a sphere written as PLY."""
from __future__ import annotations

import json

import numpy as np
import trimesh

from prep import make_registry
from prep.cli import main
from prep.readers import read_sensors

R = 0.09  # m


def _inputs(tmp_path):
    mesh = trimesh.creation.icosphere(subdivisions=4, radius=R)
    scalp = tmp_path / "scalp.ply"
    mesh.export(scalp)
    fids = tmp_path / "fiducials.csv"
    fids.write_text(f"# units: m\nlabel,x,y,z\nNAS,0,{R},0\nLPA,{-R},0,0\nRPA,{R},0,0\n")
    return scalp, fids


def test_template_writes_a_readable_bids_file(tmp_path, capsys):
    scalp, fids = _inputs(tmp_path)
    out = tmp_path / "sub-01_electrodes.tsv"
    rc = main(["template", "--system", "10-20", "--scalp", str(scalp), "--fiducials", str(fids),
               "--out", str(out), "--json"])
    assert rc == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["n_positions"] == 19 and doc["template"] == "rules"
    s = read_sensors(make_registry(), out)
    assert len(s) == 19 and {"nasion", "lpa", "rpa", "inion"} <= set(s.fiducials)
    np.testing.assert_allclose(np.linalg.norm(s.positions, axis=1), R, rtol=0.01)


def test_template_without_fiducials_exits_2_writing_nothing(tmp_path, capsys):
    scalp, _ = _inputs(tmp_path)
    fids = tmp_path / "nofid.csv"
    fids.write_text("label,x,y,z\nCz,0,0,0.09\n")
    out = tmp_path / "x_electrodes.tsv"
    assert main(["template", "--scalp", str(scalp), "--fiducials", str(fids), "--out", str(out)]) == 2
    assert "no nasion, lpa, rpa fiducial" in capsys.readouterr().err
    assert not out.exists()


def test_template_unknown_system(tmp_path, capsys):
    scalp, fids = _inputs(tmp_path)
    assert main(["template", "--system", "10-15", "--scalp", str(scalp), "--fiducials", str(fids),
                 "--out", str(tmp_path / "o_electrodes.tsv")]) == 2
    assert "10-15" in capsys.readouterr().err


def test_bare_electrodes_tsv_reads_back_with_its_sidecar(tmp_path, capsys):
    scalp, fids = _inputs(tmp_path)
    out = tmp_path / "electrodes.tsv"
    assert main(["template", "--scalp", str(scalp), "--fiducials", str(fids), "--out", str(out)]) == 0
    assert (tmp_path / "coordsystem.json").is_file()
    capsys.readouterr()
    assert main(["inspect", str(out), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["reader"] == "bids" and doc["units"] == {"unit": "m", "source": "declared"}
    assert doc["counts"]["eeg"] == 89 and doc["counts"]["fiducials"] == 4


def test_an_out_name_no_writer_makes_is_refused_before_placing(tmp_path, capsys):
    """'tpl.tsv' would be written as BIDS but read back without its sidecar (units assumed, with a warning)."""
    scalp, fids = _inputs(tmp_path)
    assert main(["template", "--scalp", str(scalp), "--fiducials", str(fids), "--out", str(tmp_path / "tpl.tsv")]) == 2
    err = capsys.readouterr().err
    assert "_electrodes.tsv" in err and len(err.strip().splitlines()) == 1
    assert sorted(p.name for p in tmp_path.iterdir()) == ["fiducials.csv", "scalp.ply"]
