"""The invented demo subject (installed as ``prep_demo``); see README.md in this folder."""
from __future__ import annotations

from pathlib import Path

HERE = Path(__file__).resolve().parent


def recipe_path() -> Path:
    """Path of the demo subject's recipe (TOML)."""
    return HERE / "recipe.toml"
