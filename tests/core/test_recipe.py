"""Recipes: strict parsing with messages that name the file and the key."""
from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from prep.errors import UsageError
from prep.recipe import load_recipe

GOOD = """
[subject]
id = "s01"
[inputs]
sensors = "e.tsv"
scalp = "scalp.ply"
cortex = ["l.ply", "r.ply"]
[patches]
count = 500
"""


def _write(tmp_path: Path, text: str) -> Path:
    p = tmp_path / "recipe.toml"
    p.write_text(text)
    return p


def test_good_recipe_resolves_paths_relative_to_itself(tmp_path: Path) -> None:
    r = load_recipe(_write(tmp_path, GOOD))
    assert r.subject == "s01"
    assert r.inputs["cortex"] == [str(tmp_path / "l.ply"), str(tmp_path / "r.ply")]
    assert r.method("patches") == "quadric" and r.plugin_options("patches") == {"count": 500}
    assert r.steps["forward"] == {"reference": "average", "orientation": "fixed"}


@pytest.mark.parametrize("text, message", [
    (GOOD + "[extras]\na = 1\n", r"unknown section \[extras\]"),
    (GOOD.replace('id = "s01"', 'id = "s01"\nage = 3'), r"\[subject\] unknown key 'age'"),
    (GOOD.replace('scalp = "scalp.ply"\n', ""), r"\[inputs\] is missing the required key 'scalp'"),
    (GOOD.replace('sensors = "e.tsv"', "sensors = 5"), r"\[inputs\] 'sensors' must be a string, got 5"),
    (GOOD.replace("[subject]\nid = \"s01\"\n", ""), r"\[subject\] section is missing"),
    (GOOD + "[forward]\norientation = 'sideways'\n", "orientation"),
    (GOOD.replace('id = "s01"', 'id = "../x"'), "plain name"),
    ("[subject\nid = 1", "not valid TOML.*line 1"),
    # a misspelt required key is named as such (with the likely intended key), not reported as missing
    (GOOD.replace('scalp = "scalp.ply"', 'scallp = "scalp.ply"'),
     r"\[inputs\] unknown key 'scallp' \(did you mean 'scalp'\?"),
    (GOOD.replace("[patches]", "[patchs]"), r"unknown section \[patchs\] \(did you mean 'patches'\?"),
])
def test_bad_recipes_name_file_and_key(tmp_path: Path, text: str, message: str) -> None:
    p = _write(tmp_path, text)
    with pytest.raises(UsageError, match=message) as info:
        load_recipe(p)
    assert str(p) in str(info.value)


def test_run_with_bad_recipe_exits_2_and_writes_nothing(tmp_path: Path) -> None:
    p = _write(tmp_path, GOOD.replace("count = 500", "count = 500\ncont = 3").replace(
        "[patches]", "[output]\nbundle = 'b'\n[patches]"))
    before = set(tmp_path.iterdir())
    out = subprocess.run([sys.executable, "-m", "prep", "run", str(p)], capture_output=True, text=True)
    assert out.returncode == 2, out.stderr
    assert out.stderr.count("\n") == 1 and str(tmp_path) in out.stderr
    assert set(tmp_path.iterdir()) == before


def test_missing_recipe_exits_2(tmp_path: Path) -> None:
    out = subprocess.run([sys.executable, "-m", "prep", "run", str(tmp_path / "nope.toml")],
                         capture_output=True, text=True)
    assert out.returncode == 2 and "recipe file not found" in out.stderr
