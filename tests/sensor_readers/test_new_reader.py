"""``headprep new-reader``: the scaffold loads, passes the conformance suite, and its own test runs."""
from __future__ import annotations

import importlib.util
import json
import os
import subprocess
import sys
from pathlib import Path

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


def test_scaffolded_package_runs_its_own_test(tmp_path, capsys):
    pkg = _scaffold(tmp_path, capsys)
    env = {**os.environ, "PYTHONPATH": str(pkg)}
    out = subprocess.run([sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider", str(pkg / "tests")],
                         capture_output=True, text=True, env=env, cwd=pkg)
    assert out.returncode == 0, out.stdout + out.stderr
    assert "1 passed" in out.stdout


def test_scaffold_refuses_existing_target_and_bad_name(tmp_path, capsys):
    _scaffold(tmp_path, capsys)
    assert main(["new-reader", "wand_pts", "--sample", str(SAMPLE), "--out", str(tmp_path)]) == 2
    assert main(["new-reader", "Bad Name", "--sample", str(SAMPLE), "--out", str(tmp_path)]) == 2
