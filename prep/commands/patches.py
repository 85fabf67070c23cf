"""``headprep patches``: turn cortex surfaces into source patches."""
from __future__ import annotations

import argparse

from ..errors import UsageError

HELP = "turn cortex surfaces into source patches"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    raise UsageError("'patches' is not available in this version of the kit yet")
