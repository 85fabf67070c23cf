"""``headprep demo``: prepare the invented demo subject end to end."""
from __future__ import annotations

import argparse
from pathlib import Path

from ..errors import UsageError
from ..recipe import load_recipe
from ._subject import add_output_arguments, run_one

HELP = "prepare the invented demo subject end to end and verify its bundle"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--out", type=Path, default=Path("headprep-demo"),
                        help="folder for the bundle and report (default: ./headprep-demo)")
    add_output_arguments(parser)


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    try:
        from prep_demo import recipe_path
    except ImportError as exc:
        raise UsageError("the demo subject is not installed (reinstall headprep)") from exc
    recipe = load_recipe(recipe_path())
    return run_one(recipe, args, ctx, args.out / f"{recipe.subject}-forward")
