"""``headprep new-reader``: scaffold a plugin package for a new electrode-file format."""
from __future__ import annotations

import argparse

from ..errors import UsageError

HELP = "scaffold a plugin package for a new electrode-file format"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    raise UsageError("'new-reader' is not available in this version of the kit yet")
