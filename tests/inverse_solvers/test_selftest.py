"""The simulate-and-recover self-test and its command."""
from __future__ import annotations

import json

import numpy as np
import pytest
from inverse_solvers.frank_sphere import write_sphere_bundle

from prep import make_registry
from prep.bundle import load_bundle
from prep.cli import main
from prep.selftest import run_selftest
from prep_plugins import inverse_dipole, inverse_minnorm


def test_selftest_high_snr_sloreta_and_dipole_fit_are_exact(tmp_path):
    bundle = load_bundle(write_sphere_bundle(tmp_path / "b.bundle", n_sensors=48, n_sources=300))
    reg = make_registry(entry_points=False, plugins=[inverse_minnorm, inverse_dipole])
    res = run_selftest(reg, bundle, snr=1e6, n_dipoles=8, seed=1, forward=None)
    assert set(res.summary) == {"dipole-fit", "dspm", "minimum-norm", "sloreta"}
    assert res.summary["sloreta"]["max_mm"] == 0.0  # Pascual-Marqui 2002: zero error without noise
    assert res.summary["dipole-fit"]["max_mm"] == 0.0  # grid search on the same lead field
    assert res.forward.startswith("grid search")
    low = run_selftest(reg, bundle, snr=2.0, n_dipoles=8, seed=1, forward=None)
    assert low.summary["sloreta"]["median_mm"] >= 0.0
    assert np.array_equal(low.true_indices, res.true_indices)  # same seed, same patches


def test_selftest_command_json_and_bad_options(tmp_path, capsys):
    path = write_sphere_bundle(tmp_path / "b.bundle", n_sensors=24, n_sources=100)
    assert main(["selftest", str(path), "--n-dipoles", "4", "--seed", "3", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["n_dipoles"] == 4 and "sloreta" in doc["solvers"]
    assert set(doc["solvers"]["dspm"]) == {"median_mm", "p90_mm", "max_mm"}
    assert main(["selftest", str(path), "--snr", "0"]) == 2
    assert "--snr" in capsys.readouterr().err
    assert main(["selftest", str(tmp_path / "missing.bundle")]) != 0


def test_selftest_help_explains_why_the_leadfield_is_not_inverted(capsys):
    with pytest.raises(SystemExit):
        main(["selftest", "--help"])
    text = capsys.readouterr().out
    assert "no inverse" in text and "regularisation" in text


def test_selftest_dipole_fit_uses_a_given_forward_model(tmp_path):
    from inverse_solvers.frank_sphere import sphere_forward_model

    bundle = load_bundle(write_sphere_bundle(tmp_path / "b.bundle", n_sensors=32, n_sources=120))
    reg = make_registry(entry_points=False, plugins=[inverse_dipole])
    fwd = sphere_forward_model(bundle.arrays["sensor_positions"], 0.09)
    res = run_selftest(reg, bundle, snr=1e6, n_dipoles=3, seed=2, forward=fwd)
    assert res.forward == "forward model"
    # noiseless data of a patch dipole: the continuous fit lands on the patch (optimiser tolerance, from memory)
    assert res.summary["dipole-fit"]["max_mm"] < 0.5


def test_selftest_restores_the_bundle_forward_model(tmp_path):
    path = write_sphere_bundle(tmp_path / "b.bundle", n_sensors=32, n_sources=120, model="spheres")
    bundle = load_bundle(path)
    reg = make_registry()
    if "spheres" not in [d.name for d in reg.descriptors("forward_solver")]:
        pytest.skip("no 'spheres' forward solver installed")
    res = run_selftest(reg, bundle, snr=1e6, n_dipoles=2, seed=4, solvers=["dipole-fit", "sloreta"])
    assert res.forward == "forward model"
    assert res.summary["sloreta"]["max_mm"] == 0.0  # Pascual-Marqui 2002
    assert res.summary["dipole-fit"]["max_mm"] < 0.5  # noiseless, optimiser tolerance (from memory)
