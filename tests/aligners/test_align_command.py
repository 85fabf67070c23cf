"""``headprep align`` end to end: files in, transform / placed electrodes / picture out, exit statuses."""
from __future__ import annotations

import json
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
import trimesh

from prep import Sensors, make_registry
from prep.cli import main

from .synthetic_heads import subject


def _write_subject(tmp: Path, sensors: Sensors, s) -> dict[str, Path]:  # noqa: ANN001
    writer = make_registry().get("sensor_writer", "bids")
    writer.write(sensors, tmp / "sub_electrodes.tsv")
    rows = ["name\tx\ty\tz"] + [f"{k}\t" + "\t".join(str(v * 1000) for v in p) for k, p in s.anatomy_fiducials.items()]
    (tmp / "mri_fiducials.tsv").write_text("\n".join(rows) + "\n")
    trimesh.Trimesh(s.scalp.vertices * 1000, s.scalp.faces).export(tmp / "scalp.ply")
    return {"sensors": tmp / "sub_electrodes.tsv", "fiducials": tmp / "mri_fiducials.tsv", "scalp": tmp / "scalp.ply"}


def _argv(files: dict[str, Path], *extra: str, units: bool = True) -> list[str]:
    stated = ["--sensor-units", "mm"] if units else []
    return ["align", "--sensors", str(files["sensors"]), "--scalp", str(files["scalp"]), "--mesh-units", "mm",
            "--fiducials", str(files["fiducials"]), *stated, *extra]


def test_align_writes_transform_sensors_and_picture(tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    s = subject("bumpy", 8)
    files = _write_subject(tmp_path, replace(s.sensors, positions=s.sensors.positions * 1000,
                                             headshape=s.sensors.headshape * 1000,
                                             fiducials={k: v * 1000 for k, v in s.sensors.fiducials.items()}), s)
    out = tmp_path / "out"
    assert main(_argv(files, "--out", str(out), "--json", "--set", "n_boot=50", "--set", "off_scalp_warn_m=0.008")) == 0
    doc = json.loads(capsys.readouterr().out)
    t = doc["transform"]
    assert (t["from"], t["to"]) == ("device", "anatomy") and np.asarray(t["matrix"]).shape == (4, 4)
    assert np.abs(np.asarray(t["matrix"]) - s.truth)[:3, 3].max() < 0.01
    assert doc["residuals"]["rms_m"] < 0.003 and doc["uncertainty"]["rotation_deg"] > 0
    row = doc["electrodes"][0]
    assert set(row) >= {"label", "signed_distance_m", "placed_m", "findings"}
    assert len(doc["electrodes"]) == len(s.labels)
    for name in ("alignment.json", "placed_electrodes.tsv", "placement.png"):
        assert (out / name).stat().st_size > 0
    assert not [p for p in out.iterdir() if p.name.startswith(".")]  # no staging left behind
    placed = make_registry().get("sensor_reader", "bids").read(out / "placed_electrodes.tsv")
    assert np.allclose(placed.positions, np.asarray([e["placed_m"] for e in doc["electrodes"]]), atol=1e-9)


def test_align_exits_1_on_a_fail_finding(tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    s = subject("ellipsoid", 9)
    flip = np.array([-1.0, 1.0, 1.0])  # a left-handed digitizer frame
    sensors = replace(s.sensors, positions=s.sensors.positions * flip * 1000,
                      headshape=s.sensors.headshape * flip * 1000,
                      fiducials={k: v * flip * 1000 for k, v in s.sensors.fiducials.items()})
    files = _write_subject(tmp_path, sensors, s)
    assert main(_argv(files, "--method", "fiducial", units=False)) == 1
    text = capsys.readouterr().out
    assert "FAIL  placement.mirrored" in text
    assert "input.units-suspect" in text  # the reader's finding travels with the sensors


def test_too_few_points_exits_2_and_writes_nothing(tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    s = subject("ellipsoid", 10)
    few = Sensors(labels=s.labels[:3], positions=s.sensors.positions[:3] * 1000, frame="device",
                  fiducials={"nasion": s.sensors.fiducials["nasion"] * 1000})
    files = _write_subject(tmp_path, few, s)
    out = tmp_path / "out"
    assert main(_argv(files, "--out", str(out))) == 2
    assert "input.too-few-points:" in capsys.readouterr().err
    assert not out.exists()
    assert main(_argv(files, "--out", str(out), "--set", "no_such_option=1")) == 2
    assert "unknown check option 'no_such_option'" in capsys.readouterr().err
    assert not out.exists()


def test_align_reports_a_nonfinite_electrode_as_a_fail(tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    """The sensor checks run here as in `inspect` and `run`: a NaN electrode is input.nonfinite, exit 1."""
    s = subject("ellipsoid", 3)
    pos = s.sensors.positions * 1000
    pos[2] = np.nan
    files = _write_subject(tmp_path, replace(s.sensors, positions=pos, headshape=s.sensors.headshape * 1000,
                                             fiducials={k: v * 1000 for k, v in s.sensors.fiducials.items()}), s)
    assert main(_argv(files, "--json", "--set", "n_boot=20")) == 1
    doc = json.loads(capsys.readouterr().out)
    assert [f["subjects"] for f in doc["findings"] if f["code"] == "input.nonfinite"] == [[s.sensors.labels[2]]]
