"""``headprep run``: prepare one subject from a recipe (TOML)."""
from __future__ import annotations

import argparse

from ..errors import UsageError

HELP = "prepare one subject from a recipe (TOML)"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    raise UsageError("'run' is not available in this version of the kit yet")
