"""The worked example of docs/bundle-format.md runs in GNU Octave (skipped when Octave is absent)."""
from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest
from inverse_solvers.frank_sphere import write_sphere_bundle

from prep.bundle import load_bundle
from prep_plugins import export_mat

DOC = Path(__file__).resolve().parents[2] / "docs" / "bundle-format.md"

pytestmark = pytest.mark.skipif(shutil.which("octave") is None, reason="GNU Octave is not installed")


def _blocks() -> list[str]:
    text = DOC.read_text(encoding="utf-8")
    return re.findall(r"```matlab\n(.*?)```", text[text.index("<!-- BEGIN section"):], re.S)


def _octave(cwd: Path, script: str) -> str:
    (cwd / "probe.m").write_text(script, encoding="utf-8")
    out = subprocess.run(["octave", "--no-gui", "--quiet", "--eval", "probe"], cwd=cwd, capture_output=True,
                         text=True, timeout=120)
    assert "error:" not in out.stdout + out.stderr.replace("error: ignoring const execution_exception", ""), out.stderr
    return out.stdout


def test_octave_reads_the_bundle_and_the_mat_exports(tmp_path):
    bundle = load_bundle(write_sphere_bundle(tmp_path / "sub-demo01-forward", n_sensors=16, n_sources=40))
    export_mat.export_mat(bundle, tmp_path / "subject.mat")
    export_mat.export_mat(bundle, tmp_path / "v73.mat", version="7.3")
    read_npy, use, checksum, mat, _h5 = _blocks()
    (tmp_path / "read_npy.m").write_text(read_npy, encoding="utf-8")
    show = "printf('%.12g\\n', W(2, 3), sum(S), double(labels{16}(2:end)) - 48);\n"
    probe = "E = ones(16, 1) * 1e-6;\n" + use + checksum + "\n" + show
    out = _octave(tmp_path, probe).split()
    w = bundle.arrays["leadfield"]
    assert float(out[-4]) == pytest.approx(w[1, 2], rel=1e-11)  # reference: the bundle read by numpy
    assert out[-2:] == ["1", "6"]  # label E16
    for name in ("subject.mat", "v73.mat"):
        show = "printf('%.12g %d %s\\n', W(2, 3), numel(labels), man.frame);\n"
        probe = mat.replace("'subject.mat'", f"'{name}'") + show
        assert _octave(tmp_path, probe).split()[-3:] == [f"{w[1, 2]:.12g}", "16", "anatomy"]
    assert np.isfinite(w).all()
