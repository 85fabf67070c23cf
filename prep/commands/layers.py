"""``headprep layers``: check (and derive) the head-model layer meshes."""
from __future__ import annotations

import argparse

from ..errors import UsageError

HELP = "check (and derive) the head-model layer meshes"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    raise UsageError("'layers' is not available in this version of the kit yet")
