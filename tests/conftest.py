"""Shared fixtures: a fresh registry per test (never a global one)."""
from __future__ import annotations

import os

import pytest

os.environ.setdefault("PYVISTA_OFF_SCREEN", "true")
os.environ.setdefault("MPLBACKEND", "Agg")


@pytest.fixture
def registry():
    """The registry with every installed plugin (built-ins through entry points)."""
    from prep import make_registry

    return make_registry()
