"""``headprep forward``: shapes, JSON, references and unusable input (exit 2, nothing written)."""
from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import pytest

from prep import ReadError, SensorReader, Sensors, hookimpl, make_registry
from prep.cli import main
from prep.console import Context


class _PointsReader:
    """Test-only sensor reader for ``*.testpos``: lines ``label x y z [kind]`` in metres."""

    @staticmethod
    def _read(path: Path, **_: object) -> Sensors:
        labels, pos, kinds = [], [], []
        for i, line in enumerate(Path(path).read_text().splitlines(), 1):
            cells = line.split()
            if len(cells) not in (4, 5):
                raise ReadError(path, i, "expected 'label x y z [kind]'")
            labels.append(cells[0])
            pos.append([float(c) for c in cells[1:4]])
            kinds.append(cells[4] if len(cells) == 5 else "eeg")
        return Sensors(labels=labels, positions=pos, kinds=kinds, frame="anatomy")

    @hookimpl
    def headprep_register_sensor_readers(self) -> list[SensorReader]:
        return [SensorReader(name="testpos", suffixes=(".testpos",), read=self._read)]


@pytest.fixture
def cli(monkeypatch):
    reg = make_registry(plugins=[_PointsReader()])
    monkeypatch.setattr(Context, "registry", property(lambda self: reg))
    return main


@pytest.fixture
def sensors(tmp_path):
    rng = np.random.default_rng(4)
    u = rng.normal(size=(32, 3))
    u[:, 2] = np.abs(u[:, 2]) + 0.2
    u /= np.linalg.norm(u, axis=1)[:, None]
    pts = np.array([0.0, 0.005, 0.03]) + 0.092 * u
    lines = [f"E{i} {x:.6f} {y:.6f} {z:.6f}" for i, (x, y, z) in enumerate(pts)]
    lines.append("VEOG 0.05 0.08 0.0 eog")
    path = tmp_path / "cap.testpos"
    path.write_text("\n".join(lines) + "\n")
    return path


def _tsv(path: Path, header: str, rows: list[str]) -> Path:
    path.write_text(header + "\n" + "\n".join(rows) + "\n")
    return path


def test_free_orientation_tsv(cli, sensors, tmp_path, capsys):
    src = _tsv(tmp_path / "src.tsv", "x\ty\tz", ["0.0\t0.0\t0.03", "0.01\t0.02\t0.05", "-0.02\t0.0\t0.04"])
    out = tmp_path / "lf.npy"
    code = cli(["forward", "--model", "spheres", "--sensors", str(sensors), "--sources", str(src),
                "--out", str(out), "--json"])
    assert code == 0
    doc = json.loads(capsys.readouterr().out)
    lf = np.load(out)
    assert lf.shape == (32, 3, 3) and doc["shape"] == [32, 3, 3]          # EOG channel left out
    assert doc["orientation"] == "free" and doc["units"] == "V/(A*m)" and doc["reference"] == "average"
    assert len(doc["conductor"]["radii_m"]) == 3 and np.all(np.isfinite(lf))
    assert np.abs(lf.sum(axis=0)).max() < 1e-10 * np.abs(lf).max()


def test_fixed_orientation_npy_explicit_sphere_and_reference(cli, sensors, tmp_path, capsys):
    src = tmp_path / "src.npy"
    np.save(src, np.array([[0.0, 0.0, 0.03, 0.0, 0.0, 1.0], [0.01, 0.0, 0.05, 0.0, 2.0, 0.0]]))
    out = tmp_path / "lf.npy"
    code = cli(["forward", "--model", "spheres", "--sensors", str(sensors), "--sources", str(src),
                "--out", str(out), "--centre", "0,0.005,0.03", "--radii", "0.08,0.085,0.092",
                "--conductivities", "0.33,0.0042,0.33", "--reference", "E3", "--json"])
    assert code == 0
    doc = json.loads(capsys.readouterr().out)
    lf = np.load(out)
    assert lf.shape == (32, 2) and doc["orientation"] == "fixed"
    assert np.all(lf[3] == 0.0)
    assert doc["conductor"]["radii_m"] == [0.08, 0.085, 0.092]


def test_human_summary_gives_sphere_geometry_in_mm(cli, sensors, tmp_path, capsys):
    """People read millimetres (the kit's convention for human output); the JSON keeps metres."""
    src = _tsv(tmp_path / "src.tsv", "x y z", ["0 0 0.03"])
    code = cli(["forward", "--model", "spheres", "--sensors", str(sensors), "--sources", str(src),
                "--out", str(tmp_path / "lf.npy"), "--centre", "0,0.005,0.03", "--radii", "0.08,0.085,0.092"])
    out = capsys.readouterr().out
    assert code == 0
    assert "centre 0.0, 5.0, 30.0 mm; radii 80.0, 85.0, 92.0 mm" in out


def test_bad_source_row_names_file_and_line_and_writes_nothing(cli, sensors, tmp_path, capsys):
    src = _tsv(tmp_path / "src.tsv", "x y z", ["0 0 0.03", "0.01 oops 0.05"])
    out = tmp_path / "lf.npy"
    code = cli(["forward", "--model", "spheres", "--sensors", str(sensors), "--sources", str(src),
                "--out", str(out)])
    assert code == 2
    assert f"{src}:3:" in capsys.readouterr().err
    assert not out.exists() and list(tmp_path.glob("*.part")) == []


