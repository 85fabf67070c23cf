"""``headprep run RECIPE``: prepare one subject from its recipe."""
from __future__ import annotations

import argparse
from pathlib import Path

from ..recipe import load_recipe
from ._subject import add_output_arguments, run_one

HELP = "prepare one subject from a recipe (TOML) into a verified bundle"
DESCRIPTION = """Prepare one subject from a recipe: read the electrodes and meshes, co-register,
check placement, make source patches, build the head model and lead field,
check its conditioning, and write a verified, checksummed bundle.

Exit 0 when no check failed, 1 when one did (the bundle is still written, with
the findings inside), 2 when an input or the recipe cannot be used (nothing is
written), 3 on an internal error."""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("recipe", help="subject recipe (TOML); see docs/recipes.md")
    parser.add_argument("--out", type=Path, help="bundle path (default: from the recipe)")
    add_output_arguments(parser)


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    return run_one(load_recipe(args.recipe), args, ctx, args.out)
