"""``headprep export``: write a bundle into another open container (.mat, HDF5)."""
from __future__ import annotations

import argparse

from ..errors import UsageError

HELP = "write a bundle into another open container (.mat, HDF5)"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    raise UsageError("'export' is not available in this version of the kit yet")
