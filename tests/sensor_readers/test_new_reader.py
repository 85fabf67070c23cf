"""``headprep new-reader``: the scaffold loads, passes the conformance suite, and its own test runs."""
from __future__ import annotations

import importlib.util
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from prep import make_registry
from prep.cli import main
from prep.testing import assert_reader_conforms

SAMPLE = Path(__file__).parent / "samples" / "session.pts"


def _scaffold(tmp_path, capsys):
    assert main(["new-reader", "wand_pts", "--sample", str(SAMPLE), "--out", str(tmp_path), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    pkg = Path(doc["package"])
    assert doc["layout"]["unit"] == "cm" and doc["layout"]["header"] == 0
    return pkg


def test_scaffold_files_and_entry_point(tmp_path, capsys):
    pkg = _scaffold(tmp_path, capsys)
    assert (pkg / "pyproject.toml").read_text().count('wand_pts = "headprep_wand_pts"') == 1
    module = (pkg / "headprep_wand_pts.py").read_text()
    assert len(module.splitlines()) < 60 and "hookimpl" in module
    assert (pkg / "tests" / "session.pts").is_file()


def test_scaffolded_reader_passes_the_conformance_suite(tmp_path, capsys):
    pkg = _scaffold(tmp_path, capsys)
    spec = importlib.util.spec_from_file_location("headprep_wand_pts", pkg / "headprep_wand_pts.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    reg = make_registry(plugins=[module])
    work = tmp_path / "work"
    work.mkdir()
    s = assert_reader_conforms(reg, "wand_pts", pkg / "tests" / "session.pts", work)
    assert s.provenance.unit == "cm" and len(s) == 5


@pytest.mark.slow
def test_scaffolded_package_installs_and_passes_its_own_test(tmp_path, capsys):
    """pip-install the scaffold into a private directory (not the running environment), then run its test
    and ``headprep inspect`` with that directory on the path: the reader is found through its entry point."""
    pkg = _scaffold(tmp_path, capsys)
    site = tmp_path / "site"
    pip = subprocess.run([sys.executable, "-m", "pip", "install", "-q", "--no-deps", "--no-build-isolation",
                          "--no-index", "--target", str(site), str(pkg)], capture_output=True, text=True)
    if pip.returncode != 0 and ("bdist_wheel" in pip.stderr or "No module named" in pip.stderr):
        pytest.skip(f"no usable build backend in this environment: {pip.stderr.strip().splitlines()[-1]}")
    assert pip.returncode == 0, pip.stderr
    env = {**os.environ, "PYTHONPATH": str(site)}
    out = subprocess.run([sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider", str(pkg / "tests")],
                         capture_output=True, text=True, env=env, cwd=tmp_path)
    assert out.returncode == 0, out.stdout + out.stderr
    assert "1 passed" in out.stdout
    out = subprocess.run([sys.executable, "-m", "prep", "inspect", str(pkg / "tests" / "session.pts"), "--json"],
                         capture_output=True, text=True, env=env, cwd=tmp_path)
    assert out.returncode == 0, out.stderr
    assert json.loads(out.stdout)["reader"] == "wand_pts"


def test_scaffold_refuses_existing_target_and_bad_name(tmp_path, capsys):
    _scaffold(tmp_path, capsys)
    assert main(["new-reader", "wand_pts", "--sample", str(SAMPLE), "--out", str(tmp_path)]) == 2
    assert main(["new-reader", "Bad Name", "--sample", str(SAMPLE), "--out", str(tmp_path)]) == 2
