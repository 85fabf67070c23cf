"""The CLI contract: plugins listing, --json, exit statuses, internal errors named."""
from __future__ import annotations

import json
import subprocess
import sys

import pytest

from prep import cli


def _run(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "prep", *args], capture_output=True, text=True)


def test_plugins_lists_builtins_as_json() -> None:
    out = _run("plugins", "--json")
    assert out.returncode == 0, out.stderr
    rows = {r["name"]: r for r in json.loads(out.stdout)["plugins"]}
    assert rows["forward_spheres"]["builtin"] and rows["forward_spheres"]["distribution"] == "headprep"
    kinds = {p["kind"] for r in rows.values() for p in r["provides"]}
    assert {"sensor_reader", "surface_reader"} <= kinds


def test_every_command_has_help(capsys: pytest.CaptureFixture) -> None:
    for name in cli.COMMANDS:
        with pytest.raises(SystemExit) as info:
            cli.main([name, "--help"])
        assert info.value.code == 0, name
        assert f"usage: headprep {name}" in capsys.readouterr().out, name


def test_version() -> None:
    out = _run("--version")
    assert out.returncode == 0 and out.stdout.startswith("headprep ")


def test_internal_error_is_exit_3_with_one_line(monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture) -> None:
    from prep.commands import verify

    def boom(*a: object, **k: object) -> int:
        raise RuntimeError("unexpected")

    monkeypatch.setattr(verify, "run", boom)
    assert cli.main(["verify", "x"]) == 3
    err = capsys.readouterr().err
    assert "internal error" in err and "--debug" in err and "Traceback" not in err
    assert cli.main(["verify", "x", "--debug"]) == 3
    assert "Traceback" in capsys.readouterr().err
