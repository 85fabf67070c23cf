"""``headprep inspect``: read an electrode file and report what is in it."""
from __future__ import annotations

import argparse

from ..errors import UsageError

HELP = "read an electrode file and report what is in it"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    raise UsageError("'inspect' is not available in this version of the kit yet")
