"""Output locations that cannot be written: one line, exit 2, nothing written; outputs readable as the umask says."""
from __future__ import annotations

import os
import stat
from pathlib import Path

import numpy as np
import pytest

from prep import cli
from prep.atomic import atomic_dir, check_writable, make_dirs, write_text_atomic
from prep.errors import UsageError


def test_a_file_where_a_folder_is_needed_is_a_usage_error(tmp_path: Path) -> None:
    blocker = tmp_path / "afile"
    blocker.write_text("x")
    with pytest.raises(UsageError, match="cannot write here"):
        write_text_atomic(blocker / "out.txt", "hello")
    with pytest.raises(UsageError, match="cannot write here"):
        make_dirs(blocker / "sub")
    with pytest.raises(UsageError, match="cannot write here"):
        check_writable(blocker / "sub" / "bundle")
    with pytest.raises(UsageError, match="cannot write here"):
        with atomic_dir(blocker / "bundle"):
            pass  # pragma: no cover - never reached
    assert sorted(p.name for p in tmp_path.iterdir()) == ["afile"]


def test_written_files_and_folders_follow_the_umask(tmp_path: Path) -> None:
    old = os.umask(0o022)
    try:
        write_text_atomic(tmp_path / "a.txt", "hello")
        with atomic_dir(tmp_path / "bundle") as tmp:
            (tmp / "b.txt").write_text("x")
    finally:
        os.umask(old)
    # common practice: umask 022 gives 0644 files and 0755 folders (not mkstemp's private 0600/0700)
    assert stat.S_IMODE((tmp_path / "a.txt").stat().st_mode) == 0o644
    assert stat.S_IMODE((tmp_path / "bundle").stat().st_mode) == 0o755


def test_forward_into_an_unwritable_place_exits_2_in_one_line(tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    sensors = tmp_path / "e.tsv"
    angles = np.linspace(0, 2 * np.pi, 12, endpoint=False)
    rows = [f"E{i}\t{0.09 * np.cos(a):.4f}\t{0.09 * np.sin(a):.4f}\t{0.03 + 0.02 * (i % 3):.4f}"
            for i, a in enumerate(angles)]
    sensors.write_text("# units: m\nlabel\tx\ty\tz\n" + "\n".join(rows) + "\n")
    sources = tmp_path / "s.tsv"
    sources.write_text("x\ty\tz\n0\t0\t0.03\n")
    (tmp_path / "afile").write_text("x")
    status = cli.main(["forward", "--model", "spheres", "--sensors", str(sensors), "--sources", str(sources),
                       "--out", str(tmp_path / "afile" / "lf.npy")])
    err = capsys.readouterr().err
    assert status == 2, err
    assert len(err.strip().splitlines()) == 1 and "cannot write here" in err and "Traceback" not in err


@pytest.mark.parametrize("argv", [
    ["patches", "{c}", "--out", "{bad}/p.npz"],
    ["export", "{c}", "--to", "mat", "--out", "{bad}/x.mat"],
    ["forward", "--model", "spheres", "--sensors", "{c}", "--sources", "{c}", "--out", "{bad}/lf.npy"],
])
def test_commands_refuse_an_unwritable_output_before_reading(tmp_path: Path, capsys: pytest.CaptureFixture,
                                                             argv: list[str]) -> None:
    """The output location is checked before the inputs are read or anything is computed."""
    (tmp_path / "afile").write_text("x")
    dummy = tmp_path / "c.ply"
    dummy.write_text("not read")
    args = [a.format(c=dummy, bad=tmp_path / "afile") for a in argv]
    status = cli.main(args)
    err = capsys.readouterr().err
    assert status == 2 and "cannot write here" in err, err


def test_a_read_only_folder_is_a_usage_error(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """As root a chmod 555 folder is still writable, so the OS refusal is simulated where it happens."""
    import tempfile

    def refuse(*args, **kwargs):  # noqa: ANN002, ANN003, ANN202
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr(tempfile, "mkstemp", refuse)
    monkeypatch.setattr(tempfile, "mkdtemp", refuse)
    with pytest.raises(UsageError, match=r"x\.txt: cannot write here \(Permission denied\)"):
        write_text_atomic(tmp_path / "x.txt", "hello")
    with pytest.raises(UsageError, match=r"b: cannot write here \(Permission denied\)"):
        with atomic_dir(tmp_path / "b"):
            pass  # pragma: no cover - never reached
    assert list(tmp_path.iterdir()) == []
