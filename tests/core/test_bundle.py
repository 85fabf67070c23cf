"""Bundle v1: bit-exact round trip, checksums, schema, atomic writes, no unpickling."""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from prep.bundle import ArraySpec, load_bundle, verify_bundle, write_bundle
from prep.errors import BundleError, UsageError


def _manifest() -> dict:
    return {"kit": {"name": "headprep", "version": "test"}, "frame": "anatomy",
            "sensors": {"labels": ["Fz", "Cz", "Pz"]}, "findings": [], "inputs": [], "plugins": [],
            "parameters": {}, "forward": {"solver": "spheres", "reference": "average", "params": {}},
            "head_model": {"kind": "spheres", "conductivities_S_per_m": [0.33], "centre_m": [0, 0, 0],
                           "radii_m": [0.09]}}


def _arrays(seed: int = 0) -> dict:
    rng = np.random.default_rng(seed)
    return {"leadfield": ArraySpec(rng.normal(size=(3, 5)), "V/(A*m)"),
            "sensor_positions": rng.normal(size=(3, 3)),
            "source_hemisphere": np.array([0, 0, 1, 1, -1], dtype=np.int8)}


@pytest.mark.parametrize("suffix", ["", ".zip"])
def test_round_trip_is_bit_exact(tmp_path: Path, suffix: str) -> None:
    arrays = _arrays()
    path = write_bundle(tmp_path / f"b{suffix}", _manifest(), arrays)
    b = load_bundle(path)
    for name, spec in arrays.items():
        data = spec.data if isinstance(spec, ArraySpec) else spec
        assert b.arrays[name].dtype == data.dtype
        assert b.arrays[name].tobytes() == np.ascontiguousarray(data).tobytes()
    assert b.manifest["schema_version"] == 1 and b.manifest["units"]["leadfield"] == "V/(A*m)"


def test_flipped_byte_is_a_checksum_finding(tmp_path: Path) -> None:
    path = write_bundle(tmp_path / "b", _manifest(), _arrays())
    npy = path / "arrays" / "leadfield.npy"
    data = bytearray(npy.read_bytes())
    data[-1] ^= 0xFF
    npy.write_bytes(bytes(data))
    codes = [f.code for f in verify_bundle(path)]
    assert codes == ["bundle.checksum"]
    with pytest.raises(BundleError, match="verification"):
        load_bundle(path)
    # the CLI: exit 1 with the code in its JSON
    out = subprocess.run([sys.executable, "-m", "prep", "verify", str(path), "--json"],
                         capture_output=True, text=True)
    assert out.returncode == 1, out.stderr
    assert json.loads(out.stdout)["findings"][0]["code"] == "bundle.checksum"


def test_manifest_damage_is_a_schema_finding(tmp_path: Path) -> None:
    path = write_bundle(tmp_path / "b", _manifest(), _arrays())
    man = json.loads((path / "manifest.json").read_text())
    del man["sensors"]
    (path / "manifest.json").write_text(json.dumps(man))
    assert [f.code for f in verify_bundle(path)] == ["bundle.schema"]
    (path / "manifest.json").write_text("{not json")
    assert [f.code for f in verify_bundle(path)] == ["bundle.schema"]


def test_pickled_array_is_refused(tmp_path: Path) -> None:
    with pytest.raises(ValueError, match="dtype"):
        write_bundle(tmp_path / "b", _manifest(), {"x": np.array([{"a": 1}], dtype=object)})
    assert not (tmp_path / "b").exists()


def test_refuses_overwrite_without_force(tmp_path: Path) -> None:
    path = write_bundle(tmp_path / "b", _manifest(), _arrays(0))
    with pytest.raises(UsageError, match="--force"):
        write_bundle(path, _manifest(), _arrays(1))
    write_bundle(path, _manifest(), _arrays(1), force=True)
    assert verify_bundle(path) == []


def test_interrupted_write_leaves_no_bundle(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    import prep.bundle as mod

    def boom(arr: np.ndarray) -> bytes:
        raise KeyboardInterrupt  # as if the process were stopped half-way

    calls = {"n": 0}
    real = mod._npy_bytes

    def flaky(arr: np.ndarray) -> bytes:
        calls["n"] += 1
        return real(arr) if calls["n"] < 2 else boom(arr)

    monkeypatch.setattr(mod, "_npy_bytes", flaky)
    with pytest.raises(KeyboardInterrupt):
        write_bundle(tmp_path / "b", _manifest(), _arrays())
    assert list(tmp_path.iterdir()) == []


def test_not_a_bundle_is_usage_error(tmp_path: Path) -> None:
    with pytest.raises(BundleError):
        verify_bundle(tmp_path / "missing")
    (tmp_path / "plain.txt").write_text("hello")
    with pytest.raises(BundleError):
        verify_bundle(tmp_path / "plain.txt")
