"""``headprep check`` on a bundle and on .npy files; ``run_passport`` options and pictures."""
from __future__ import annotations

import json

import numpy as np
import pytest
from inverse_solvers.frank_sphere import sphere_leadfield, write_sphere_bundle

from prep import LeadField, UsageError, make_registry
from prep.cli import main
from prep.passport import PNG_NAMES, passport_pngs, run_passport
from prep_plugins import check_leadfield


def test_check_bundle_writes_passport(tmp_path, capsys):
    path = write_sphere_bundle(tmp_path / "s.bundle", n_sensors=32, n_sources=200)
    out = tmp_path / "pp"
    assert main(["check", str(path), "--out", str(out), "--snr", "5", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["metrics"]["leadfield-resolution"]["snr"] == 5.0
    assert doc["metrics"]["leadfield-spectrum"]["snr"] == 5.0
    assert json.loads((out / "passport.json").read_text()) == doc
    assert sorted(p.name for p in out.glob("*.png")) == sorted(PNG_NAMES.values())
    ple = np.load(out / "arrays" / "peak_localisation_error.npy")
    assert ple.shape == (200,)
    assert main(["check", str(path), "--out", str(out)]) == 2  # refuses to overwrite
    assert "already exists" in capsys.readouterr().err


def test_check_npy_files_with_single_reference_fails(tmp_path, capsys):
    lf, el, src, nrm = sphere_leadfield(32, 150, reference=2)  # computed against E3, claimed average
    for name, arr in (("L", lf), ("S", el), ("P", src), ("N", nrm)):
        np.save(tmp_path / f"{name}.npy", arr)
    argv = ["check", "--leadfield", str(tmp_path / "L.npy"), "--sensor-positions", str(tmp_path / "S.npy"),
            "--source-positions", str(tmp_path / "P.npy"), "--no-png", "--normals", str(tmp_path / "N.npy")]
    assert main([*argv, "--out", str(tmp_path / "a")]) == 1
    assert "leadfield.reference" in capsys.readouterr().out
    assert main([*argv, "--reference", "E3", "--out", str(tmp_path / "b")]) == 0
    capsys.readouterr()
    assert main([*argv[:-2], "--reference", "E3", "--out", str(tmp_path / "c")]) == 0  # no normals: fine


def test_check_unusable_inputs_write_nothing(tmp_path, capsys):
    np.save(tmp_path / "L.npy", np.zeros((4, 5)))
    np.save(tmp_path / "S.npy", np.zeros((3, 3)))
    out = tmp_path / "never"
    assert main(["check", "--leadfield", str(tmp_path / "L.npy"), "--sensor-positions", str(tmp_path / "S.npy"),
                 "--source-positions", str(tmp_path / "S.npy"), "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "S.npy" in err and "(4, 3)" in err
    assert not out.exists()
    assert main(["check"]) == 2


def test_run_passport_options_route_to_checks_and_reject_unknown(tmp_path):
    lf, el, src, nrm = sphere_leadfield(24, 80)
    leadfield = LeadField(matrix=lf, sensor_labels=[f"E{i + 1}" for i in range(24)], source_positions=src,
                          source_normals=nrm)
    reg = make_registry(entry_points=False, plugins=[check_leadfield])
    p = run_passport(reg, leadfield, el, options={"snr": 10.0, "leadfield-depth": {"max_depth_ratio": 1.0}})
    assert p.metrics["leadfield-resolution"]["snr"] == 10.0
    assert "leadfield.depth-bias" in [f.code for f in p.findings]
    with pytest.raises(UsageError, match="unknown option 'snrr'"):
        run_passport(reg, leadfield, el, options={"snrr": 1.0})
    with pytest.raises(UsageError, match="must be float"):
        run_passport(reg, leadfield, el, options={"leadfield-depth": {"max_depth_ratio": "big"}})
    files = passport_pngs(p, tmp_path / "png", src)
    assert [f.name for f in files] == list(PNG_NAMES.values())
    assert len(passport_pngs(p, tmp_path / "png4")) == 4  # no positions: no map
    assert all(f.stat().st_size > 1000 for f in files)


def test_run_passport_ignores_options_of_other_checks():
    from prep import Check, hookimpl

    class OtherCheck:  # a check of another target, as the recipe's flat [checks] section mixes them
        @staticmethod
        @hookimpl
        def headprep_register_checks():
            return [Check(name="other", target="sensors", run=lambda **kw: [], defaults={"gap_m": 0.01})]

    lf, el, src, nrm = sphere_leadfield(16, 40)
    leadfield = LeadField(matrix=lf, sensor_labels=[f"E{i + 1}" for i in range(16)], source_positions=src,
                          source_normals=nrm)
    reg = make_registry(entry_points=False, plugins=[check_leadfield, OtherCheck])
    p = run_passport(reg, leadfield, el, options={"gap_m": 0.5, "max_condition": 1e9, "psf_chunk": 7})
    assert p.metrics["leadfield-spectrum"]["n_sensors"] == 16
    assert "other" not in p.metrics
