"""``headprep template``: place a standard electrode system on a scalp mesh by rule."""
from __future__ import annotations

import argparse

from ..errors import UsageError

HELP = "place a standard electrode system on a scalp mesh by rule"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    raise UsageError("'template' is not available in this version of the kit yet")