def test_source_outside_innermost_sphere_is_exit_2(cli, sensors, tmp_path, capsys):
    src = _tsv(tmp_path / "src.tsv", "x y z nx ny nz", ["0 0 0.03 0 0 1", "", "0 0 0.11 0 0 1"])
    out = tmp_path / "lf.npy"
    code = cli(["forward", "--model", "spheres", "--sensors", str(sensors), "--sources", str(src),
                "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 2 and f"{src}:4:" in err and "innermost sphere" in err
    assert re.search(r"at \d+\.\d mm from the sphere centre .* \(radius \d+\.\d mm", err)  # mm for people
    assert not out.exists()


@pytest.mark.parametrize("extra, message", [
    (["--radii", "0.08,0.09"], "no default conductivities for 2 shells"),
    (["--centre", "0,0"], "expected 3 numbers"),
    (["--conductivities", "a,b,c"], "comma-separated numbers"),
    (["--reference", "Cz"], "reference electrode 'Cz'"),
])
def test_bad_sphere_options_exit_2(cli, sensors, tmp_path, capsys, extra, message):
    src = _tsv(tmp_path / "src.tsv", "x y z", ["0 0 0.03"])
    out = tmp_path / "lf.npy"
    code = cli(["forward", "--model", "spheres", "--sensors", str(sensors), "--sources", str(src),
                "--out", str(out), *extra])
    assert code == 2 and message in capsys.readouterr().err
    assert not out.exists()


def test_bad_header_and_npy_shape(cli, sensors, tmp_path, capsys):
    src = _tsv(tmp_path / "src.tsv", "x y", ["0 0"])
    code = cli(["forward", "--model", "spheres", "--sensors", str(sensors), "--sources", str(src),
                "--out", str(tmp_path / "lf.npy")])
    assert code == 2 and f"{src}:1:" in capsys.readouterr().err
    npy = tmp_path / "src.npy"
    np.save(npy, np.zeros((4, 4)))
    code = cli(["forward", "--model", "spheres", "--sensors", str(sensors), "--sources", str(npy),
                "--out", str(tmp_path / "lf.npy")])
    assert code == 2 and "(n, 3) or (n, 6)" in capsys.readouterr().err
    assert not (tmp_path / "lf.npy").exists()


def test_bem_needs_its_meshes(cli, sensors, tmp_path, capsys):
    src = _tsv(tmp_path / "src.tsv", "x y z", ["0 0 0.03"])
    code = cli(["forward", "--model", "bem", "--sensors", str(sensors), "--sources", str(src),
                "--out", str(tmp_path / "lf.npy")])
    assert code == 2 and "--model bem needs --inner-skull, --outer-skull, --scalp" in capsys.readouterr().err


def test_nan_electrode_is_exit_2_naming_file_and_line(cli, tmp_path, capsys):
    """A NaN electrode used to surface as 'cannot fit a sphere' without a file; now file:line and label."""
    path = tmp_path / "cap.csv"
    rows = [f"E{i},{0.09 * np.cos(a):.4f},{0.09 * np.sin(a):.4f},{0.03 + 0.01 * (i % 4):.4f}"
            for i, a in enumerate(np.linspace(0, 2 * np.pi, 16, endpoint=False))]
    rows[5] = "E5,nan,0.01,0.05"
    path.write_text("# units: m\nlabel,x,y,z\n" + "\n".join(rows) + "\n")
    src = _tsv(tmp_path / "src.tsv", "x y z", ["0 0 0.03"])
    code = cli(["forward", "--model", "spheres", "--sensors", str(path), "--sources", str(src),
                "--out", str(tmp_path / "lf.npy")])
    err = capsys.readouterr().err
    assert code == 2 and f"{path}:8: electrode E5" in err
    assert not (tmp_path / "lf.npy").exists()


def test_reader_findings_are_shown_and_mesh_units_belong_to_bem(cli, tmp_path, capsys):
    path = tmp_path / "cap.csv"  # no unit stated: the reader assumes metres from the size, with a warning
    rows = [f"E{i},{0.09 * np.cos(a):.4f},{0.09 * np.sin(a):.4f},{0.03 + 0.01 * (i % 4):.4f}"
            for i, a in enumerate(np.linspace(0, 2 * np.pi, 16, endpoint=False))]
    path.write_text("label,x,y,z\n" + "\n".join(rows) + "\n")
    src = _tsv(tmp_path / "src.tsv", "x y z", ["0 0 0.03"])
    argv = ["forward", "--model", "spheres", "--sensors", str(path), "--sources", str(src),
            "--out", str(tmp_path / "lf.npy")]
    assert cli([*argv, "--json"]) == 0
    assert "input.units-suspect" in {f["code"] for f in json.loads(capsys.readouterr().out)["findings"]}
    assert cli([*argv, "--mesh-units", "mm"]) == 2
    assert "--mesh-units belongs to --model bem" in capsys.readouterr().err
