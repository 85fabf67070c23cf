"""Helpers for the sensor-reader tests: write small files into tmp_path."""
from __future__ import annotations

from pathlib import Path

import pytest

SAMPLES = Path(__file__).parent / "samples"


@pytest.fixture
def write(tmp_path: Path):
    """``write(name, text)`` -> path of a new file in tmp_path."""
    def _write(name: str, text: str | bytes) -> Path:
        p = tmp_path / name
        if isinstance(text, bytes):
            p.write_bytes(text)
        else:
            p.write_text(text, encoding="utf-8")
        return p
    return _write
