"""``headprep inspect``: report, JSON document and exit statuses."""
from __future__ import annotations

import json
from pathlib import Path

from prep.cli import main

SAMPLES = Path(__file__).parent / "samples"


def test_inspect_json(capsys):
    assert main(["inspect", str(SAMPLES / "lab_points.csv"), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["reader"] == "table" and doc["units"] == {"unit": "mm", "source": "declared"}
    assert doc["counts"]["eeg"] == 9 and doc["counts"]["eog"] == 1 and doc["counts"]["headshape"] == 1
    assert doc["renamed"] == {"T3": "T7", "T4": "T8"}
    assert abs(doc["head_size"]["inter_preauricular_mm"] - 148.0) < 0.1  # from the sample's own numbers


def test_inspect_human_bids(capsys):
    assert main(["inspect", str(SAMPLES / "sub-demo_electrodes.tsv")]) == 0
    out = capsys.readouterr().out
    assert "reader 'bids'" in out and "units: m (declared)" in out


def test_inspect_fail_finding_exits_1(tmp_path, capsys):
    p = tmp_path / "dup.csv"
    p.write_text("label,x,y,z\nCz,0,0,95\ncz,0,1,95\n")
    assert main(["inspect", str(p), "--units", "mm", "--json"]) == 1
    doc = json.loads(capsys.readouterr().out)
    assert {f["code"] for f in doc["findings"]} >= {"input.duplicate-label", "input.fiducial-missing"}


def test_inspect_unreadable_exits_2_naming_line(tmp_path, capsys):
    p = tmp_path / "bad.csv"
    p.write_text("label,x,y,z\nCz,0,zero,95\n")
    assert main(["inspect", str(p)]) == 2
    err = capsys.readouterr().err
    assert "bad.csv:2:" in err and "'zero'" in err


def test_inspect_forced_reader(tmp_path, capsys):
    p = tmp_path / "points.dat"
    p.write_text("label x y z\nLPA -75 0 0\nRPA 75 0 0\nNAS 0 95 0\nCz 0 0 95\n")
    assert main(["inspect", str(p)]) == 2
    assert "--reader" in capsys.readouterr().err
    assert main(["inspect", str(p), "--reader", "table", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["units"] == {"unit": "mm", "source": "assumed"}
    assert [f["code"] for f in doc["findings"]] == ["input.units-suspect"]
